// File: text_file.h
//
// Reads weir's input files written in Protobuf text format (scenarios, fault
// plans, profiles, suites) and reports every problem as
// "file:line:column: what was expected". Lines and columns are 1-based.
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

#include "absl/status/status.h"

namespace weir {

// Reads a whole file, at most max_bytes. Errors name the file and the cause.
[[nodiscard]] absl::Status ReadWholeFile(const std::string& path, std::string* out,
                                         std::size_t max_bytes = 16u << 20);

// Writes "<path>.partial" and renames it into place, so a failed write leaves
// neither a partial file nor a damaged old one. Errors name the path.
[[nodiscard]] absl::Status WriteFileAtomically(const std::string& path, const std::string& text);

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
  void Require(bool ok, std::initializer_list<std::string_view> field_path,
               const std::string& message);

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
