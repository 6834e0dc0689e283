#include "harness/replay/trace_reader.h"

#include "absl/strings/str_cat.h"

namespace weir {
namespace {

// The parser's message up to its first line break (it quotes the input after).
std::string FirstLine(const std::string& message) {
  return message.substr(0, message.find('\n'));
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
    return r->Error(absl::StrCat(FirstLine(std::string(line.status().message())), "; expected a trace header line"));
  }
  if (!line->has_header()) return r->Error("expected a trace header line first");
  r->header_ = std::move(*line->mutable_header());
  return r;
}

bool TraceReader::ReadLine() {
  text_.clear();
  char buf[1 << 14];
  bool any = false;
  while (std::fgets(buf, sizeof buf, file_) != nullptr) {
    any = true;
    text_ += buf;
    // No trace line is this long (the header holds a scenario and a plan):
    // stop reading so a damaged or hostile file cannot exhaust memory.
    if (text_.size() > kMaxLineBytes) {
      overlong_ = true;
      break;
    }
    if (!text_.empty() && text_.back() == '\n') break;
  }
  if (any) ++line_no_;
  return any;
}

std::string TraceReader::OverlongMessage() const {
  return absl::StrCat("line longer than ", kMaxLineBytes, " bytes; expected a trace line");
}

absl::Status TraceReader::Error(const std::string& what) const {
  return absl::InvalidArgumentError(absl::StrCat(path_, ":", line_no_ == 0 ? 1 : line_no_, ": ", what));
}

absl::StatusOr<bool> TraceReader::Next() {
  if (done_) return false;
  if (!ReadLine()) {
    ++line_no_;  // the footer was expected on the line after the last one
    return Error(absl::StrCat("truncated: expected more events or the trace footer after ", events_,
                              " event(s)"));
  }
  if (overlong_) return Error(OverlongMessage());
  if (text_.back() != '\n') return Error("truncated line (no newline); expected a complete JSON line");
  auto line = DecodeTraceLine(text_);
  if (!line.ok()) return Error(absl::StrCat(FirstLine(std::string(line.status().message())), "; expected an event or the footer"));
  if (line->has_header()) return Error("a second header; expected an event or the footer");
  if (line->has_footer()) {
    footer_ = line->footer();
    if (footer_.events() != events_) {
      return Error(absl::StrCat("footer says ", footer_.events(), " events; the trace holds ", events_));
    }
    const std::string digest = digest_.HexDigest();
    if (footer_.digest() != digest) {
      return Error(absl::StrCat("footer digest ", footer_.digest(), " does not match the event lines (",
                                digest, "); the trace was altered"));
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
