// Shrinking a failing run of every mutant in the zoo: the minimal
// plan has no more decisions than the original, still fails the mutant's
// invariant on a fresh rerun, and is 1-minimal — checked here from outside the
// search by rerunning it without each decision in turn.
//
// Runs are in-process (the reference source with one Bugs flag), except for
// mutant_exit_on_transient_error: it ends its own process, so it runs as a
// real connector over gRPC. mutant_wall_clock is left out: it is
// nondeterministic by design and passes every invariant, so there is nothing
// to shrink; tests/e2e/shrink.sh checks that weir shrink reports it as
// nondeterministic instead.
//
// At the end it prints each mutant's decision counts before and after, and the
// median reduction across the zoo (over the runs that had decisions to remove).
#include <algorithm>
#include <cstdio>
#include <cstdlib>
#include <string>
#include <vector>

#include <gtest/gtest.h>

#include "absl/strings/str_cat.h"
#include "fixtures/connectors/reference_source.h"
#include "harness/edge/grpc_run.h"
#include "harness/inprocess/in_process_port.h"
#include "harness/scenario/plan_file.h"
#include "harness/scenario/scenario_file.h"
#include "harness/shrink/shrink.h"
#include "tests/unit/test_support.h"

namespace weir {
namespace {

using testing::BinaryDir;
using testing::SourceDir;

struct Mutant {
  const char* name;
  void (*bug)(fixtures::Bugs&);
  // A failing run: the matrix's first detection (README, "The mutant zoo").
  const char* scenario;
  std::uint64_t seed;
  Invariant invariant;
  bool over_grpc = false;
  // When set, the failing run applies this plan instead of drawing from the
  // scenario's rates (whose idle scenarios draw no faults at all).
  const char* plan = nullptr;
};

// Faults of every kind that the idle scenario's stall does not need.
constexpr char kIdleBystanders[] = R"(
decisions { site: PULL position: 2 latency_ms: 300 }
decisions { site: PULL position: 5 duplicate: true }
decisions { site: PUBLISH position: 3 visibility_delay_ms: 2000 }
decisions { site: ACK position: 2 lost_ack: true }
decisions { site: STEP position: 12 crash { point: BEFORE_STEP } }
decisions { site: CHECKPOINT position: 4 commit_failure: true }
decisions { site: PULL position: 20 transient { code: UNAVAILABLE } }
)";

void PrintTo(const Mutant& m, std::ostream* os) { *os << m.name; }

const Mutant kZoo[] = {
    {"mutant_ack_on_checkpoint", [](fixtures::Bugs& b) { b.ack_on_checkpoint = true; }, "broker_restart_greenhouse", 1,
     Invariant::kAckBeforeCommit},
    {"mutant_ack_on_pull", [](fixtures::Bugs& b) { b.ack_on_pull = true; }, "broker_restart_greenhouse", 1,
     Invariant::kAckBeforeCommit},
    {"mutant_drop_batch_on_error", [](fixtures::Bugs& b) { b.drop_batch_on_error = true; },
     "flaky_acks_orchard_sensors", 2, Invariant::kLostMessage},
    {"mutant_exit_on_transient_error", [](fixtures::Bugs& b) { b.exit_on_transient_error = true; },
     "flaky_acks_orchard_sensors", 1, Invariant::kUnexpectedExit, /*over_grpc=*/true},
    {"mutant_ignore_retry_after", [](fixtures::Bugs& b) { b.ignore_retry_after = true; },
     "throttle_storm_toll_gantries", 1, Invariant::kThrottleViolation},
    {"mutant_latest_event_time_watermark", [](fixtures::Bugs& b) { b.latest_event_time_watermark = true; },
     "broker_restart_greenhouse", 1, Invariant::kWatermarkRegression},
    {"mutant_no_dedup_in_checkpoint", [](fixtures::Bugs& b) { b.no_dedup_in_checkpoint = true; },
     "crash_storm_weather_buoys", 1, Invariant::kDuplicateOutput},
    {"mutant_no_idle_watermark", [](fixtures::Bugs& b) { b.no_idle_watermark = true; }, "idle_watermark_beehive_scales",
     1, Invariant::kWatermarkStall, false, kIdleBystanders},
    {"mutant_no_redelivery_dedup", [](fixtures::Bugs& b) { b.no_redelivery_dedup = true; }, "broker_restart_greenhouse",
     1, Invariant::kDuplicateOutput},
    {"mutant_no_watermark_restore", [](fixtures::Bugs& b) { b.no_watermark_restore = true; },
     "commit_failures_cold_chain", 1, Invariant::kWatermarkRegression},
    {"mutant_receipt_as_message_id", [](fixtures::Bugs& b) { b.receipt_as_message_id = true; },
     "broker_restart_greenhouse", 1, Invariant::kProtocolError},
    {"mutant_tight_retry_loop", [](fixtures::Bugs& b) { b.tight_retry_loop = true; }, "flaky_acks_orchard_sensors", 1,
     Invariant::kRetryStorm},
};

struct Row {
  std::string name;
  int before = 0;
  int after = 0;
  std::uint64_t events_before = 0, events_after = 0;
  std::uint64_t reruns = 0;
};
std::vector<Row>& Rows() {
  static std::vector<Row> rows;
  return rows;
}

absl::StatusOr<RunOutput> RunMutant(const Mutant& m, RunSpec spec) {
  if (m.over_grpc) {
    spec.connector_argv = {BinaryDir() + "/fixtures/connectors/" + m.name};
    return RunOverGrpc(spec);
  }
  fixtures::Bugs bugs;
  m.bug(bugs);
  return RunInProcess(spec, [bugs] { return std::make_unique<fixtures::ReferenceSource>(bugs); });
}

bool FailsWith(const RunOutput& out, Invariant invariant) {
  return out.verdict.at(invariant).checked && out.verdict.at(invariant).violations > 0;
}

class ShrinkZoo : public ::testing::TestWithParam<Mutant> {};

TEST_P(ShrinkZoo, MinimalPlanStillFailsAndIsOneMinimal) {
  const Mutant& m = GetParam();
  RunSpec spec;
  spec.scenario_path = SourceDir() + "/fixtures/scenarios/" + m.scenario + ".scenario";
  auto scenario = LoadScenario(spec.scenario_path);
  ASSERT_TRUE(scenario.ok()) << scenario.status();
  spec.scenario = *scenario;
  spec.seed = m.seed;
  if (m.plan != nullptr) {
    auto plan = ParseFaultPlan("kIdleBystanders", m.plan);
    ASSERT_TRUE(plan.ok()) << plan.status();
    spec.plan = *plan;
  }

  auto original = RunMutant(m, spec);  // faults drawn from the scenario's rates, or m.plan
  ASSERT_TRUE(original.ok()) << original.status();
  ASSERT_TRUE(FailsWith(*original, m.invariant))
      << m.scenario << " seed " << m.seed << " no longer fails " << InvariantName(m.invariant);

  ShrinkOptions options;
  options.target = m.invariant;
  options.max_reruns = 3000;  // far above what any of them needs; hitting it fails below
  const Rerun rerun = [&](const v1::FaultPlan& plan) -> absl::StatusOr<RerunResult> {
    RunSpec s = spec;
    s.plan = plan;
    auto out = RunMutant(m, s);
    if (!out.ok()) return out.status();
    RerunResult r;
    for (int i = 0; i < kInvariantCount; ++i) {
      if (FailsWith(*out, static_cast<Invariant>(i))) r.failed.push_back(static_cast<Invariant>(i));
    }
    r.digest = out->digest;
    r.events = out->events;
    r.steps = out->summary.steps;
    return r;
  };
  auto r = ShrinkPlan(original->plan, original->digest, rerun, options);
  ASSERT_TRUE(r.ok()) << r.status();
  ASSERT_EQ(r->outcome, ShrinkOutcome::kShrunk) << r->nondeterminism;
  EXPECT_FALSE(r->budget_reached);
  EXPECT_TRUE(r->one_minimal);
  EXPECT_LE(r->minimal.decisions_size(), original->plan.decisions_size());

  // Fresh reruns, outside the search's memory.
  RunSpec minimal = spec;
  minimal.plan = r->minimal;
  auto again = RunMutant(m, minimal);
  ASSERT_TRUE(again.ok()) << again.status();
  EXPECT_TRUE(FailsWith(*again, m.invariant)) << "the minimal plan no longer fails";
  EXPECT_EQ(again->digest, r->minimal_run.digest);
  for (int i = 0; i < r->minimal.decisions_size(); ++i) {
    RunSpec without = minimal;
    without.plan->mutable_decisions()->DeleteSubrange(i, 1);
    auto out = RunMutant(m, without);
    ASSERT_TRUE(out.ok()) << out.status();
    EXPECT_FALSE(FailsWith(*out, m.invariant))
        << "still fails without decision " << i << ": " << r->minimal.decisions(i).ShortDebugString();
  }
  Rows().push_back({m.name, original->plan.decisions_size(), r->minimal.decisions_size(), original->events,
                    r->minimal_run.events, r->reruns});
}

INSTANTIATE_TEST_SUITE_P(EveryMutantButTheWallClockOne, ShrinkZoo, ::testing::ValuesIn(kZoo),
                         [](const ::testing::TestParamInfo<Mutant>& mutant) {
                           return std::string(mutant.param.name).substr(std::string("mutant_").size());
                         });

// Prints the table and the median reduction once every mutant has run.
class ZooReport : public ::testing::Environment {
 public:
  void TearDown() override {
    if (Rows().empty()) return;
    std::printf("\n%-36s %9s %9s %9s %13s %7s\n", "mutant", "decisions", "-> after", "reduction", "events", "reruns");
    std::vector<double> reductions;  // of runs that had decisions to remove
    for (const Row& row : Rows()) {
      const double reduction = row.before == 0 ? 0.0 : 100.0 * (row.before - row.after) / row.before;
      if (row.before > 0) reductions.push_back(reduction);
      std::printf("%-36s %9d %9d %9s %6llu->%-6llu %7llu\n", row.name.c_str(), row.before, row.after,
                  row.before == 0 ? "n/a" : absl::StrCat(static_cast<int>(reduction + 0.5), "%").c_str(),
                  static_cast<unsigned long long>(row.events_before), static_cast<unsigned long long>(row.events_after),
                  static_cast<unsigned long long>(row.reruns));
    }
    if (reductions.empty()) return;
    std::sort(reductions.begin(), reductions.end());
    const std::size_t n = reductions.size();
    const double median = n % 2 == 1 ? reductions[n / 2] : (reductions[n / 2 - 1] + reductions[n / 2]) / 2;
    std::printf(
        "median reduction: %.0f%% of the fault plan's decisions removed (%zu mutants whose failing "
        "run had decisions; n/a: it fails with no fault at all)\n",
        median, n);
  }
};
const ::testing::Environment* const kReport = ::testing::AddGlobalTestEnvironment(new ZooReport);

}  // namespace
}  // namespace weir
