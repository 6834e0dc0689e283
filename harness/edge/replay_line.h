// File: replay_line.h
//
// The command lines weir prints for a user to paste, in one place: the line
// that reruns one (scenario, seed) pair exactly, the same pair under another
// command (shrink takes run's flags), the commands that work on a saved trace,
// and the "next:" hint after a failing run. Every word is shell-quoted
// (command_line.h) and weir is named as WeirProgram() says, so each line works
// as printed from the directory weir ran in.
#pragma once

#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

#include "harness/run/run.h"

namespace weir {

// One (scenario, seed) pair as a command's flags; plan_path and profile_path
// are left out when empty.
struct PairFlags {
  std::string scenario_path;
  std::uint64_t seed = 0;
  Transport transport = Transport::kTcp;
  std::string plan_path;
  std::string profile_path;
  std::vector<std::string> connector_argv;
};

// "weir VERB --scenario S --seed N [--transport unix] [--plan P] [--profile F] --connector 'CMD ARGS'".
std::string PairCommand(std::string_view verb, const PairFlags& pair);

// "weir run …": the replay line of a run, a suite's run or a search finding.
std::string ReplayLine(const std::string& scenario_path, std::uint64_t seed, Transport transport,
                       const std::string& plan_path, const std::string& profile_path,
                       const std::vector<std::string>& argv);

// "weir VERB 'TRACE'": replay, explain or shrink of a saved trace.
std::string TraceCommand(std::string_view verb, const std::string& trace_path);

// What to do with a failing run, printed before its replay line: replay,
// explain and shrink of the trace when one was written, else shrink of the pair.
std::string NextStepsHint(const std::string& trace_path, const PairFlags& pair);

}  // namespace weir
