// File: trace_reader.h
//
// Reads a saved trace (trace.proto: header line, event lines, footer) as a
// stream, one event at a time, so memory does not grow with the trace. Every
// error names file:line and what was expected there: an empty file, a line
// that is not JSON, a missing header or footer, an event out of order, lines
// after the footer, a footer whose event count or digest does not match the
// event lines read.
//
// Example:
//   auto r = TraceReader::Open("run.jsonl");   // reads and checks the header
//   while (true) {
//     auto next = (*r)->Next();                // false at the footer
//     if (!next.ok()) …; if (!*next) break;
//     use((*r)->event(), (*r)->line());
//   }
//
// Thread safety: none.
#pragma once

#include <cstdint>
#include <cstdio>
#include <memory>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "harness/trace/trace_format.h"
#include "weir/v1/trace.pb.h"

namespace weir {

class TraceReader {
 public:
  // Opens the file and reads its header. Errors: InvalidArgument with
  // "file:line: …" (NotFound when the file cannot be opened).
  [[nodiscard]] static absl::StatusOr<std::unique_ptr<TraceReader>> Open(const std::string& path);
  ~TraceReader();
  TraceReader(const TraceReader&) = delete;
  TraceReader& operator=(const TraceReader&) = delete;

  const v1::TraceHeader& header() const { return header_; }

  // Reads the next line: true with an event, false at the footer (after
  // checking the count and digest, and that nothing follows it).
  [[nodiscard]] absl::StatusOr<bool> Next();
  // The last event read, and its exact line (newline included).
  const v1::TraceEvent& event() const { return event_; }
  const std::string& line() const { return text_; }
  // 1-based line number of the last line read.
  std::uint64_t line_number() const { return line_no_; }
  // Valid after Next() returned false.
  const v1::TraceFooter& footer() const { return footer_; }

  const std::string& path() const { return path_; }

 private:
  static constexpr std::size_t kMaxLineBytes = 32u << 20;
  std::string OverlongMessage() const;
  explicit TraceReader(std::string path) : path_(std::move(path)) {}
  // Reads one line into text_; false at end of file.
  bool ReadLine();
  // "path:line[:column]: what"; column 0 leaves it out.
  absl::Status Error(const std::string& what, std::size_t column = 0) const;
  // A line that does not decode, with the column the decoder points at.
  absl::Status DecodeError(const absl::Status& status, const char* expected) const;

  std::string path_;
  std::FILE* file_ = nullptr;
  // Bytes read from file_ and not yet taken into a line: [chunk_begin_, chunk_end_).
  std::vector<char> chunk_ = std::vector<char>(1 << 16);
  std::size_t chunk_begin_ = 0;
  std::size_t chunk_end_ = 0;
  std::string text_;
  std::uint64_t line_no_ = 0;
  std::uint64_t events_ = 0;
  bool done_ = false;
  bool overlong_ = false;  // the last line read exceeded kMaxLineBytes
  v1::TraceHeader header_;
  v1::TraceEvent event_;
  v1::TraceFooter footer_;
  Sha256 digest_;
};

// Reads the whole file once through a TraceReader: OK when it is a complete,
// consistent trace.
[[nodiscard]] absl::Status CheckTraceFile(const std::string& path);

}  // namespace weir
