// File: shrink_command.h
//
// `weir shrink`: the command-line edge of harness/shrink/shrink.h. Takes a
// failing run — a saved trace, or the flags of `weir run` (scenario, seed,
// --plan, --profile, connector) — reruns it over gRPC under ever smaller fault
// plans, and writes the smallest plan that still fails the same invariant as
// a file for `weir run --plan`; then, under that plan, the smallest workload
// (harness/shrink/workload_shrink.h) that still fails it, as a scenario file
// beside the plan. The wall-time and rerun bounds cover both phases and live
// here, not in the searches.
//
// Exit codes: 0 a plan that still fails was written; 1 the connector is
// nondeterministic (nothing shrunk, no plan written); 2 usage or input error
// (also: the run does not fail the invariant asked for); 3 harness fault.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include <CLI/CLI.hpp>

#include "harness/cli/command_flags.h"

namespace weir {

struct ShrinkFlags {
  CLI::App* command = nullptr;
  std::vector<std::string> inputs;  // TRACE, or the connector command after --
  std::string scenario;
  std::uint64_t seed = 0;
  std::string plan;
  std::string profile;
  std::string connector;
  std::string transport = "tcp";
  std::string invariant;
  std::string out = "minimal.plan";
  // The shrunk workload's scenario; empty: beside --out (minimal.plan ->
  // minimal.scenario).
  std::string out_scenario;
  bool keep_workload = false;  // skip the workload phase
  std::string trace;           // the minimal run's trace
  std::uint64_t max_reruns = 500;
  double max_seconds = 600;
  std::string progress = "auto";
};

void AddShrinkCommand(CLI::App& app, ShrinkFlags& flags);

// -1 when the shrink subcommand was not given; else its exit code.
int RunShrinkCommand(ShrinkFlags& flags);

}  // namespace weir
