// File: trace_format.h
//
// The documented on-disk form of a trace: JSON lines, each Protobuf's JSON
// mapping of one weir.v1.TraceLine (header, then events, then footer). The
// digest is SHA-256 over the exact bytes of the event lines, newline included.
//
// TraceEncoder turns events into lines and keeps the running digest; it does no
// I/O. The caller decides where the lines go.
#pragma once

#include <memory>
#include <string>

#include "absl/status/statusor.h"
#include "harness/trace/trace_log.h"
#include "weir/v1/trace.pb.h"

namespace weir {

// One JSON line (with trailing '\n') for a trace line. Field order and spelling
// are fixed by the schema, so equal lines mean equal events. The bytes are
// exactly those of Protobuf's JSON printer (EncodeTraceLineWithJsonPrinter),
// which traces and their digests were defined by; lines it cannot reproduce
// byte for byte (escaped strings, floating point…) go through the printer.
std::string EncodeTraceLine(const v1::TraceLine& line);
// The direct encoder alone (tests): false where EncodeTraceLine would defer to
// the printer.
bool EncodeTraceLineDirectly(const v1::TraceLine& line, std::string* out);
// The same through Protobuf's JSON printer (MessageToJsonString with the
// proto field names): the definition, several times slower.
std::string EncodeTraceLineWithJsonPrinter(const v1::TraceLine& line);

// Parses one line. Errors name the cause; the caller adds file:line.
[[nodiscard]] absl::StatusOr<v1::TraceLine> DecodeTraceLine(std::string_view line);

// Incremental SHA-256, printed as "sha256:<64 hex>".
class Sha256 {
 public:
  Sha256();
  ~Sha256();
  Sha256(const Sha256&) = delete;
  Sha256& operator=(const Sha256&) = delete;
  void Update(std::string_view bytes);
  // Finishes the hash; the object must not be updated afterwards.
  std::string HexDigest();

 private:
  struct Impl;
  std::unique_ptr<Impl> impl_;
};

// Observes a trace, encodes each event as a line and keeps the digest. If a
// sink is given it receives each encoded event line.
class TraceEncoder : public TraceObserver {
 public:
  class LineSink {
   public:
    virtual ~LineSink() = default;
    virtual void WriteLine(const std::string& line) = 0;
  };
  explicit TraceEncoder(LineSink* sink = nullptr) : sink_(sink) {}

  void OnEvent(const v1::TraceEvent& event) override;
  // "sha256:…" over every event line seen. Call once, at the end.
  std::string FinishDigest() { return digest_.HexDigest(); }
  std::uint64_t events() const { return events_; }

 private:
  LineSink* sink_;
  Sha256 digest_;
  v1::TraceLine line_;  // for lines the printer must encode
  std::string text_;    // the current line, reused
  std::uint64_t events_ = 0;
};

}  // namespace weir
