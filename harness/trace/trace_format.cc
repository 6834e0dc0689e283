#include "harness/trace/trace_format.h"

#include <openssl/evp.h>

#include <charconv>
#include <cstdio>
#include <string_view>
#include <vector>

#include <google/protobuf/util/json_util.h>

#include "absl/status/status.h"

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
using google::protobuf::Reflection;

// Characters Protobuf's JSON printer writes as they are. Anything else (quotes,
// backslash, <, >, &, =, ', control and non-ASCII bytes) sends the whole line
// to the printer itself. trace_encoding_test checks this set against it.
bool PlainJsonChar(unsigned char c) {
  if (c < 0x20 || c > 0x7e) return false;
  switch (c) {
    case '"': case '\\': case '<': case '>': case '&': case '=': case '\'':
      return false;
    default:
      return true;
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

// Appends one value of `field` (index < 0: singular). False: not handled here.
bool AppendValue(const Message& m, const Reflection& r, const FieldDescriptor& f, int index,
                 std::string* out);

// Appends `m` as Protobuf's JSON printer does with preserve_proto_field_names
// (fields in number order, default scalars omitted unless they have presence,
// 64-bit integers quoted, enums by name). Returns false on anything it does
// not handle (floating point, bytes, maps, well-known types, escaped strings,
// unnamed enum values); *out is then garbage and the caller falls back.
bool AppendMessage(const Message& m, std::string* out) {
  const Reflection& r = *m.GetReflection();
  if (m.GetDescriptor()->file()->package() == "google.protobuf") return false;
  std::vector<const FieldDescriptor*> fields;
  r.ListFields(m, &fields);
  out->push_back('{');
  bool first = true;
  for (const FieldDescriptor* f : fields) {
    if (f->is_map() || f->is_extension()) return false;
    if (!first) out->push_back(',');
    first = false;
    out->push_back('"');
    out->append(f->name());
    out->append("\":");
    if (f->is_repeated()) {
      out->push_back('[');
      const int n = r.FieldSize(m, f);
      for (int i = 0; i < n; ++i) {
        if (i > 0) out->push_back(',');
        if (!AppendValue(m, r, *f, i, out)) return false;
      }
      out->push_back(']');
    } else if (!AppendValue(m, r, *f, -1, out)) {
      return false;
    }
  }
  out->push_back('}');
  return true;
}

bool AppendValue(const Message& m, const Reflection& r, const FieldDescriptor& f, int index,
                 std::string* out) {
  const bool rep = index >= 0;
  switch (f.cpp_type()) {
    case FieldDescriptor::CPPTYPE_INT32: {
      const std::int32_t v = rep ? r.GetRepeatedInt32(m, &f, index) : r.GetInt32(m, &f);
      AppendDecimal(out, v);
      return true;
    }
    case FieldDescriptor::CPPTYPE_UINT32: {
      const std::uint32_t v = rep ? r.GetRepeatedUInt32(m, &f, index) : r.GetUInt32(m, &f);
      AppendDecimal(out, v);
      return true;
    }
    case FieldDescriptor::CPPTYPE_INT64: {
      const std::int64_t v = rep ? r.GetRepeatedInt64(m, &f, index) : r.GetInt64(m, &f);
      AppendQuotedDecimal(out, v);
      return true;
    }
    case FieldDescriptor::CPPTYPE_UINT64: {
      const std::uint64_t v = rep ? r.GetRepeatedUInt64(m, &f, index) : r.GetUInt64(m, &f);
      AppendQuotedDecimal(out, v);
      return true;
    }
    case FieldDescriptor::CPPTYPE_BOOL: {
      const bool v = rep ? r.GetRepeatedBool(m, &f, index) : r.GetBool(m, &f);
      out->append(v ? "true" : "false");
      return true;
    }
    case FieldDescriptor::CPPTYPE_ENUM: {
      const int v = rep ? r.GetRepeatedEnumValue(m, &f, index) : r.GetEnumValue(m, &f);
      const auto* value = f.enum_type()->FindValueByNumber(v);
      if (value == nullptr) return false;
      out->push_back('"');
      out->append(value->name());
      out->push_back('"');
      return true;
    }
    case FieldDescriptor::CPPTYPE_STRING: {
      if (f.type() == FieldDescriptor::TYPE_BYTES) return false;
      std::string scratch;
      const std::string& v =
          rep ? r.GetRepeatedStringReference(m, &f, index, &scratch) : r.GetStringReference(m, &f, &scratch);
      for (const char c : v) {
        if (!PlainJsonChar(static_cast<unsigned char>(c))) return false;
      }
      out->push_back('"');
      out->append(v);
      out->push_back('"');
      return true;
    }
    case FieldDescriptor::CPPTYPE_MESSAGE:
      return AppendMessage(rep ? r.GetRepeatedMessage(m, &f, index) : r.GetMessage(m, &f), out);
    case FieldDescriptor::CPPTYPE_FLOAT:
    case FieldDescriptor::CPPTYPE_DOUBLE:
      return false;
  }
  return false;
}

}  // namespace

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
  auto status = google::protobuf::util::JsonStringToMessage(
      google::protobuf::StringPiece(line.data(), line.size()), &out, options);
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

void Sha256::Update(std::string_view bytes) {
  EVP_DigestUpdate(impl_->ctx, bytes.data(), bytes.size());
}

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
