// File: command_line.h
//
// Turning a connector command string into an argv and back, with no shell in
// between: SplitCommandLine understands single quotes, double quotes and
// backslash escapes, and nothing else (no variables, globs or substitutions).
// ShellQuote produces text that a POSIX shell reads back as the same argv, for
// paste-ready replay lines.
#pragma once

#include <functional>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "absl/status/statusor.h"

namespace weir {

// Error: an unterminated quote or a trailing backslash, with its column.
[[nodiscard]] absl::StatusOr<std::vector<std::string>> SplitCommandLine(std::string_view text);

std::string ShellQuote(std::string_view word);

// Where posix_spawnp would find `program` (a path with '/', or a PATH search),
// or nullopt when it is not an executable file.
std::optional<std::string> ResolveExecutable(const std::string& program);
// The PATH search behind it: `program` itself when it holds a '/', else the
// first PATH entry (an empty entry is ".") holding it, each candidate kept only
// when `usable` accepts it; nullopt when none is.
std::optional<std::string> SearchPath(const std::string& program,
                                      const std::function<bool(const std::string&)>& usable);
std::string ShellJoin(const std::vector<std::string>& argv);

// How the command lines weir prints (replay:, next:) name weir itself, so
// that they work as printed: "weir" when a PATH search finds this very binary;
// else its path relative to the working directory when the binary lies below
// it (build/harness/weir, like the scenario paths in the same line); else its
// absolute path. Shell-quoted. main() sets it from /proc/self/exe; until then
// (weir used as a library) it is "weir".
const std::string& WeirProgram();
void SetWeirProgram(std::string program);
// The rule above for a binary `exe` run from `cwd`; `weir_on_path` is what a
// PATH search for "weir" finds, if anything.
std::string WeirProgramFor(const std::string& exe, const std::string& cwd,
                           const std::optional<std::string>& weir_on_path);
// WeirProgramFor this process (/proc/self/exe, the working directory, PATH);
// "weir" when /proc/self/exe cannot be read.
std::string DetectWeirProgram();

// Checks, before any work, that an output file named by `flag` can be
// written: its directory exists and is writable, and it is not a directory.
// Error: InvalidArgument("--json out/r.json: directory 'out' does not exist").
// An empty path (flag not given) is fine.
[[nodiscard]] absl::Status CheckOutputPath(std::string_view flag, const std::string& path);

}  // namespace weir
