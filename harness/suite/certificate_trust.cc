#include "harness/suite/certificate_trust.h"

#include <google/protobuf/io/coded_stream.h>
#include <google/protobuf/io/zero_copy_stream_impl_lite.h>

#include "absl/strings/str_cat.h"
#include "harness/suite/suite_reports.h"

namespace weir {

std::string CertificateSignedBytes(const v1::Certificate& certificate) {
  v1::Certificate copy = certificate;
  copy.clear_signature();
  std::string bytes(kCertificateSignatureContext);
  {
    google::protobuf::io::StringOutputStream stream(&bytes);
    google::protobuf::io::CodedOutputStream coded(&stream);
    coded.SetSerializationDeterministic(true);
    copy.SerializeToCodedStream(&coded);
  }
  return bytes;
}

absl::Status SignCertificate(const Ed25519Key& key, v1::Certificate* certificate) {
  certificate->clear_signature();
  certificate->set_key_fingerprint(key.Fingerprint());
  certificate->set_seal(CertificateSeal(*certificate));
  auto signature = key.Sign(CertificateSignedBytes(*certificate));
  if (!signature.ok()) return signature.status();
  certificate->set_signature(*signature);
  return absl::OkStatus();
}

absl::Status CheckCertificateSignature(const v1::Certificate& certificate, const Ed25519Key& trusted) {
  if (certificate.signature().empty()) {
    return absl::PermissionDeniedError("it is not signed (only sealed: anyone can recompute a seal)");
  }
  const std::string want = trusted.Fingerprint();
  if (certificate.key_fingerprint() != want) {
    return absl::PermissionDeniedError(absl::StrCat("it is signed by another key (", certificate.key_fingerprint(),
                                                    "), not by the trusted key (", want, ")"));
  }
  if (!trusted.Verify(CertificateSignedBytes(certificate), certificate.signature())) {
    return absl::PermissionDeniedError(
        "it has been altered since it was signed (its signature does not match its contents)");
  }
  return absl::OkStatus();
}

}  // namespace weir
