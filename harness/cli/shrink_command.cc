#include "harness/cli/shrink_command.h"

#include <unistd.h>

#include <chrono>
#include <cstdio>
#include <optional>

#include <google/protobuf/util/message_differencer.h>

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "harness/edge/command_line.h"
#include "harness/cli/stop_signal.h"
#include "harness/edge/connector_identity.h"
#include "harness/edge/grpc_run.h"
#include "harness/replay/replay.h"
#include "harness/replay/trace_reader.h"
#include "harness/scenario/plan_file.h"
#include "harness/scenario/profile_file.h"
#include "harness/scenario/scenario_file.h"
#include "harness/scenario/text_file.h"
#include "harness/shrink/shrink.h"
#include "harness/shrink/workload_shrink.h"
#include "harness/suite/certify.h"

namespace weir {
namespace {

// shrink's own words for the shared exit codes 0 and 1 (command_flags.h).
constexpr int kShrunk = kExitPassed, kNondeterministic = kExitFailed;

int Usage(absl::string_view message) { return UsageError(message); }

int InputError(const absl::Status& st) {
  std::fprintf(stderr, "%s\n", std::string(st.message()).c_str());
  return absl::IsInvalidArgument(st) || absl::IsNotFound(st) ? kExitUsage : kExitHarness;
}

RerunResult ToRerunResult(const RunOutput& out) {
  RerunResult r;
  // Earliest cause first: the default target is what started the failure.
  r.failed = FailedByCause(out.verdict);
  r.digest = out.digest;
  r.events = out.events;
  r.steps = out.summary.steps;
  return r;
}

std::string DescribeDecision(const v1::FaultDecision& d) {
  std::string at = absl::StrCat(v1::Site_Name(d.site()), " ", d.position(), ": ");
  switch (d.fault_case()) {
    case v1::FaultDecision::kLatencyMs: return absl::StrCat(at, "latency ", d.latency_ms(), " ms");
    case v1::FaultDecision::kThrottleRetryAfterMs:
      return absl::StrCat(at, "throttled, retry after ", d.throttle_retry_after_ms(), " ms");
    case v1::FaultDecision::kTransient: return absl::StrCat(at, v1::TransientCode_Name(d.transient().code()));
    case v1::FaultDecision::kDuplicate: return at + "duplicate delivery";
    case v1::FaultDecision::kLostAck: return at + "lost ack";
    case v1::FaultDecision::kVisibilityDelayMs:
      return absl::StrCat(at, "visible ", d.visibility_delay_ms(), " ms late");
    case v1::FaultDecision::kReorder: return at + "reorder";
    case v1::FaultDecision::kBrokerRestart: return at + "broker restart";
    case v1::FaultDecision::kCommitFailure: return at + "commit failure";
    case v1::FaultDecision::kPartitionOutageMs:
      return absl::StrCat(at, "partition unavailable for ", d.partition_outage_ms(), " ms");
    case v1::FaultDecision::kEmptyRead: return at + "empty read";
    case v1::FaultDecision::kLostBookmark: return at + "lost bookmark";
    case v1::FaultDecision::kCrash: {
      std::string s = absl::StrCat(at, "crash ", v1::CrashPoint_Name(d.crash().point()));
      const auto p = d.crash().point();
      if (p == v1::IN_STEP_AFTER_BROKER_CALL || p == v1::IN_NOTICE_AFTER_ACK ||
          p == v1::IN_NOTICE_AFTER_BOOKMARK_SAVE) {
        absl::StrAppend(&s, " (after ", std::max<std::uint32_t>(1, d.crash().after_calls()), ")");
      }
      return s;
    }
    case v1::FaultDecision::kCut: {
      std::string s = absl::StrCat(at, "cut partition ", d.cut().partition(), " at ", d.cut().at_ppm() / 10000.0,
                                   " % of the rest, tail to reader ", d.cut().to_reader());
      if (d.cut().crash() != v1::CRASH_POINT_UNSPECIFIED) {
        absl::StrAppend(&s, ", crash ", v1::CrashPoint_Name(d.cut().crash()));
      }
      return s;
    }
    case v1::FaultDecision::kMove:
      return absl::StrCat(at, "move partition ", d.move().partition(), " from reader ", d.move().from_reader(),
                          " to reader ", d.move().to_reader(), d.move().crash_in_revoke() ? ", crash IN_REVOKE" : "");
    case v1::FaultDecision::kMembership:
      return absl::StrCat(at, "reader ", d.membership().reader(), d.membership().joins() ? " joins" : " leaves");
    case v1::FaultDecision::FAULT_NOT_SET: break;
  }
  return at + "no fault";
}

std::string Decisions(int n) { return absl::StrCat(n, n == 1 ? " decision" : " decisions"); }

std::optional<Invariant> ParseInvariant(const std::string& name) {
  for (int i = 0; i < kInvariantCount; ++i) {
    if (name == InvariantName(static_cast<Invariant>(i))) return static_cast<Invariant>(i);
  }
  return std::nullopt;
}

std::string AllInvariantNames() {
  std::vector<std::string> names;
  for (int i = 0; i < kInvariantCount; ++i) names.push_back(InvariantName(static_cast<Invariant>(i)));
  return absl::StrJoin(names, ", ");
}

const char* PhaseName(ShrinkProgress::Phase p) {
  switch (p) {
    case ShrinkProgress::Phase::kReproducing: return "reproducing";
    case ShrinkProgress::Phase::kRemoving: return "removing decisions";
    case ShrinkProgress::Phase::kWeakening: return "weakening decisions";
  }
  return "";
}

}  // namespace

void AddShrinkCommand(CLI::App& app, ShrinkFlags& f) {
  CLI::App* c =
      app.add_subcommand("shrink", "Minimize a failing run's fault plan while the same invariant still fails");
  f.command = c;
  c->add_option("inputs", f.inputs,
                "TRACE (a failing run's trace), or with --scenario: the connector command after --");
  c->add_option("--scenario", f.scenario, "Scenario file, as for weir run (instead of a trace)");
  c->add_option("--seed", f.seed, "Seed of the failing run (with --scenario)");
  c->add_option("--plan", f.plan, "Fault plan of the failing run (with --scenario), as for weir run");
  c->add_option("--profile", f.profile, "Profile file overriding the scenario's (with --scenario)");
  c->add_option("--connector", f.connector, "Connector command 'CMD ARGS…' (with a trace: replaces the header's)");
  c->add_option("--transport", f.transport, "tcp (loopback, default) or unix");
  c->add_option("--invariant", f.invariant,
                "The invariant that must keep failing (default: the one whose violation started earliest)");
  c->add_option("--out", f.out, "Where to write the minimal plan (default minimal.plan)");
  c->add_option("--out-scenario", f.out_scenario,
                "Where to write the shrunk workload's scenario (default: beside --out, "
                "minimal.plan -> minimal.scenario)");
  c->add_flag("--keep-workload", f.keep_workload,
              "Shrink only the fault plan, not the workload (messages, sources, partitions, keys)");
  c->add_option("--trace", f.trace, "Also write the trace of a run under the minimal plan");
  c->add_option("--max-reruns", f.max_reruns, "Stop after this many reruns (default 500; 0: no limit)");
  c->add_option("--max-seconds", f.max_seconds,
                "Start no rerun after this many seconds of wall time (default 600; 0: no limit)");
  c->add_option("--progress", f.progress, "auto (one updating line on a terminal), bar, lines or none");
}

int RunShrinkCommand(ShrinkFlags& f) {
  if (f.command == nullptr || !f.command->parsed()) return -1;
  const bool from_trace = f.scenario.empty();
  const bool seed_given = f.command->count("--seed") > 0;

  auto parsed_transport = ParseTransport(f.transport);
  if (!parsed_transport.ok()) return Usage(parsed_transport.status().message());
  const Transport transport = *parsed_transport;
  if (f.progress != "auto" && f.progress != "bar" && f.progress != "lines" && f.progress != "none") {
    return Usage("--progress is '" + f.progress + "'; expected auto, bar, lines or none");
  }
  if (f.max_seconds < 0) return Usage("--max-seconds must be >= 0");
  if (f.out.empty()) return Usage("--out is empty; expected a file name for the minimal plan");
  if (f.out_scenario.empty()) {
    f.out_scenario =
        absl::EndsWith(f.out, ".plan") ? f.out.substr(0, f.out.size() - 5) + ".scenario" : f.out + ".scenario";
  }
  if (f.out_scenario == f.out) return Usage("--out-scenario is the same file as --out; expected another file");
  for (const auto& [flag, path] :
       {std::pair{"--out", f.out}, std::pair{"--out-scenario", f.out_scenario}, std::pair{"--trace", f.trace}}) {
    if (flag == std::string("--out-scenario") && f.keep_workload) continue;
    if (absl::Status st = CheckOutputPath(flag, path); !st.ok()) return Usage(std::string(st.message()));
  }
  std::optional<Invariant> wanted;
  if (!f.invariant.empty()) {
    wanted = ParseInvariant(f.invariant);
    if (!wanted) {
      return Usage(absl::StrCat("--invariant is '", f.invariant, "'; expected one of ", AllInvariantNames()));
    }
  }

  RunSpec spec;
  v1::TraceHeader header;    // from a trace
  std::string saved_digest;  // from a trace
  std::uint64_t saved_events = 0;
  std::string profile_note;
  if (from_trace) {
    if (f.inputs.size() != 1) {
      return Usage("expected one trace file (weir shrink TRACE), or --scenario, --seed and a connector");
    }
    if (seed_given || !f.plan.empty() || !f.profile.empty()) {
      return Usage("--seed, --plan and --profile go with --scenario; a trace's header already holds them");
    }
    const std::string& path = f.inputs[0];
    auto reader = TraceReader::Open(path);
    if (!reader.ok()) return InputError(reader.status());
    while (true) {
      auto next = (*reader)->Next();
      if (!next.ok()) return InputError(next.status());
      if (!*next) break;
    }
    header = (*reader)->header();
    spec = SpecFromHeader(header);
    saved_digest = (*reader)->footer().digest();
    saved_events = (*reader)->footer().events();
    if (spec.connector_argv.empty() && f.connector.empty()) {
      return Usage(path + ":1: the header names no connector command; give --connector");
    }
    // The replay line names the scenario file; say so when the run judged by
    // the trace used another profile or an edited scenario.
    auto on_disk = LoadScenario(spec.scenario_path);
    if (!on_disk.ok() || !google::protobuf::util::MessageDifferencer::Equals(*on_disk, spec.scenario)) {
      profile_note = absl::StrCat("note: ", spec.scenario_path,
                                  " differs from the scenario embedded in the trace (edited, or run "
                                  "with --profile); give the same --profile to weir run\n");
    }
  } else {
    if (!seed_given) return Usage("--scenario needs --seed: the seed of the failing run");
    auto scenario = LoadScenario(f.scenario);
    if (!scenario.ok()) return InputError(scenario.status());
    spec.scenario = std::move(*scenario);
    spec.scenario_path = f.scenario;
    spec.seed = f.seed;
    if (!f.profile.empty()) {
      auto profile = LoadProfile(f.profile);
      if (!profile.ok()) return InputError(profile.status());
      *spec.scenario.mutable_profile() = std::move(*profile);
    }
    if (!f.plan.empty()) {
      auto plan = LoadFaultPlan(f.plan);
      if (!plan.ok()) return InputError(plan.status());
      spec.plan = std::move(*plan);
    }
  }
  if (!f.connector.empty()) {
    if (!from_trace && !f.inputs.empty()) {
      return Usage("give the connector either as --connector 'CMD ARGS' or after --, not both");
    }
    auto split = SplitCommandLine(f.connector);
    if (!split.ok()) return Usage(absl::StrCat("--connector ", split.status().message()));
    spec.connector_argv = std::move(*split);
  } else if (!from_trace) {
    spec.connector_argv = f.inputs;
  }
  if (spec.connector_argv.empty()) return Usage("no connector command; expected --connector 'CMD ARGS…'");
  std::vector<std::string> changes;  // the connector's files that differ from the trace's
  if (from_trace) {
    // As resolved when the trace was recorded, from whatever directory we are in.
    auto connector =
        ResolveRecordedConnector(header, f.connector.empty() ? std::vector<std::string>{} : spec.connector_argv);
    if (!connector.ok()) {
      std::fprintf(stderr, "weir shrink: %s; nothing shrunk\n", std::string(connector.status().message()).c_str());
      return kExitUsage;
    }
    spec.connector_argv = connector->argv;
    changes = connector->changes;
  } else if (!ResolveExecutable(spec.connector_argv[0]).has_value()) {
    return Usage("--connector: '" + spec.connector_argv[0] + "' is not an executable file (nor found on PATH)");
  }
  spec.transport = transport;

  std::printf("weir shrink: scenario %s, seed %llu, connector %s\n", spec.scenario_path.c_str(),
              static_cast<unsigned long long>(spec.seed), ShellJoin(spec.connector_argv).c_str());
  for (const std::string& change : changes) std::printf("%s\n", change.c_str());
  std::fflush(stdout);

  // A signal ends the rerun in flight (connector killed and reaped); the
  // search then stops with the smallest failing plan found so far.
  const std::atomic<bool>* stop = InstallStopSignals();
  spec.stop = stop;
  auto interrupted = [] {
    std::fprintf(stderr, "weir: interrupted by signal %d: the connector was killed, nothing written\n", StopSignal());
    return kExitInterrupted;
  };

  // The failing run itself: drawn from the scenario's rates, or under the
  // given plan (--plan, or the trace's).
  StartFailureWatch start_watch;
  RunSpec first_spec = spec;
  first_spec.observers.push_back(&start_watch);
  auto original = RunOverGrpc(first_spec);
  if (absl::IsCancelled(original.status())) return interrupted();
  if (!original.ok()) {
    std::fprintf(stderr, "weir: harness fault: %s\n", std::string(original.status().message()).c_str());
    return kExitHarness;
  }
  const RerunResult first = ToRerunResult(*original);
  // A connector that never came up: not a failure worth shrinking, and (from a
  // trace whose run did come up) not nondeterminism either.
  if (!start_watch.reason().empty() && (from_trace ? first.digest != saved_digest : start_watch.incarnation() == 1)) {
    std::printf("weir shrink: the connector could not start: %s\n  connector: %s\nnothing shrunk\n",
                start_watch.reason().c_str(), ShellJoin(spec.connector_argv).c_str());
    return kExitHarness;
  }
  if (from_trace && first.digest != saved_digest && !changes.empty()) {
    std::printf(
        "CHANGED CONNECTOR: rerunning the trace's run gave digest %s (%llu events), the trace has %s "
        "(%llu events). The connector changed since the trace was recorded (above), so this is not "
        "the run that failed and says nothing about determinism; nothing shrunk. Shrink with the "
        "recorded build (--connector), or a new run of this one (weir shrink --scenario S --seed N).\n",
        first.digest.c_str(), static_cast<unsigned long long>(first.events), saved_digest.c_str(),
        static_cast<unsigned long long>(saved_events));
    return kExitUsage;
  }
  if (from_trace && first.digest != saved_digest) {
    std::printf(
        "NONDETERMINISTIC: rerunning the trace's run gave digest %s (%llu events), the trace has %s "
        "(%llu events); nothing shrunk. weir replay %s shows the first differing event.\n",
        first.digest.c_str(), static_cast<unsigned long long>(first.events), saved_digest.c_str(),
        static_cast<unsigned long long>(saved_events), ShellQuote(f.inputs[0]).c_str());
    return kNondeterministic;
  }
  if (first.failed.empty()) {
    std::fprintf(stderr, "weir: the run passed every invariant (digest %s); nothing to shrink\n", first.digest.c_str());
    return kExitUsage;
  }
  if (wanted && !first.Fails(*wanted)) {
    std::fprintf(stderr, "weir: the run did not fail %s; it failed %s (choose with --invariant)\n",
                 InvariantName(*wanted), InvariantNames(first.failed).c_str());
    return kExitUsage;
  }
  const Invariant target = wanted ? *wanted : first.failed.front();
  const v1::FaultPlan start = original->plan;
  std::printf(
      "target     %s%s\n", InvariantName(target),
      first.failed.size() > 1
          ? absl::StrCat(" (the run failed ", InvariantNames(first.failed), "; choose with --invariant)").c_str()
          : "");
  std::printf("before     %s, %llu events, %llu steps (digest %s)\n", Decisions(start.decisions_size()).c_str(),
              static_cast<unsigned long long>(first.events), static_cast<unsigned long long>(first.steps),
              first.digest.c_str());
  std::fflush(stdout);

  const bool tty = f.progress == "bar" || (f.progress == "auto" && ::isatty(STDOUT_FILENO));
  const bool quiet = f.progress == "none";
  const auto t0 = std::chrono::steady_clock::now();
  const auto elapsed = [&] { return std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count(); };
  double last_line = 0;
  std::size_t last_size = static_cast<std::size_t>(start.decisions_size());
  bool progress_shown = false;

  ShrinkOptions options;
  options.target = target;
  options.max_reruns = f.max_reruns;
  options.stop = [&] { return stop->load() || (f.max_seconds > 0 && elapsed() >= f.max_seconds); };
  options.progress = [&](const ShrinkProgress& p) {
    if (quiet) return;
    const double now = elapsed();
    if (tty) {
      std::printf("\r\033[Kshrink: %llu reruns, %zu of %zu decisions left, %s, %.0f s",
                  static_cast<unsigned long long>(p.reruns), p.current_decisions, p.original_decisions,
                  PhaseName(p.phase), now);
      progress_shown = true;
    } else if (p.current_decisions != last_size || now - last_line >= 10) {
      std::printf("shrink: %llu reruns, %zu of %zu decisions left, %s, %.0f s\n",
                  static_cast<unsigned long long>(p.reruns), p.current_decisions, p.original_decisions,
                  PhaseName(p.phase), now);
      last_line = now;
      last_size = p.current_decisions;
    }
    std::fflush(stdout);
  };
  const Rerun rerun = [&spec](const v1::FaultPlan& plan) -> absl::StatusOr<RerunResult> {
    RunSpec s = spec;
    s.plan = plan;
    s.trace_path.clear();
    auto out = RunOverGrpc(s);
    if (!out.ok()) return out.status();
    return ToRerunResult(*out);
  };
  auto r = ShrinkPlan(start, first.digest, rerun, options);
  if (progress_shown) std::printf("\n");
  if (!r.ok()) {
    std::fprintf(stderr, "weir: harness fault: %s\n", std::string(r.status().message()).c_str());
    return kExitHarness;
  }
  if (stop->load() && r->minimal.decisions_size() == start.decisions_size()) return interrupted();
  if (r->outcome == ShrinkOutcome::kNondeterministic) {
    std::printf(
        "NONDETERMINISTIC: %s; nothing shrunk. The connector answers the same scenario, seed and "
        "fault plan differently (wall clock, unseeded randomness or racing threads?): a plan shrunk "
        "against it would mean nothing. Save a trace (weir run --trace) and weir replay it to see the "
        "first differing event.\n",
        r->nondeterminism.c_str());
    return kNondeterministic;
  }

  const std::string comment =
      absl::StrCat("Minimal fault plan (weir shrink) for ", InvariantName(target), ": scenario ", spec.scenario_path,
                   ", seed ", spec.seed, "; ", r->minimal.decisions_size(), " of ", start.decisions_size(),
                   " decisions", r->one_minimal ? ", 1-minimal." : ", not proven 1-minimal (budget reached).");
  if (absl::Status st = WriteFileAtomically(f.out, FormatFaultPlan(r->minimal, comment)); !st.ok()) {
    std::fprintf(stderr, "weir: %s\n", std::string(st.message()).c_str());
    return kExitHarness;
  }
  const RerunResult& m = r->minimal_run;
  std::printf("after      %s, %llu events, %llu steps (digest %s)\n", Decisions(r->minimal.decisions_size()).c_str(),
              static_cast<unsigned long long>(m.events), static_cast<unsigned long long>(m.steps), m.digest.c_str());
  std::printf("reruns     %llu (%llu removals and %llu weakenings accepted, %.1f s)\n",
              static_cast<unsigned long long>(r->reruns), static_cast<unsigned long long>(r->removal_steps),
              static_cast<unsigned long long>(r->weakening_steps), elapsed());
  for (const auto& d : r->minimal.decisions()) std::printf("  %s\n", DescribeDecision(d).c_str());
  if (stop->load()) {
    std::printf(
        "interrupted by signal %d: the plan still fails %s but is not proven 1-minimal; run "
        "weir shrink on it again to go on.\n",
        StopSignal(), InvariantName(target));
  } else if (r->one_minimal) {
    std::printf("1-minimal: %s still fails; without any one of these decisions it holds.\n", InvariantName(target));
  } else {
    std::printf(
        "budget reached (--max-reruns %llu, --max-seconds %g): the plan still fails %s but is "
        "not proven 1-minimal; run weir shrink on it again to go on.\n",
        static_cast<unsigned long long>(f.max_reruns), f.max_seconds, InvariantName(target));
  }
  std::printf("plan       %s\n", f.out.c_str());

  // Phase 2: under the minimal plan, the smallest workload that still fails.
  std::string replay_scenario = spec.scenario_path;
  std::string replay_profile = from_trace ? "" : f.profile;
  RunSpec minimal_spec = spec;
  minimal_spec.plan = r->minimal;
  std::string final_digest = m.digest;
  const std::uint64_t reruns_left = f.max_reruns == 0 ? 0 : (f.max_reruns > r->reruns ? f.max_reruns - r->reruns : 0);
  if (f.keep_workload) {
    std::printf("workload   kept (--keep-workload)\n");
  } else if (stop->load()) {
    std::printf("workload   not shrunk (interrupted)\n");
  } else if (f.max_reruns > 0 && reruns_left == 0) {
    std::printf("workload   not shrunk: the rerun budget (--max-reruns %llu) is spent\n",
                static_cast<unsigned long long>(f.max_reruns));
  } else {
    WorkloadShrinkOptions wo;
    wo.max_reruns = reruns_left;
    wo.stop = options.stop;
    wo.progress = [&](std::uint64_t reruns) {
      if (quiet) return;
      if (tty) {
        std::printf("\r\033[Kshrink: %llu reruns, shrinking the workload, %.0f s",
                    static_cast<unsigned long long>(r->reruns + reruns), elapsed());
        progress_shown = true;
      } else if (elapsed() - last_line >= 10) {
        std::printf("shrink: %llu reruns, shrinking the workload, %.0f s\n",
                    static_cast<unsigned long long>(r->reruns + reruns), elapsed());
        last_line = elapsed();
      }
      std::fflush(stdout);
    };
    progress_shown = false;
    const WorkloadRerun workload_rerun = [&](const v1::Scenario& candidate) -> absl::StatusOr<WorkloadRun> {
      RunSpec s = minimal_spec;
      s.scenario = candidate;
      s.trace_path.clear();
      auto out = RunOverGrpc(s);
      if (!out.ok()) return out.status();
      const RerunResult rr = ToRerunResult(*out);
      return WorkloadRun{rr.Fails(target), rr.events, rr.digest};
    };
    auto w = ShrinkWorkload(spec.scenario, workload_rerun, wo);
    if (progress_shown) std::printf("\n");
    if (!w.ok()) {
      std::fprintf(stderr, "weir: harness fault while shrinking the workload: %s\n",
                   std::string(w.status().message()).c_str());
      return kExitHarness;
    }
    if (!w->changed()) {
      std::printf("workload   no smaller workload still fails %s (%llu reruns)\n", InvariantName(target),
                  static_cast<unsigned long long>(w->reruns));
    } else {
      std::vector<std::string> knobs;
      for (const KnobChange& c : w->changes) {
        knobs.push_back(absl::StrCat(WorkloadKnobName(c.knob), " ", c.before, " -> ", c.after));
      }
      const std::string scenario_comment =
          absl::StrCat("Shrunk workload (weir shrink) for ", InvariantName(target), " under ", f.out, ": scenario ",
                       spec.scenario_path, ", seed ", spec.seed, ";\n", absl::StrJoin(knobs, ", "), ".",
                       w->budget_reached ? " Not proven smallest (budget reached)." : "");
      if (absl::Status st = WriteFileAtomically(f.out_scenario, FormatScenario(w->scenario, scenario_comment));
          !st.ok()) {
        std::fprintf(stderr, "weir: %s\n", std::string(st.message()).c_str());
        return kExitHarness;
      }
      std::printf("workload   %s (%llu reruns%s)\n", absl::StrJoin(knobs, ", ").c_str(),
                  static_cast<unsigned long long>(w->reruns),
                  w->budget_reached ? "; budget reached, not proven smallest" : "");
      std::printf("events     %llu before -> %llu with the minimal plan -> %llu with the shrunk workload\n",
                  static_cast<unsigned long long>(first.events), static_cast<unsigned long long>(m.events),
                  static_cast<unsigned long long>(w->events));
      std::printf("scenario   %s\n", f.out_scenario.c_str());
      minimal_spec.scenario = w->scenario;
      minimal_spec.scenario_path = f.out_scenario;
      replay_scenario = f.out_scenario;
      replay_profile.clear();  // the written scenario carries the profile the run was judged by
      profile_note.clear();
      final_digest = w->digest;
    }
  }

  if (!f.trace.empty()) {
    RunSpec s = minimal_spec;
    s.trace_path = f.trace;
    if (auto id = IdentifyConnector(s.connector_argv); id.ok()) s.connector_identity = std::move(*id);
    auto out = stop->load() ? absl::StatusOr<RunOutput>(absl::CancelledError("interrupted")) : RunOverGrpc(s);
    if (absl::IsCancelled(out.status())) {
      std::printf("trace      not written (interrupted)\n");
    } else if (!out.ok()) {
      std::fprintf(stderr, "weir: harness fault: %s\n", std::string(out.status().message()).c_str());
      return kExitHarness;
    } else {
      std::printf("trace      %s%s\n", f.trace.c_str(),
                  out->digest == final_digest ? "" : " (its digest differs: the connector is nondeterministic)");
    }
  }
  std::printf("%sreplay: %s\n", profile_note.c_str(),
              ReplayLine(replay_scenario, spec.seed, transport, f.out, replay_profile, spec.connector_argv).c_str());
  return stop->load() ? kExitInterrupted : kShrunk;
}

}  // namespace weir
