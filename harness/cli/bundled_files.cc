#include "harness/cli/bundled_files.h"

#include <filesystem>
#include <system_error>

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"

namespace weir {
namespace {

namespace fs = std::filesystem;

const char* SubdirOf(BundledKind kind) {
  switch (kind) {
    case BundledKind::kScenario: return "scenarios";
    case BundledKind::kProfile: return "profiles";
    case BundledKind::kSuite: return "suites";
  }
  return "";
}

const char* ExtensionOf(BundledKind kind) {
  switch (kind) {
    case BundledKind::kScenario: return ".scenario";
    case BundledKind::kProfile: return ".profile";
    case BundledKind::kSuite: return ".suite";
  }
  return "";
}

}  // namespace

std::optional<std::string> BundledDirFor(const std::string& exe) {
  std::error_code ec;
  const fs::path dir = (fs::path(exe).parent_path() / ".." / "share" / "weir").lexically_normal();
  if (!fs::is_directory(dir / "suites", ec)) return std::nullopt;
  return dir.string();
}

std::optional<std::string> BundledDir() {
  std::error_code ec;
  const fs::path exe = fs::read_symlink("/proc/self/exe", ec);
  if (ec) return std::nullopt;
  return BundledDirFor(exe.string());
}

std::string ResolveBundled(const std::string& arg, BundledKind kind, const std::string& bundled_dir) {
  std::error_code ec;
  if (arg.empty() || bundled_dir.empty() || absl::StrContains(arg, '/') || fs::exists(arg, ec)) {
    return arg;
  }
  const std::string file = absl::EndsWith(arg, ExtensionOf(kind)) ? arg : absl::StrCat(arg, ExtensionOf(kind));
  const fs::path bundled = fs::path(bundled_dir) / SubdirOf(kind) / file;
  return fs::is_regular_file(bundled, ec) ? bundled.string() : arg;
}

std::string ResolveBundled(const std::string& arg, BundledKind kind) {
  static const std::optional<std::string> dir = BundledDir();
  return ResolveBundled(arg, kind, dir.value_or(""));
}

}  // namespace weir
