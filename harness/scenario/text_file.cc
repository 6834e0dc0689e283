#include "harness/scenario/text_file.h"

#include <sys/stat.h>

#include <cerrno>
#include <cstdio>
#include <cstring>
#include <fstream>
#include <sstream>

#include <google/protobuf/descriptor.h>
#include <google/protobuf/io/tokenizer.h>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"

namespace weir {
namespace {

class Collector : public google::protobuf::io::ErrorCollector {
 public:
  explicit Collector(const std::string& path) : path_(path) {}
  void AddError(int line, int column, const std::string& message) override {
    errors.push_back(absl::StrCat(path_, ":", line + 1, ":", column + 1, ": ", message));
  }
  void AddWarning(int line, int column, const std::string& message) override { AddError(line, column, message); }
  std::vector<std::string> errors;

 private:
  const std::string& path_;
};

}  // namespace

absl::Status ReadWholeFile(const std::string& path, std::string* out, std::size_t max_bytes) {
  struct stat st {};
  if (::stat(path.c_str(), &st) != 0) {
    return absl::NotFoundError(absl::StrCat(path, ": cannot open file (", std::strerror(errno), ")"));
  }
  if (S_ISDIR(st.st_mode)) {
    return absl::InvalidArgumentError(absl::StrCat(path, ": is a directory; expected a file"));
  }
  std::ifstream in(path, std::ios::binary);
  if (!in) return absl::NotFoundError(absl::StrCat(path, ": cannot open file (", std::strerror(errno), ")"));
  in.seekg(0, std::ios::end);
  const std::streamoff size = in.tellg();
  if (size < 0) return absl::InvalidArgumentError(absl::StrCat(path, ": not a regular file"));
  if (static_cast<std::size_t>(size) > max_bytes) {
    return absl::InvalidArgumentError(
        absl::StrCat(path, ":1:1: file is ", size, " bytes; expected at most ", max_bytes));
  }
  in.seekg(0);
  out->assign(static_cast<std::size_t>(size), '\0');
  in.read(out->data(), size);
  if (!in) return absl::DataLossError(absl::StrCat(path, ": read failed"));
  return absl::OkStatus();
}

absl::Status WriteFileAtomically(const std::string& path, const std::string& text) {
  return WriteFileAtomically(path, [&text](TextOut out) {
    out(text);
    return absl::OkStatus();
  });
}

absl::Status WriteFileAtomically(const std::string& path, absl::FunctionRef<absl::Status(TextOut)> write) {
  const std::string partial = path + ".partial";
  std::FILE* f = std::fopen(partial.c_str(), "wb");
  if (f == nullptr) return absl::UnavailableError(absl::StrCat(path, ": cannot write: ", std::strerror(errno)));
  bool failed = false;
  int error = 0;
  auto fail = [&failed, &error] {
    failed = true;
    error = errno;
  };
  const absl::Status produced = write([f, &failed, &fail](std::string_view piece) {
    if (!failed && std::fwrite(piece.data(), 1, piece.size(), f) != piece.size()) fail();
  });
  if (std::fclose(f) != 0 && !failed) fail();
  if (produced.ok() && !failed && std::rename(partial.c_str(), path.c_str()) != 0) fail();
  if (produced.ok() && !failed) return absl::OkStatus();
  std::remove(partial.c_str());
  if (!produced.ok()) return absl::Status(produced.code(), absl::StrCat(path, ": ", produced.message()));
  return absl::UnavailableError(
      absl::StrCat(path, ": cannot write: ", error != 0 ? std::strerror(error) : "short write"));
}

absl::Status TextFile::Parse(google::protobuf::Message* message) {
  std::string text;
  if (absl::Status st = ReadWholeFile(path_, &text); !st.ok()) return st;
  return ParseText(text, message);
}

absl::Status TextFile::ParseText(std::string_view text, google::protobuf::Message* message) {
  Collector collector(path_);
  google::protobuf::TextFormat::Parser parser;
  parser.RecordErrorsTo(&collector);
  parser.WriteLocationsTo(&tree_);
  root_ = message;
  if (!parser.ParseFromString(std::string(text), message) || !collector.errors.empty()) {
    if (collector.errors.empty()) collector.errors.push_back(absl::StrCat(path_, ":1:1: parse error"));
    return absl::InvalidArgumentError(absl::StrJoin(collector.errors, "\n"));
  }
  return absl::OkStatus();
}

std::string TextFile::Locate(std::initializer_list<std::string_view> field_path) const {
  int line = 0, column = 0;
  const google::protobuf::TextFormat::ParseInfoTree* tree = &tree_;
  const google::protobuf::Descriptor* descriptor = root_ != nullptr ? root_->GetDescriptor() : nullptr;
  for (std::string_view element : field_path) {
    if (tree == nullptr || descriptor == nullptr) break;
    std::string name(element);
    int index = -1;
    if (auto open = name.find('['); open != std::string::npos) {
      index = std::stoi(name.substr(open + 1));
      name = name.substr(0, open);
    }
    const google::protobuf::FieldDescriptor* field = descriptor->FindFieldByName(name);
    if (field == nullptr) break;
    // A repeated field is located by element; "name" alone means its first.
    if (field->is_repeated() && index < 0) index = 0;
    if (!field->is_repeated()) index = -1;
    const auto loc = tree->GetLocation(field, index);
    if (loc.line < 0) break;
    line = loc.line;
    column = loc.column;
    if (field->type() != google::protobuf::FieldDescriptor::TYPE_MESSAGE) break;
    tree = tree->GetTreeForNested(field, index);
    descriptor = field->message_type();
  }
  return absl::StrCat(path_, ":", line + 1, ":", column + 1);
}

void TextFile::Require(bool ok, std::initializer_list<std::string_view> field_path, const std::string& message) {
  if (ok) return;
  errors_.push_back(absl::StrCat(Locate(field_path), ": ", message));
}

absl::Status TextFile::status() const {
  if (errors_.empty()) return absl::OkStatus();
  return absl::InvalidArgumentError(absl::StrJoin(errors_, "\n"));
}

}  // namespace weir
