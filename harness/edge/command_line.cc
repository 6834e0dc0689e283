#include "harness/edge/command_line.h"

#include <filesystem>

#include "absl/status/status.h"
#include <sys/stat.h>
#include <unistd.h>

#include <cctype>
#include <cerrno>
#include <cstdlib>
#include <cstring>

#include "absl/strings/str_cat.h"

namespace weir {

absl::StatusOr<std::vector<std::string>> SplitCommandLine(std::string_view text) {
  std::vector<std::string> out;
  std::string word;
  bool in_word = false;
  for (std::size_t i = 0; i < text.size(); ++i) {
    const char c = text[i];
    if (c == ' ' || c == '\t' || c == '\n') {
      if (in_word) out.push_back(std::move(word));
      word.clear();
      in_word = false;
      continue;
    }
    in_word = true;
    if (c == '\\') {
      if (i + 1 >= text.size()) {
        return absl::InvalidArgumentError(
            absl::StrCat("column ", i + 1, ": trailing backslash; expected a character after it"));
      }
      word.push_back(text[++i]);
    } else if (c == '\'' || c == '"') {
      const std::size_t start = i;
      for (++i; i < text.size() && text[i] != c; ++i) {
        if (c == '"' && text[i] == '\\' && i + 1 < text.size() && (text[i + 1] == '"' || text[i + 1] == '\\')) {
          ++i;
        }
        word.push_back(text[i]);
      }
      if (i >= text.size()) {
        return absl::InvalidArgumentError(absl::StrCat("column ", start + 1, ": unterminated ", std::string(1, c),
                                                       "; expected a closing ", std::string(1, c)));
      }
    } else {
      word.push_back(c);
    }
  }
  if (in_word) out.push_back(std::move(word));
  return out;
}

std::optional<std::string> SearchPath(const std::string& program,
                                      const std::function<bool(const std::string&)>& usable) {
  if (program.empty()) return std::nullopt;
  if (program.find('/') != std::string::npos) {
    if (usable(program)) return program;
    return std::nullopt;
  }
  const char* path = std::getenv("PATH");
  const std::string dirs = path != nullptr ? path : "/usr/bin:/bin";
  std::size_t start = 0;
  while (start <= dirs.size()) {
    std::size_t end = dirs.find(':', start);
    if (end == std::string::npos) end = dirs.size();
    const std::string dir = end > start ? dirs.substr(start, end - start) : ".";
    const std::string candidate = dir + "/" + program;
    if (usable(candidate)) return candidate;
    start = end + 1;
  }
  return std::nullopt;
}

std::optional<std::string> ResolveExecutable(const std::string& program) {
  return SearchPath(program, [](const std::string& file) { return ::access(file.c_str(), X_OK) == 0; });
}

namespace {
std::string& WeirProgramSlot() {
  static std::string* program = new std::string("weir");
  return *program;
}
}  // namespace

const std::string& WeirProgram() { return WeirProgramSlot(); }
void SetWeirProgram(std::string program) { WeirProgramSlot() = std::move(program); }

std::string WeirProgramFor(const std::string& exe, const std::string& cwd,
                           const std::optional<std::string>& weir_on_path) {
  namespace fs = std::filesystem;
  std::error_code ec;
  if (weir_on_path.has_value() && fs::equivalent(*weir_on_path, exe, ec)) return "weir";
  const fs::path rel = fs::path(exe).lexically_normal().lexically_relative(fs::path(cwd).lexically_normal());
  if (!rel.empty() && *rel.begin() != ".." && rel.is_relative()) {
    // A word without '/' would be looked up on PATH: "./weir".
    const std::string text = rel.has_parent_path() ? rel.string() : "./" + rel.string();
    return ShellQuote(text);
  }
  return ShellQuote(exe);
}

std::string DetectWeirProgram() {
  std::error_code ec;
  const std::filesystem::path exe = std::filesystem::read_symlink("/proc/self/exe", ec);
  if (ec) return "weir";
  const std::filesystem::path cwd = std::filesystem::current_path(ec);
  return WeirProgramFor(exe.string(), ec ? std::string("/") : cwd.string(), ResolveExecutable("weir"));
}

std::string ShellQuote(std::string_view word) {
  if (word.empty()) return "''";
  bool plain = true;
  for (char c : word) {
    if (!(std::isalnum(static_cast<unsigned char>(c)) || c == '/' || c == '.' || c == '_' || c == '-' || c == '=' ||
          c == ':' || c == ',' || c == '+' || c == '@')) {
      plain = false;
      break;
    }
  }
  if (plain) return std::string(word);
  std::string out = "'";
  for (char c : word) {
    if (c == '\'') {
      out += "'\\''";
    } else {
      out.push_back(c);
    }
  }
  out.push_back('\'');
  return out;
}

std::string ShellJoin(const std::vector<std::string>& argv) {
  std::string out;
  for (const auto& a : argv) {
    if (!out.empty()) out.push_back(' ');
    out += ShellQuote(a);
  }
  return out;
}

absl::Status CheckOutputPath(std::string_view flag_name, const std::string& path) {
  const std::string flag(flag_name);
  if (path.empty()) return absl::OkStatus();
  const std::size_t slash = path.rfind('/');
  const std::string dir = slash == std::string::npos ? "." : slash == 0 ? "/" : path.substr(0, slash);
  struct stat st {};
  if (::stat(dir.c_str(), &st) != 0 || !S_ISDIR(st.st_mode)) {
    return absl::InvalidArgumentError(
        absl::StrCat(flag, " ", path, ": directory '", dir, "' does not exist; expected an existing directory"));
  }
  if (::access(dir.c_str(), W_OK) != 0) {
    return absl::InvalidArgumentError(
        absl::StrCat(flag, " ", path, ": directory '", dir, "' is not writable (", std::strerror(errno), ")"));
  }
  if (::stat(path.c_str(), &st) == 0 && S_ISDIR(st.st_mode)) {
    return absl::InvalidArgumentError(absl::StrCat(flag, " ", path, ": is a directory; expected a file name"));
  }
  return absl::OkStatus();
}

}  // namespace weir
