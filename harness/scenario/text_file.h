// File: text_file.h
//
// Reads weir's input files written in Protobuf text format (scenarios, fault
// plans, profiles, suites) and reports every problem as
// "file:line:column: what was expected". Lines and columns are 1-based.
// Also the whole-file helpers every command uses: read a file, write one
// atomically (whole, or streamed piece by piece).
//
// Example:
//   TextFile file("s.scenario");
//   v1::Scenario s;
//   if (auto st = file.Parse(&s); !st.ok()) return st;       // syntax
//   file.Require(s.workload().messages() >= 1, {"workload", "messages"},
//                "workload.messages must be at least 1");      // meaning
//   return file.status();
#pragma once

#include <initializer_list>
#include <memory>
#include <string>
#include <string_view>
#include <vector>

#include <google/protobuf/message.h>
#include <google/protobuf/text_format.h>

#include "absl/functional/function_ref.h"
#include "absl/status/status.h"

namespace weir {

// Reads a whole file, at most max_bytes. Errors name the file and the cause.
[[nodiscard]] absl::Status ReadWholeFile(const std::string& path, std::string* out, std::size_t max_bytes = 16u << 20);

// Writes "<path>.partial" and renames it into place, so a failed write leaves
// neither a partial file nor a damaged old one. Errors name the path.
[[nodiscard]] absl::Status WriteFileAtomically(const std::string& path, const std::string& text);

// Receives an output's text piece by piece.
using TextOut = absl::FunctionRef<void(std::string_view)>;

// The streaming form, for outputs too large to build as one string: `write`
// gets a TextOut into "<path>.partial" and returns OK or why it stopped. The
// partial file is renamed into place only when `write` returned OK and every
// byte reached the file; otherwise it is removed and an old `path` is left as
// it was. Error: write's own status (its message after "path: "), or
// Unavailable("path: cannot write: …").
[[nodiscard]] absl::Status WriteFileAtomically(const std::string& path, absl::FunctionRef<absl::Status(TextOut)> write);

class TextFile {
 public:
  explicit TextFile(std::string path) : path_(std::move(path)) {}

  // Reads and parses the file into *message. On error returns
  // InvalidArgument("path:line:col: …").
  [[nodiscard]] absl::Status Parse(google::protobuf::Message* message);
  // Same, from text already in memory (path is used in messages only).
  [[nodiscard]] absl::Status ParseText(std::string_view text, google::protobuf::Message* message);

  // Records an error at the location of the field named by `path` (a chain of
  // field names from the root; a trailing element may be "name[i]" for a
  // repeated field) unless `ok`. Falls back to the nearest located parent, or
  // 1:1 for a field the file does not set.
  void Require(bool ok, std::initializer_list<std::string_view> field_path, const std::string& message);

  // OK, or InvalidArgument listing every recorded error, one per line.
  [[nodiscard]] absl::Status status() const;
  const std::string& path() const { return path_; }

 private:
  std::string Locate(std::initializer_list<std::string_view> field_path) const;

  std::string path_;
  const google::protobuf::Message* root_ = nullptr;
  google::protobuf::TextFormat::ParseInfoTree tree_;
  std::vector<std::string> errors_;
};

}  // namespace weir
