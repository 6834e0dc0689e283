// The buoy source's own tests: weir in-process (no gRPC, no child process)
// on weir's installed quick suite. The correct source must pass every run;
// the source with a bug switched on must be caught by the invariant that
// names the bug.
#include "buoy_source.h"

#include <algorithm>
#include <memory>
#include <string>

#include <gtest/gtest.h>

#include "harness/inprocess/in_process_port.h"
#include "harness/run/run.h"

namespace buoys {
namespace {

// WEIR_QUICK_SUITE comes from CMakeLists.txt: weir_DATA_DIR/suites/quick.suite.
constexpr const char* kQuickSuite = WEIR_QUICK_SUITE;

TEST(BuoySource, PassesWeirsQuickSuite) {
  auto report = weir::CertifyInProcess(kQuickSuite, [] { return std::make_unique<BuoySource>(); });
  ASSERT_TRUE(report.ok()) << report.status();
  ASSERT_GT(report->pairs_total(), 0u);
  EXPECT_EQ(static_cast<std::uint64_t>(report->runs_size()), report->pairs_total());
  EXPECT_EQ(report->weir_version(), weir::WeirVersion());
  for (const auto& run : report->runs()) {
    EXPECT_TRUE(run.passed()) << run.scenario() << " seed " << run.seed() << ": " << run.first_violation() << "\n  "
                              << run.replay();
  }
}

TEST(BuoySource, AckOnPullIsCaughtAsAckBeforeCommit) {
  auto report =
      weir::CertifyInProcess(kQuickSuite, [] { return std::make_unique<BuoySource>(BuoyBugs{.ack_on_pull = true}); });
  ASSERT_TRUE(report.ok()) << report.status();
  const bool caught = std::any_of(report->runs().begin(), report->runs().end(), [](const auto& run) {
    const auto& failed = run.failed_invariants();
    return std::find(failed.begin(), failed.end(), "ack-before-commit") != failed.end();
  });
  EXPECT_TRUE(caught) << "no run of the quick suite failed ack-before-commit";
}

}  // namespace
}  // namespace buoys
