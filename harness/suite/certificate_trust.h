// File: certificate_trust.h
//
// Signing and checking certificates (weir.v1.Certificate) with Ed25519
// (signature.h). What is signed, exactly (docs/certificates.md):
//
//   kCertificateSignatureContext   the 30 bytes "weir.v1.Certificate signature\n"
//   followed by
//   the Protobuf binary encoding of the certificate with `signature` empty:
//   fields in field-number order, fields at their default value left out
//   (proto3), repeated fields as one record per element, no unknown fields —
//   what Protobuf's deterministic serialization writes.
//
// So the signature covers every other field: the suite, its digest, the
// verdicts and counts, the connector's and weir's SHA-256, the recheck
// figures, the seal and the key's fingerprint. The seal is computed first
// (with `seal` and `signature` empty), then the fingerprint is set, then the
// signature. Ed25519 signatures are deterministic (RFC 8032 section 5.1.6):
// the same certificate and key give the same bytes.
//
// Example:
//   v1::Certificate cert = MakeCertificate(head, tally);
//   absl::Status st = SignCertificate(*key, &cert);
//   absl::Status ok = CheckCertificateSignature(cert, trusted);
#pragma once

#include <string>
#include <string_view>

#include "absl/status/status.h"
#include "harness/suite/signature.h"
#include "weir/v1/suite.pb.h"

namespace weir {

inline constexpr std::string_view kCertificateSignatureContext = "weir.v1.Certificate signature\n";

// The bytes an Ed25519 signature of `certificate` signs (see above).
std::string CertificateSignedBytes(const v1::Certificate& certificate);

// Sets key_fingerprint, recomputes the seal, and sets the signature.
// Error: the key has no private half, or OpenSSL failed.
[[nodiscard]] absl::Status SignCertificate(const Ed25519Key& key, v1::Certificate* certificate);

// OK when `certificate` carries a valid signature by `trusted`. Else
// PermissionDenied with one line saying why: unsigned, signed by another key
// (both fingerprints), or altered since it was signed.
[[nodiscard]] absl::Status CheckCertificateSignature(const v1::Certificate& certificate, const Ed25519Key& trusted);

}  // namespace weir
