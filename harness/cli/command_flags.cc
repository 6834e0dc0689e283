#include "harness/cli/command_flags.h"

#include <cstdio>
#include <initializer_list>
#include <utility>

#include <CLI/CLI.hpp>
#include "absl/status/status.h"
#include "absl/strings/str_cat.h"
#include "harness/edge/command_line.h"

namespace weir {

const char* ExitCodesHelp() {
  return "Exit codes: 0 every invariant held, 1 an invariant failed, 2 usage or input error, 3 harness fault, "
         "4 interrupted, 5 certify --require-coverage: a claimed invariant not exercised.";
}

int UsageError(absl::string_view message) {
  std::fprintf(stderr, "weir: %.*s\n", static_cast<int>(message.size()), message.data());
  return kExitUsage;
}

void AddConnectorFlags(CLI::App& app, ConnectorFlags& flags, const std::string& connector_help) {
  app.add_option("--connector", flags.connector, connector_help);
  app.add_option("--transport", flags.transport, "tcp (loopback, default) or unix");
  app.add_option("command", flags.command, "Connector command after --");
}

absl::StatusOr<Transport> ParseTransport(std::string_view text) {
  if (text == "tcp") return Transport::kTcp;
  if (text == "unix") return Transport::kUnix;
  return absl::InvalidArgumentError(absl::StrCat("--transport is '", std::string(text), "'; expected tcp or unix"));
}

absl::StatusOr<ConnectorChoice> ParseConnectorFlags(const ConnectorFlags& flags, ConnectorNeed need) {
  ConnectorChoice choice;
  auto transport = ParseTransport(flags.transport);
  if (!transport.ok()) return transport.status();
  choice.transport = *transport;
  if (!flags.connector.empty() && !flags.command.empty()) {
    return absl::InvalidArgumentError("give the connector either as --connector 'CMD ARGS' or after --, not both");
  }
  if (!flags.connector.empty()) {
    auto split = SplitCommandLine(flags.connector);
    if (!split.ok()) return absl::InvalidArgumentError(absl::StrCat("--connector ", split.status().message()));
    choice.argv = std::move(*split);
  } else {
    choice.argv = flags.command;
  }
  if (need == ConnectorNeed::kOptional) return choice;
  if (choice.argv.empty()) return absl::InvalidArgumentError("no connector command; expected --connector 'CMD ARGS…'");
  if (!ResolveExecutable(choice.argv[0]).has_value()) {
    return absl::InvalidArgumentError(
        absl::StrCat("--connector: '", choice.argv[0], "' is not an executable file (nor found on PATH)"));
  }
  return choice;
}

absl::Status CheckOutputPaths(std::initializer_list<std::pair<std::string_view, std::string>> outputs) {
  for (const auto& [flag, path] : outputs) {
    if (absl::Status st = CheckOutputPath(flag, path); !st.ok()) return st;
  }
  return absl::OkStatus();
}

}  // namespace weir
