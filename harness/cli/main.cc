// weir: the command line. Subcommands: run (one seeded run against a
// connector), replay and explain (a saved trace), shrink (a failing run's
// fault plan), lint, and the suite commands. Exit codes: 0 every invariant held, 1 an invariant failed,
// 2 usage or input error, 3 harness fault, 4 interrupted (SIGINT/SIGTERM).
#include <unistd.h>

#include <cstdio>
#include <optional>
#include <cstdlib>
#include <iostream>
#include <random>
#include <string>
#include <vector>

#include <CLI/CLI.hpp>

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "harness/cli/bundled_files.h"
#include "harness/edge/command_line.h"
#include "harness/edge/replay_line.h"
#include "harness/cli/command_flags.h"
#include "harness/cli/hold_prompt.h"
#include "harness/cli/search_command.h"
#include "harness/cli/shrink_command.h"
#include "harness/cli/stop_signal.h"
#include "harness/cli/suite_commands.h"
#include "harness/edge/connector_identity.h"
#include "harness/edge/grpc_run.h"
#include "harness/replay/explain.h"
#include "harness/report/html_timeline.h"
#include "harness/replay/replay.h"
#include "harness/report/text_report.h"
#include "harness/scenario/plan_file.h"
#include "harness/suite/certify.h"
#include "harness/scenario/profile_file.h"
#include "harness/scenario/scenario_file.h"
#include "harness/scenario/text_file.h"

namespace weir {
namespace {

struct RunFlags {
  std::string scenario;
  std::uint64_t seed = 0;
  bool seed_given = false;
  ConnectorFlags connector;
  std::string trace;
  std::string plan;
  std::string save_plan;
  std::string profile;  // overrides the scenario's profile
};

int RunCommand(RunFlags& flags) {
  auto connector = ParseConnectorFlags(flags.connector, ConnectorNeed::kRequired);
  if (!connector.ok()) return UsageError(connector.status().message());
  const std::vector<std::string>& argv = connector->argv;
  const Transport transport = connector->transport;
  // Where the command points now, for a trace that is replayed elsewhere.
  std::optional<v1::ConnectorIdentity> identity;
  if (!flags.trace.empty()) {
    auto id = IdentifyConnector(argv);
    if (!id.ok()) return UsageError(absl::StrCat("--connector: ", id.status().message()));
    identity = std::move(*id);
  }
  if (absl::Status st = CheckOutputPaths({{"--trace", flags.trace}, {"--save-plan", flags.save_plan}}); !st.ok()) {
    return UsageError(st.message());
  }
  if (!flags.seed_given) flags.seed = std::random_device{}() * 65536ULL + std::random_device{}() % 65536;

  // The seed comes first, so it is on screen even if the run never ends well.
  std::printf("weir run: seed %llu\n", static_cast<unsigned long long>(flags.seed));
  std::fflush(stdout);

  auto scenario = LoadScenario(flags.scenario);
  if (!scenario.ok()) {
    std::fprintf(stderr, "%s\n", std::string(scenario.status().message()).c_str());
    return kExitUsage;
  }

  std::optional<v1::FaultPlan> plan;
  if (!flags.plan.empty()) {
    auto loaded = LoadFaultPlan(flags.plan);
    if (!loaded.ok()) {
      std::fprintf(stderr, "%s\n", std::string(loaded.status().message()).c_str());
      return kExitUsage;
    }
    plan = std::move(*loaded);
  }

  RunSpec spec;
  spec.plan = plan;
  spec.scenario = std::move(*scenario);
  if (!flags.profile.empty()) {
    auto profile = LoadProfile(flags.profile);
    if (!profile.ok()) {
      std::fprintf(stderr, "%s\n", std::string(profile.status().message()).c_str());
      return kExitUsage;
    }
    // The trace header then records the profile the run was judged by.
    *spec.scenario.mutable_profile() = std::move(*profile);
  }
  spec.scenario_path = flags.scenario;
  spec.seed = flags.seed;
  spec.connector_argv = argv;
  spec.connector_identity = identity;
  spec.transport = transport;
  spec.trace_path = flags.trace;
  spec.stop = InstallStopSignals();
  auto out = RunOverGrpc(spec);
  const PairFlags pair{flags.scenario, flags.seed, transport, flags.plan, flags.profile, argv};
  const std::string replay = PairCommand("run", pair);
  if (absl::IsCancelled(out.status())) {
    std::fprintf(stderr,
                 "weir: interrupted by signal %d: the connector was killed, no trace or plan "
                 "written\nreplay: %s\n",
                 StopSignal(), replay.c_str());
    return kExitInterrupted;
  }
  if (!out.ok()) {
    std::fprintf(stderr, "weir: harness fault: %s\nreplay: %s\n", std::string(out.status().message()).c_str(),
                 replay.c_str());
    return kExitHarness;
  }
  if (!flags.save_plan.empty()) {
    const std::string text =
        FormatFaultPlan(out->plan, absl::StrCat("Fault plan of scenario ", flags.scenario, ", seed ", flags.seed, "."));
    if (absl::Status st = WriteFileAtomically(flags.save_plan, text); !st.ok()) {
      std::fprintf(stderr, "weir: %s\n", std::string(st.message()).c_str());
      return kExitHarness;
    }
  }
  const RunSummary& s = out->summary;
  std::printf("scenario   %s (%s)\n", flags.scenario.c_str(), spec.scenario.name().c_str());
  std::printf("connector  %s\n", ShellJoin(argv).c_str());
  std::printf(
      "run        %s at %s virtual; %llu published, %llu committed, %llu incarnation(s), %llu "
      "crash(es), %llu steps, %llu checkpoints, %llu events\n",
      s.end_reason.c_str(), FormatTime(s.end_time).c_str(), static_cast<unsigned long long>(s.published),
      static_cast<unsigned long long>(s.committed_messages), static_cast<unsigned long long>(s.incarnations),
      static_cast<unsigned long long>(s.crashes), static_cast<unsigned long long>(s.steps),
      static_cast<unsigned long long>(s.checkpoints), static_cast<unsigned long long>(out->events));
  std::printf("broker     %llu calls (at most %llu in one connector call), %llu receipts ignored\n",
              static_cast<unsigned long long>(s.broker_calls),
              static_cast<unsigned long long>(s.max_broker_calls_in_one_call),
              static_cast<unsigned long long>(s.ignored_receipts));
  if (s.readers > 1) {
    std::printf("readers    %u; %llu cuts, %llu moves, %llu joins, %llu leaves\n", s.readers,
                static_cast<unsigned long long>(s.cuts), static_cast<unsigned long long>(s.moves),
                static_cast<unsigned long long>(s.joins), static_cast<unsigned long long>(s.leaves));
  }
  std::printf("digest     %s\n", out->digest.c_str());
  std::string kinds;
  for (const auto& [fault, n] : out->verdict.faults_applied)
    absl::StrAppend(&kinds, kinds.empty() ? ": " : "; ", fault, " ×", n);
  std::printf("faults     %d applied%s%s\n", out->plan.decisions_size(),
              flags.plan.empty() ? " (drawn from the scenario's rates)" : " (from the given plan)", kinds.c_str());
  if (!flags.trace.empty()) std::printf("trace      %s\n", flags.trace.c_str());
  if (!flags.save_plan.empty()) std::printf("plan       %s\n", flags.save_plan.c_str());
  std::printf("\n%s", FormatVerdictTable(out->verdict).c_str());
  std::printf("%s", FormatViolations(out->verdict).c_str());
  const bool passed = out->verdict.passed();
  int unexercised = 0;
  for (const InvariantResult& r : out->verdict.results) unexercised += r.judged() && !r.exercised() ? 1 : 0;
  if (passed && unexercised > 0) {
    std::printf("\nPASSED: no invariant failed; %d had no chance to fail in this run (not exercised).\n", unexercised);
  } else {
    std::printf("\n%s\n", passed ? "PASSED: every invariant held." : "FAILED.");
  }
  if (!passed) std::printf("%s", NextStepsHint(flags.trace, pair).c_str());
  std::printf("replay: %s\n", replay.c_str());
  return passed ? kExitPassed : kExitFailed;
}

// weir lint FILE…: validates scenario (.scenario) and fault plan (.plan)
// files; prints every error as file:line:column and exits 2 if any.
int LintCommand(const std::vector<std::string>& files) {
  int bad = 0;
  for (const std::string& file : files) {
    absl::Status st;
    if (absl::EndsWith(file, ".plan")) {
      st = LoadFaultPlan(file).status();
    } else if (absl::EndsWith(file, ".scenario")) {
      st = LoadScenario(file).status();
    } else {
      st = absl::InvalidArgumentError(
          absl::StrCat(file, ":1:1: unknown kind of file; expected a name ending in .scenario or .plan"));
    }
    if (st.ok()) {
      std::printf("ok   %s\n", file.c_str());
    } else {
      ++bad;
      std::fprintf(stderr, "%s\n", std::string(st.message()).c_str());
    }
  }
  return bad == 0 ? kExitPassed : kExitUsage;
}

// Input errors (bad trace file) exit 2; anything else is a harness fault.
int StatusExit(const absl::Status& st) {
  std::fprintf(stderr, "weir: %s\n", std::string(st.message()).c_str());
  return absl::IsInvalidArgument(st) || absl::IsNotFound(st) ? kExitUsage : kExitHarness;
}

// weir replay TRACE: reruns the run from the trace's header, with the
// connector as it was resolved at record time, and compares event by event.
// 0 identical, 1 diverged (a nondeterministic connector, or a changed one:
// said first), 2 bad trace or a connector that no longer exists, 3 a
// connector that did not come up.
struct ReplayFlags {
  std::string trace;
  ConnectorFlags connector;  // --connector and --transport; no words after --
  // Debugging the connector (docs/debugging.md).
  bool no_wall_bounds = false;
  std::string wrap;                    // 'CMD ARGS', split like --connector
  std::vector<std::string> wrap_args;  // appended to the wrapper's argv
  std::uint64_t stop_before = 0;
  bool stop_before_given = false;
};

int ReplayCommand(const ReplayFlags& flags) {
  const std::string& trace = flags.trace;
  ReplayOptions options;
  auto connector = ParseConnectorFlags(flags.connector, ConnectorNeed::kOptional);
  if (!connector.ok()) return UsageError(connector.status().message());
  options.transport = connector->transport;
  options.connector_argv = std::move(connector->argv);
  if (!flags.wrap.empty()) {
    auto split = SplitCommandLine(flags.wrap);
    if (!split.ok()) return UsageError(absl::StrCat("--wrap ", split.status().message()));
    options.wrapper_argv = std::move(*split);
  }
  options.wrapper_argv.insert(options.wrapper_argv.end(), flags.wrap_args.begin(), flags.wrap_args.end());
  if (!options.wrapper_argv.empty()) {
    if (!ResolveExecutable(options.wrapper_argv[0]).has_value()) {
      return UsageError("--wrap: '" + options.wrapper_argv[0] +
                        "' is not an executable file (nor found on PATH); expected a wrapper command "
                        "such as 'valgrind -q' or 'gdb -q -batch -ex run -ex bt --args'");
    }
    options.echo_output = true;  // what the debugger or checker says belongs on screen
  }
  if (flags.stop_before_given && flags.stop_before == 0) {
    return UsageError(
        "--stop-before 0: expected an event number of 1 or more (weir holds after event #K-1, "
        "before event #K)");
  }
  options.wall_bounds = !flags.no_wall_bounds;
  options.stop_before = flags.stop_before;
  options.stop = InstallStopSignals();
  const std::atomic<bool>* stop = options.stop;
  bool held = false;
  if (options.stop_before > 0) {
    options.on_hold = [stop, &held](const HoldPoint& at, const std::string& what, const std::string& line) {
      held = true;
      PrintHold(stdout, at, what, line);
      const HoldEnd end = WaitForEnter(STDIN_FILENO, stop);
      if (end == HoldEnd::kStopped) {
        std::printf("weir replay: interrupted while holding before event #%llu\n",
                    static_cast<unsigned long long>(at.next_seq));
      } else {
        std::printf("weir replay: %s; going on from event #%llu\n", end == HoldEnd::kLine ? "Enter" : "end of input",
                    static_cast<unsigned long long>(at.next_seq));
      }
      std::fflush(stdout);
    };
  }
  if (!options.wall_bounds || options.stop_before > 0) {
    std::printf(
        "weir replay: no wall-clock bounds on the connector: weir waits as long as it takes "
        "(Ctrl-C ends the replay and kills it)\n");
  }
  if (!options.wrapper_argv.empty()) {
    std::printf("weir replay: starting the connector under '%s'; its output follows on stderr\n",
                ShellJoin(options.wrapper_argv).c_str());
  }
  std::fflush(stdout);
  auto r = ReplayTrace(trace, options);
  if (absl::IsCancelled(r.status())) {
    std::fprintf(stderr, "weir: interrupted by signal %d: the connector was killed, nothing compared\n", StopSignal());
    return kExitInterrupted;
  }
  if (!r.ok()) {
    if (absl::IsFailedPrecondition(r.status())) {
      std::fprintf(stderr, "weir replay: %s; nothing was compared\n", std::string(r.status().message()).c_str());
      return kExitUsage;
    }
    return StatusExit(r.status());
  }
  if (options.stop_before > 0 && !held) {
    std::printf("weir replay: the rerun ended after %llu events, before event #%llu: it never held\n",
                static_cast<unsigned long long>(r->rerun_events), static_cast<unsigned long long>(options.stop_before));
  }
  // Before any verdict: a different program answers differently by right.
  for (const std::string& change : r->changes) std::printf("%s\n", change.c_str());
  if (r->weir_version != WeirVersion()) {
    std::printf("note: the trace was written by weir %s; this is weir %s\n", r->weir_version.c_str(), WeirVersion());
  }
  if (r->identical) {
    std::printf("weir replay: reproduced identically (digest %s, %llu events)\n", r->rerun_digest.c_str(),
                static_cast<unsigned long long>(r->rerun_events));
    return kExitPassed;
  }
  if (!r->start_failure.empty()) {
    std::printf(
        "weir replay: the connector could not start: %s\n  connector: %s\n"
        "nothing was compared: a connector that never came up says nothing about its determinism\n",
        r->start_failure.c_str(), ShellJoin(r->connector_argv).c_str());
    return kExitHarness;
  }
  std::printf(
      "weir replay: diverged at event #%llu: expected %s, got %s\n"
      "  expected: %s\n  got:      %s\n"
      "saved   %s (%llu events)\nrerun   %s (%llu events)\n",
      static_cast<unsigned long long>(r->diverged_at), r->expected_what.c_str(), r->got_what.c_str(),
      r->expected_line.empty() ? "(end of the run)" : r->expected_line.c_str(),
      r->got_line.empty() ? "(end of the run)" : r->got_line.c_str(), r->saved_digest.c_str(),
      static_cast<unsigned long long>(r->saved_events), r->rerun_digest.c_str(),
      static_cast<unsigned long long>(r->rerun_events));
  if (!r->changes.empty()) {
    std::printf(
        "the connector changed since this trace was recorded (above): '%s' is not the program that "
        "wrote the trace, so the divergence shows what the change did, not nondeterminism; replay "
        "with the recorded build (--connector), or record a new trace\n",
        ShellJoin(r->connector_argv).c_str());
  } else {
    std::printf(
        "the connector is nondeterministic: '%s' answered the same scenario, seed and fault plan "
        "differently (wall clock, unseeded randomness or racing threads?)\n",
        ShellJoin(r->connector_argv).c_str());
  }
  return kExitFailed;
}

// weir explain TRACE: the timeline around each violation. Exit 0 either way
// (1 only for a failed run would hide the explanation's own errors).
// With --html FILE, also writes the page with the SVG timelines (atomically).
int ExplainCommand(const std::string& trace, const std::string& html) {
  if (absl::Status st = CheckOutputPaths({{"--html", html}}); !st.ok()) return UsageError(st.message());
  auto r = ExplainTrace(trace);
  if (!r.ok()) return StatusExit(r.status());
  std::printf("%s", r->text.c_str());
  if (!html.empty()) {
    const std::string page = HtmlPage(absl::StrCat("weir explain: ", r->timelines.title),
                                      absl::StrCat("<h1>weir explain</h1>\n", RunTimelinesHtml(r->timelines)));
    if (absl::Status st = WriteFileAtomically(html, page); !st.ok()) {
      std::fprintf(stderr, "weir: %s\n", std::string(st.message()).c_str());
      return kExitHarness;
    }
    std::printf("html       %s\n", html.c_str());
  }
  return kExitPassed;
}

}  // namespace
}  // namespace weir

int main(int argc, char** argv) {
  using namespace weir;
  SetWeirProgram(DetectWeirProgram());  // printed command lines work as printed
  CLI::App app{"weir: a deterministic test harness for stream source connectors"};
  app.require_subcommand(1);
  app.set_version_flag("--version", absl::StrCat("weir ", WeirVersion()), "Print weir's version and exit");
  const std::optional<std::string> bundled = BundledDir();
  app.footer(absl::StrCat("Bundled scenarios, profiles and suites: ",
                          bundled.value_or("none found (expected in ../share/weir beside the weir binary)"),
                          "\nA bare name picks one: --suite quick, --scenario crash_storm_weather_buoys, "
                          "--profile exactly_once.\n",
                          ExitCodesHelp()));

  RunFlags run_flags;
  CLI::App* run = app.add_subcommand("run", "One seeded run of a connector against a scenario");
  run->add_option("--scenario", run_flags.scenario,
                  "Scenario file (Protobuf text format), or a bundled scenario's name")
      ->required();
  run->add_option("--seed", run_flags.seed, "Seed (default: a random one, printed first)")->check(WholeNumber());
  AddConnectorFlags(*run, run_flags.connector, "Connector command, split into argv without a shell: 'CMD ARGS…'");
  run->add_option("--trace", run_flags.trace, "Write the trace (JSON lines) to this file");
  run->add_option("--plan", run_flags.plan,
                  "Apply exactly this fault plan (text format) instead of the scenario's rates");
  run->add_option("--profile", run_flags.profile,
                  "Profile file (Protobuf text format), or a bundled profile's name (exactly_once, "
                  "at_least_once, …); overrides the scenario's profile");
  run->add_option("--save-plan", run_flags.save_plan, "Write the faults this run applied as a plan file (for --plan)");

  SuiteCommands suite_commands;
  AddSuiteCommands(app, suite_commands);
  ShrinkFlags shrink_flags;
  AddShrinkCommand(app, shrink_flags);
  SearchFlags search_flags;
  AddSearchCommand(app, search_flags);

  std::vector<std::string> lint_files;
  CLI::App* lint = app.add_subcommand("lint", "Validate scenario (.scenario) and plan (.plan) files");
  lint->add_option("files", lint_files, "Files to check")->required();

  ReplayFlags replay_flags;
  CLI::App* replay = app.add_subcommand("replay", "Rerun a saved trace's run and compare it event by event");
  replay->add_option("trace", replay_flags.trace, "Trace file (weir run --trace)")->required();
  replay->add_option("--transport", replay_flags.connector.transport, "tcp (loopback, default) or unix");
  replay->add_option("--connector", replay_flags.connector.connector,
                     "Connector command replacing the trace header's: 'CMD ARGS…'");
  replay->add_flag("--no-wall-bounds", replay_flags.no_wall_bounds,
                   "Lift every wall-clock bound on the connector (start-up, per-call, the livelock "
                   "bound in wall time) so a debugger may hold it: weir then waits as long as the "
                   "connector takes; Ctrl-C ends the replay and kills it. Events are unchanged");
  replay->add_option("--wrap", replay_flags.wrap,
                     "Start the connector under this command, split like --connector "
                     "('valgrind -q', 'gdb -q -batch -ex run -ex bt --args'); its output goes to stderr");
  replay->add_option("--wrap-arg", replay_flags.wrap_args,
                     "One more word of the wrapper command (repeatable; after --wrap's words)");
  replay
      ->add_option("--stop-before", replay_flags.stop_before,
                   "Hold before event #K (1 … events-1): print the connector's pid(s) and addresses "
                   "and the next event, wait for Enter (end of input goes on at once); lifts the "
                   "wall-clock bounds like --no-wall-bounds")
      ->check(WholeNumber());
  std::string explain_trace;
  CLI::App* explain = app.add_subcommand("explain", "Text timeline of a saved trace around each violation");
  explain->add_option("trace", explain_trace, "Trace file (weir run --trace)")->required();
  std::string explain_html;
  explain->add_option("--html", explain_html, "Also write a self-contained HTML page with SVG timelines to this file");

  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    const int code = app.exit(e);
    return code == 0 ? 0 : kExitUsage;
  }
  // Bare names of bundled files (bundled_files.h), resolved before anything
  // prints them, so replay lines name the file that was read.
  run_flags.scenario = ResolveBundled(run_flags.scenario, BundledKind::kScenario);
  run_flags.profile = ResolveBundled(run_flags.profile, BundledKind::kProfile);
  shrink_flags.scenario = ResolveBundled(shrink_flags.scenario, BundledKind::kScenario);
  shrink_flags.profile = ResolveBundled(shrink_flags.profile, BundledKind::kProfile);
  for (std::string& s : search_flags.scenarios) s = ResolveBundled(s, BundledKind::kScenario);
  search_flags.profile = ResolveBundled(search_flags.profile, BundledKind::kProfile);
  suite_commands.suite = ResolveBundled(suite_commands.suite, BundledKind::kSuite);
  suite_commands.profile = ResolveBundled(suite_commands.profile, BundledKind::kProfile);
  if (run->parsed()) {
    run_flags.seed_given = run->count("--seed") > 0;
    return RunCommand(run_flags);
  }
  if (lint->parsed()) return LintCommand(lint_files);
  if (replay->parsed()) {
    replay_flags.stop_before_given = replay->count("--stop-before") > 0;
    return ReplayCommand(replay_flags);
  }
  if (explain->parsed()) return ExplainCommand(explain_trace, explain_html);
  if (int rc = RunSuiteCommand(suite_commands); rc >= 0) return rc;
  if (int rc = RunShrinkCommand(shrink_flags); rc >= 0) return rc;
  if (int rc = RunSearchCommand(search_flags); rc >= 0) return rc;
  return kExitUsage;
}
