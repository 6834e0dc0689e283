// File: command_flags.h
//
// What every weir command shares, in one place: the exit codes, how a usage
// error is reported, and the flags that name the connector (--connector
// 'CMD ARGS…' or the words after --) and the transport (--transport).
// Commands keep their own flags; these are the ones they must agree on.
#pragma once

#include <initializer_list>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "harness/run/run.h"

namespace CLI {
class App;
}

namespace weir {

// Exit codes of every command; the README's table and `weir --help` say the same.
inline constexpr int kExitPassed = 0;   // every invariant held (certify: CERTIFIED; shrink: shrunk; search: nothing)
inline constexpr int kExitFailed = 1;   // an invariant failed (search: a finding; shrink: nondeterministic)
inline constexpr int kExitUsage = 2;    // usage or input error: a bad flag, a bad file (file:line:column)
inline constexpr int kExitHarness = 3;  // weir itself could not run
inline constexpr int kExitInterrupted = 4;   // SIGINT/SIGTERM/SIGHUP: connectors killed, finished work reported
inline constexpr int kExitNotExercised = 5;  // certify --require-coverage: passed, a claimed rule not exercised

// The exit codes as one line of help text.
const char* ExitCodesHelp();

// Prints "weir: MESSAGE" on stderr and returns kExitUsage.
int UsageError(absl::string_view message);

// The connector and transport flags as given.
struct ConnectorFlags {
  std::string connector;             // --connector 'CMD ARGS…', split without a shell
  std::vector<std::string> command;  // the words after --
  std::string transport = "tcp";     // --transport tcp|unix
};

// Adds --connector, --transport and the positional words after -- to `app`.
// `connector_help` describes --connector for this command.
void AddConnectorFlags(CLI::App& app, ConnectorFlags& flags, const std::string& connector_help);

struct ConnectorChoice {
  std::vector<std::string> argv;  // empty only when not required and not given
  Transport transport = Transport::kTcp;
};

enum class ConnectorNeed {
  kRequired,  // a command must be given and name an executable file (here or on PATH)
  kOptional,  // may be absent (a trace's header names it); not checked for executability here
};

// Error (InvalidArgument, worded for UsageError): a transport other than tcp
// or unix; both --connector and words after --; an unterminated quote in
// --connector (with its column); no command when required; a program that is
// not an executable file.
[[nodiscard]] absl::StatusOr<ConnectorChoice> ParseConnectorFlags(const ConnectorFlags& flags, ConnectorNeed need);

// Transport from --transport's text. Error: not tcp or unix.
[[nodiscard]] absl::StatusOr<Transport> ParseTransport(std::string_view text);

// Checks every (flag, path) output before any work starts (CheckOutputPath):
// the first bad one as InvalidArgument. Empty paths (flag not given) pass.
[[nodiscard]] absl::Status CheckOutputPaths(std::initializer_list<std::pair<std::string_view, std::string>> outputs);

}  // namespace weir
