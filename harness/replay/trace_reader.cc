#include "harness/replay/trace_reader.h"

#include <cstring>
#include <string_view>
#include <vector>

#include "absl/strings/ascii.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_split.h"
#include "absl/strings/strip.h"

namespace weir {
namespace {

// The parser's message up to its first line break (it quotes the input after).
std::string FirstLine(const std::string& message) { return message.substr(0, message.find('\n')); }

// The 1-based column a JSON decoding error of `line` points at, or 0. Protobuf's
// JSON parser quotes up to 20 bytes around the error with a caret line below
// (json_stream_parser.cc, ReportFailure); a field it cannot place starts with
// the field's name ("nosuch: Cannot find field."), found here as a JSON key.
std::size_t ErrorColumn(std::string_view line, const std::string& message) {
  // The quoted input may itself hold the line's newline: the caret line is
  // the last one, the quote everything between it and the first.
  const std::size_t nl1 = message.find('\n');
  const std::size_t nl2 = message.rfind('\n');
  if (nl1 != std::string::npos && nl2 > nl1) {
    const std::string segment = message.substr(nl1 + 1, nl2 - nl1 - 1);
    const std::string caret = message.substr(nl2 + 1);
    const std::size_t at = caret.find('^');
    const std::size_t where = segment.empty() ? std::string::npos : line.find(segment);
    if (at != std::string::npos && where != std::string::npos) return where + at + 1;
  }
  // A line that ends inside a value or an object: the column after its end.
  if (message.find("Unexpected end of string") != std::string::npos) {
    std::size_t end = line.size();
    while (end > 0 && (line[end - 1] == '\n' || line[end - 1] == '\r')) --end;
    return end + 1;
  }
  // "(event.published) nosuch: Cannot find field." or
  // "(event.published.message_id): invalid value …": follow the keys.
  absl::string_view head(message);
  absl::ConsumePrefix(&head, "not a trace line: ");
  head = head.substr(0, head.find(": "));
  std::vector<std::string> keys;
  if (absl::ConsumePrefix(&head, "(")) {
    const std::size_t close = head.find(')');
    if (close == absl::string_view::npos) return 0;
    keys = absl::StrSplit(head.substr(0, close), '.', absl::SkipEmpty());
    head = absl::StripLeadingAsciiWhitespace(head.substr(close + 1));
  }
  if (!head.empty()) keys.emplace_back(head);
  std::size_t at = 0;
  for (const std::string& key : keys) {
    if (key.find_first_of(" \"") != std::string::npos) return 0;
    at = line.find(absl::StrCat("\"", key, "\""), at);
    if (at == std::string_view::npos) return 0;
  }
  return keys.empty() ? 0 : at + 1;
  return 0;
}

}  // namespace

TraceReader::~TraceReader() {
  if (file_ != nullptr) std::fclose(file_);
}

absl::StatusOr<std::unique_ptr<TraceReader>> TraceReader::Open(const std::string& path) {
  std::unique_ptr<TraceReader> r(new TraceReader(path));
  r->file_ = std::fopen(path.c_str(), "rb");
  if (r->file_ == nullptr) {
    return absl::NotFoundError(absl::StrCat(path, ": cannot open trace file"));
  }
  if (!r->ReadLine()) {
    return r->Error("empty file; expected a trace header line (weir run --trace FILE writes one)");
  }
  if (r->overlong_) return r->Error(r->OverlongMessage());
  auto line = DecodeTraceLine(r->text_);
  if (!line.ok()) {
    return r->DecodeError(line.status(), "a trace header line");
  }
  if (!line->has_header()) return r->Error("expected a trace header line first");
  r->header_ = std::move(*line->mutable_header());
  return r;
}

bool TraceReader::ReadLine() {
  // Every byte is kept, a NUL too (the decoder then names it): a line is what
  // lies between two newlines, however damaged.
  text_.clear();
  bool any = false;
  for (;;) {
    if (chunk_begin_ == chunk_end_) {
      chunk_begin_ = 0;
      chunk_end_ = std::fread(chunk_.data(), 1, chunk_.size(), file_);
      if (chunk_end_ == 0) break;
    }
    any = true;
    const char* begin = chunk_.data() + chunk_begin_;
    const std::size_t available = chunk_end_ - chunk_begin_;
    const auto* newline = static_cast<const char*>(std::memchr(begin, '\n', available));
    const std::size_t take = newline == nullptr ? available : static_cast<std::size_t>(newline - begin) + 1;
    text_.append(begin, take);
    chunk_begin_ += take;
    // No trace line is this long (the header holds a scenario and a plan):
    // stop reading so a damaged or hostile file cannot exhaust memory.
    if (text_.size() > kMaxLineBytes) {
      overlong_ = true;
      break;
    }
    if (newline != nullptr) break;
  }
  if (any) ++line_no_;
  return any;
}

std::string TraceReader::OverlongMessage() const {
  return absl::StrCat("line longer than ", kMaxLineBytes, " bytes; expected a trace line");
}

absl::Status TraceReader::Error(const std::string& what, std::size_t column) const {
  return absl::InvalidArgumentError(
      absl::StrCat(path_, ":", line_no_ == 0 ? 1 : line_no_, column > 0 ? absl::StrCat(":", column) : "", ": ", what));
}

absl::Status TraceReader::DecodeError(const absl::Status& status, const char* expected) const {
  const std::string message(status.message());
  return Error(absl::StrCat(FirstLine(message), "; expected ", expected), ErrorColumn(text_, message));
}

absl::StatusOr<bool> TraceReader::Next() {
  if (done_) return false;
  if (!ReadLine()) {
    ++line_no_;  // the footer was expected on the line after the last one
    return Error(absl::StrCat("truncated: expected more events or the trace footer after ", events_, " event(s)"));
  }
  if (overlong_) return Error(OverlongMessage());
  if (text_.back() != '\n') return Error("truncated line (no newline); expected a complete JSON line");
  auto line = DecodeTraceLine(text_);
  if (!line.ok()) return DecodeError(line.status(), "an event or the footer");
  if (line->has_header()) return Error("a second header; expected an event or the footer");
  if (line->has_footer()) {
    footer_ = line->footer();
    if (footer_.events() != events_) {
      return Error(absl::StrCat("footer says ", footer_.events(), " events; the trace holds ", events_));
    }
    const std::string digest = digest_.HexDigest();
    if (footer_.digest() != digest) {
      return Error(absl::StrCat("footer digest ", footer_.digest(), " does not match the event lines (", digest,
                                "); the trace was altered"));
    }
    const std::uint64_t footer_line = line_no_;
    if (ReadLine()) return Error(absl::StrCat("text after the footer (line ", footer_line, ")"));
    done_ = true;
    return false;
  }
  if (!line->has_event()) return Error("empty trace line; expected an event or the footer");
  event_ = std::move(*line->mutable_event());
  if (event_.seq() != events_) {
    return Error(absl::StrCat("event seq ", event_.seq(), "; expected ", events_));
  }
  digest_.Update(text_);
  ++events_;
  return true;
}

absl::Status CheckTraceFile(const std::string& path) {
  auto r = TraceReader::Open(path);
  if (!r.ok()) return r.status();
  while (true) {
    auto next = (*r)->Next();
    if (!next.ok()) return next.status();
    if (!*next) return absl::OkStatus();
  }
}

}  // namespace weir
