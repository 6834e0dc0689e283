#include "harness/trace/trace_format.h"

#include <openssl/evp.h>

#include <charconv>
#include <memory>
#include <cstdio>
#include <string_view>
#include <vector>

#include <google/protobuf/util/json_util.h>

#include "absl/container/flat_hash_map.h"
#include "absl/status/status.h"
#include "absl/strings/str_cat.h"

namespace weir {

std::string EncodeTraceLineWithJsonPrinter(const v1::TraceLine& line) {
  std::string out;
  google::protobuf::util::JsonPrintOptions options;
  options.preserve_proto_field_names = true;
  (void)google::protobuf::util::MessageToJsonString(line, &out, options);
  out.push_back('\n');
  return out;
}

namespace {

using google::protobuf::FieldDescriptor;
using google::protobuf::Message;

// Characters Protobuf's JSON printer writes as they are. Anything else (quotes,
// backslash, <, >, &, =, ', control and non-ASCII bytes) sends the whole line
// to the printer itself. trace_encoding_test checks this set against it.
bool PlainJsonChar(unsigned char c) {
  if (c < 0x20 || c > 0x7e) return false;
  switch (c) {
    case '"':
    case '\\':
    case '<':
    case '>':
    case '&':
    case '=':
    case '\'': return false;
    default: return true;
  }
}

template <typename Int>
void AppendDecimal(std::string* out, Int v) {
  char buf[24];
  const auto end = std::to_chars(buf, buf + sizeof buf, v).ptr;
  out->append(buf, static_cast<std::size_t>(end - buf));
}

// 64-bit integers are strings in Protobuf's JSON mapping.
template <typename Int>
void AppendQuotedDecimal(std::string* out, Int v) {
  out->push_back('"');
  AppendDecimal(out, v);
  out->push_back('"');
}

// The direct encoder transcodes a message's binary serialization (generated
// code, fast) to JSON with a table per message type built once per thread
// from its descriptor, instead of asking reflection for every field. The
// binary form already is what the printer prints: fields in number order,
// proto3 scalars at their default left out, fields with presence (optional,
// oneof members, messages) kept when set, a repeated field's elements
// together.
struct FieldTable;
struct MessageTable {
  bool printable = true;  // false: well-known types, maps, extensions
  // Indexed by field number (trace messages number their fields densely).
  std::vector<const FieldTable*> by_number;
  std::vector<std::unique_ptr<FieldTable>> fields;
};
struct FieldTable {
  const FieldDescriptor* field;
  std::string key;  // "name":
  const MessageTable* message = nullptr;
};

const MessageTable& TableFor(const google::protobuf::Descriptor* d) {
  thread_local absl::flat_hash_map<const google::protobuf::Descriptor*, std::unique_ptr<MessageTable>> tables;
  if (auto it = tables.find(d); it != tables.end()) return *it->second;
  auto& table = tables[d];
  table = std::make_unique<MessageTable>();
  MessageTable& t = *table;
  t.printable = d->file()->package() != "google.protobuf" && d->extension_range_count() == 0;
  for (int i = 0; i < d->field_count(); ++i) {
    const FieldDescriptor* f = d->field(i);
    if (f->is_map() || f->number() > 4096) {
      t.printable = false;
      continue;
    }
    auto field = std::make_unique<FieldTable>();
    field->field = f;
    field->key = absl::StrCat("\"", f->name(), "\":");
    if (f->cpp_type() == FieldDescriptor::CPPTYPE_MESSAGE) field->message = &TableFor(f->message_type());
    if (t.by_number.size() <= static_cast<std::size_t>(f->number())) t.by_number.resize(f->number() + 1);
    t.by_number[f->number()] = field.get();
    t.fields.push_back(std::move(field));
  }
  return t;
}

class WireReader {
 public:
  WireReader(const char* p, const char* end) : p_(p), end_(end) {}
  bool done() const { return p_ >= end_; }
  bool Varint(std::uint64_t* v) {
    *v = 0;
    for (int shift = 0; shift < 64 && p_ < end_; shift += 7) {
      const auto byte = static_cast<unsigned char>(*p_++);
      *v |= static_cast<std::uint64_t>(byte & 0x7f) << shift;
      if ((byte & 0x80) == 0) return true;
    }
    return false;
  }
  bool Fixed(int bytes, std::uint64_t* v) {
    if (end_ - p_ < bytes) return false;
    *v = 0;
    for (int i = 0; i < bytes; ++i) *v |= static_cast<std::uint64_t>(static_cast<unsigned char>(p_[i])) << (8 * i);
    p_ += bytes;
    return true;
  }
  bool Bytes(std::string_view* v) {
    std::uint64_t n = 0;
    if (!Varint(&n) || n > static_cast<std::uint64_t>(end_ - p_)) return false;
    *v = std::string_view(p_, static_cast<std::size_t>(n));
    p_ += n;
    return true;
  }
  // The next tag without consuming it (0 at the end or when unreadable).
  std::uint64_t PeekTag() {
    const char* keep = p_;
    std::uint64_t tag = 0;
    if (done() || !Varint(&tag)) tag = 0;
    p_ = keep;
    return tag;
  }

 private:
  const char* p_;
  const char* end_;
};

bool AppendWireMessage(const MessageTable& t, std::string_view bytes, std::string* out);

// One scalar or message value of `f` whose wire type is `wire`.
bool AppendWireValue(const FieldTable& f, int wire, WireReader& in, std::string* out) {
  std::uint64_t v = 0;
  switch (f.field->type()) {
    case FieldDescriptor::TYPE_INT32:
      if (wire != 0 || !in.Varint(&v)) return false;
      AppendDecimal(out, static_cast<std::int32_t>(v));
      return true;
    case FieldDescriptor::TYPE_UINT32:
      if (wire != 0 || !in.Varint(&v)) return false;
      AppendDecimal(out, static_cast<std::uint32_t>(v));
      return true;
    case FieldDescriptor::TYPE_INT64:
      if (wire != 0 || !in.Varint(&v)) return false;
      AppendQuotedDecimal(out, static_cast<std::int64_t>(v));
      return true;
    case FieldDescriptor::TYPE_UINT64:
      if (wire != 0 || !in.Varint(&v)) return false;
      AppendQuotedDecimal(out, v);
      return true;
    case FieldDescriptor::TYPE_FIXED32:
      if (wire != 5 || !in.Fixed(4, &v)) return false;
      AppendDecimal(out, static_cast<std::uint32_t>(v));
      return true;
    case FieldDescriptor::TYPE_FIXED64:
      if (wire != 1 || !in.Fixed(8, &v)) return false;
      AppendQuotedDecimal(out, v);
      return true;
    case FieldDescriptor::TYPE_BOOL:
      if (wire != 0 || !in.Varint(&v)) return false;
      out->append(v != 0 ? "true" : "false");
      return true;
    case FieldDescriptor::TYPE_ENUM: {
      if (wire != 0 || !in.Varint(&v)) return false;
      const auto* value = f.field->enum_type()->FindValueByNumber(static_cast<int>(v));
      if (value == nullptr) return false;
      out->push_back('"');
      out->append(value->name());
      out->push_back('"');
      return true;
    }
    case FieldDescriptor::TYPE_STRING: {
      std::string_view text;
      if (wire != 2 || !in.Bytes(&text)) return false;
      for (const char c : text) {
        if (!PlainJsonChar(static_cast<unsigned char>(c))) return false;
      }
      out->push_back('"');
      out->append(text);
      out->push_back('"');
      return true;
    }
    case FieldDescriptor::TYPE_MESSAGE: {
      std::string_view nested;
      if (wire != 2 || !in.Bytes(&nested)) return false;
      return AppendWireMessage(*f.message, nested, out);
    }
    default:  // floating point, bytes, zigzag and signed fixed integers, groups
      return false;
  }
}

bool AppendWireMessage(const MessageTable& t, std::string_view bytes, std::string* out) {
  if (!t.printable) return false;
  WireReader in(bytes.data(), bytes.data() + bytes.size());
  out->push_back('{');
  std::uint64_t last_number = 0;
  while (!in.done()) {
    std::uint64_t tag = 0;
    if (!in.Varint(&tag)) return false;
    const std::uint64_t number = tag >> 3;
    const int wire = static_cast<int>(tag & 7);
    if (number <= last_number || number >= t.by_number.size() || t.by_number[number] == nullptr) {
      return false;  // out of order, repeated singular, or unknown: let the printer decide
    }
    last_number = number;
    const FieldTable& f = *t.by_number[number];
    if (out->back() != '{') out->push_back(',');
    out->append(f.key);
    if (!f.field->is_repeated()) {
      if (!AppendWireValue(f, wire, in, out)) return false;
      continue;
    }
    // Repeated strings and messages, one element per tag; packed scalars
    // (no trace line has any) are left to the printer.
    if (f.field->is_packable()) return false;
    out->push_back('[');
    bool first = true;
    for (;;) {
      if (!first) out->push_back(',');
      first = false;
      if (!AppendWireValue(f, wire, in, out)) return false;
      const std::uint64_t next = in.PeekTag();
      if (next == 0 || (next >> 3) != number) break;
      std::uint64_t again = 0;
      in.Varint(&again);
      if (static_cast<int>(again & 7) != wire) return false;
    }
    out->push_back(']');
  }
  out->push_back('}');
  return true;
}

// Appends `m` as Protobuf's JSON printer does with preserve_proto_field_names
// (fields in number order, default scalars omitted unless they have presence,
// 64-bit integers quoted, enums by name). Returns false on anything it does
// not handle (floating point, bytes, maps, well-known types, escaped strings,
// unnamed enum values); *out is then garbage and the caller falls back.
bool AppendMessage(const Message& m, std::string* out) {
  thread_local std::string wire;
  wire.clear();
  if (!m.SerializeToString(&wire)) return false;
  return AppendWireMessage(TableFor(m.GetDescriptor()), wire, out);
}

}  // namespace

bool EncodeTraceLineDirectly(const v1::TraceLine& line, std::string* out) {
  out->clear();
  if (!AppendMessage(line, out)) return false;
  out->push_back('\n');
  return true;
}

std::string EncodeTraceLine(const v1::TraceLine& line) {
  std::string out;
  if (AppendMessage(line, &out)) {
    out.push_back('\n');
    return out;
  }
  return EncodeTraceLineWithJsonPrinter(line);
}

absl::StatusOr<v1::TraceLine> DecodeTraceLine(std::string_view line) {
  v1::TraceLine out;
  google::protobuf::util::JsonParseOptions options;
  options.ignore_unknown_fields = false;
  auto status = google::protobuf::util::JsonStringToMessage(google::protobuf::StringPiece(line.data(), line.size()),
                                                            &out, options);
  if (!status.ok()) {
    return absl::InvalidArgumentError("not a trace line: " + std::string(status.message()));
  }
  return out;
}

struct Sha256::Impl {
  EVP_MD_CTX* ctx = nullptr;
};

Sha256::Sha256() : impl_(std::make_unique<Impl>()) {
  impl_->ctx = EVP_MD_CTX_new();
  EVP_DigestInit_ex(impl_->ctx, EVP_sha256(), nullptr);
}

Sha256::~Sha256() { EVP_MD_CTX_free(impl_->ctx); }

void Sha256::Update(std::string_view bytes) { EVP_DigestUpdate(impl_->ctx, bytes.data(), bytes.size()); }

std::string Sha256::HexDigest() {
  unsigned char md[EVP_MAX_MD_SIZE];
  unsigned int len = 0;
  EVP_DigestFinal_ex(impl_->ctx, md, &len);
  static constexpr char kHex[] = "0123456789abcdef";
  std::string out = "sha256:";
  for (unsigned int i = 0; i < len; ++i) {
    out.push_back(kHex[md[i] >> 4]);
    out.push_back(kHex[md[i] & 15]);
  }
  return out;
}

void TraceEncoder::OnEvent(const v1::TraceEvent& event) {
  // {"event":…} without copying the event into a TraceLine.
  text_.assign("{\"event\":");
  if (AppendMessage(event, &text_)) {
    text_.append("}\n");
  } else {
    *line_.mutable_event() = event;
    text_ = EncodeTraceLineWithJsonPrinter(line_);
  }
  digest_.Update(text_);
  ++events_;
  if (sink_ != nullptr) sink_->WriteLine(text_);
}

}  // namespace weir
