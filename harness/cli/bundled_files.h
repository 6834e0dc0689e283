// File: bundled_files.h
//
// Where the `weir` command finds its bundled scenarios, profiles and suites,
// so that `weir certify --suite quick` works from any directory, installed or
// not, without an environment variable.
//
// The bundled directory is <directory of the running weir>/../share/weir,
// holding scenarios/, profiles/ and suites/ (suites name their scenarios and
// profiles relative to themselves, "../scenarios/…"). An install puts weir in
// PREFIX/bin and the files in PREFIX/share/weir; the build tree has the
// symlink build/share/weir -> fixtures/ beside build/harness/weir. Nothing is
// compiled in, so an installed tree can be moved as a whole.
//
// A bare name (no '/') that is not a file in the working directory names a
// bundled file: `quick` or `quick.suite` is suites/quick.suite, and likewise
// for scenarios and profiles. A file in the working directory of that name
// wins, and a name not bundled either is left as given (its load then fails
// with the usual message naming it).
#pragma once

#include <optional>
#include <string>

namespace weir {

enum class BundledKind { kScenario, kProfile, kSuite };

// The bundled directory of the running weir, or nullopt when it has none.
[[nodiscard]] std::optional<std::string> BundledDir();

// The bundled directory of a weir executable at `exe` (an absolute path):
// ../share/weir from the directory holding `exe`, when its suites/ is a
// directory. For tests.
[[nodiscard]] std::optional<std::string> BundledDirFor(const std::string& exe);

// `arg` resolved as above against `bundled_dir` (no lookup when it is empty).
[[nodiscard]] std::string ResolveBundled(const std::string& arg, BundledKind kind, const std::string& bundled_dir);

// ResolveBundled against this weir's BundledDir().
[[nodiscard]] std::string ResolveBundled(const std::string& arg, BundledKind kind);

}  // namespace weir
