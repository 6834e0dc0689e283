// File: search_command.h
//
// `weir search`: the command-line edge of harness/search/guided_search.h.
// Spends a budget of runs (and at most --max-seconds of wall time) on a
// connector to find a failing run, over gRPC, choosing fault plans by
// feedback (or blind seeds with --blind, for comparison). Each finding is
// written to --out as three files: find-K.scenario (the scenario as it ran,
// its fault rates off and the failing run's fault plan as scripted
// decisions, so it replays without a plan file), find-K.plan (the plan, for
// weir run --plan and weir shrink) and find-K.suite (certify's regression
// suite for it), with the replay and certify lines printed. --coverage FILE
// writes the features seen after each run (one number per line); --html a
// page that plots them against the runs and lists the findings.
//
// Exit codes: 0 no failure found within the budget; 1 a failure was found
// (files written); 2 usage or input error; 3 harness fault; 4 interrupted.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include <CLI/CLI.hpp>

#include "harness/cli/command_flags.h"

namespace weir {

struct SearchFlags {
  CLI::App* command = nullptr;
  std::vector<std::string> scenarios;
  ConnectorFlags connector;
  std::string profile;
  std::uint64_t budget = 200;
  std::uint64_t search_seed = 1;
  std::uint64_t first_seed = 1;
  bool blind = false;
  bool collect = false;
  std::string out = "weir-search";
  std::string coverage;
  std::string html;
  double max_seconds = 600;
  std::string progress = "auto";
};

void AddSearchCommand(CLI::App& app, SearchFlags& flags);

// -1 when the search subcommand was not given; else its exit code.
int RunSearchCommand(SearchFlags& flags);

}  // namespace weir
