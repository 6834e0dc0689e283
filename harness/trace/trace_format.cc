#include "harness/trace/trace_format.h"

#include <openssl/evp.h>

#include <google/protobuf/util/json_util.h>

#include "absl/status/status.h"

namespace weir {

std::string EncodeTraceLine(const v1::TraceLine& line) {
  std::string out;
  google::protobuf::util::JsonPrintOptions options;
  options.preserve_proto_field_names = true;
  (void)google::protobuf::util::MessageToJsonString(line, &out, options);
  out.push_back('\n');
  return out;
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
  *line_.mutable_event() = event;
  const std::string text = EncodeTraceLine(line_);
  digest_.Update(text);
  ++events_;
  if (sink_ != nullptr) sink_->WriteLine(text);
}

}  // namespace weir
