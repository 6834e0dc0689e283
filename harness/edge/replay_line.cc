#include "harness/edge/replay_line.h"

#include "absl/strings/str_cat.h"
#include "harness/edge/command_line.h"

namespace weir {

std::string PairCommand(std::string_view verb, const PairFlags& pair) {
  std::string line = absl::StrCat(WeirProgram(), " ", std::string(verb), " --scenario ", ShellQuote(pair.scenario_path),
                                  " --seed ", pair.seed);
  if (pair.transport == Transport::kUnix) absl::StrAppend(&line, " --transport unix");
  if (!pair.plan_path.empty()) absl::StrAppend(&line, " --plan ", ShellQuote(pair.plan_path));
  if (!pair.profile_path.empty()) absl::StrAppend(&line, " --profile ", ShellQuote(pair.profile_path));
  absl::StrAppend(&line, " --connector ", ShellQuote(ShellJoin(pair.connector_argv)));
  return line;
}

std::string ReplayLine(const std::string& scenario_path, std::uint64_t seed, Transport transport,
                       const std::string& plan_path, const std::string& profile_path,
                       const std::vector<std::string>& argv) {
  return PairCommand("run", PairFlags{scenario_path, seed, transport, plan_path, profile_path, argv});
}

std::string TraceCommand(std::string_view verb, const std::string& trace_path) {
  return absl::StrCat(WeirProgram(), " ", std::string(verb), " ", ShellQuote(trace_path));
}

std::string NextStepsHint(const std::string& trace_path, const PairFlags& pair) {
  if (!trace_path.empty()) {
    return absl::StrCat("next: ", TraceCommand("replay", trace_path), "    (rerun, compare event by event)\n", "      ",
                        TraceCommand("explain", trace_path), "   (timeline around each violation)\n", "      ",
                        TraceCommand("shrink", trace_path),
                        " --out minimal.plan   (smallest fault plan that still fails)\n");
  }
  return absl::StrCat("next: ", PairCommand("shrink", pair),
                      " --out minimal.plan\n      (smallest fault plan that still fails; add --trace FILE "
                      "to weir run for replay and explain)\n");
}

}  // namespace weir
