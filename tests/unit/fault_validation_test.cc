// Tests for the meaning checks on a scenario's faults block
// (harness/scenario/fault_validation.h), through the scenario loader so the
// file:line:column of each error is checked as `weir lint` prints it.
#include "harness/scenario/fault_validation.h"

#include <string>

#include <gtest/gtest.h>

#include "harness/scenario/scenario_file.h"

namespace weir {
namespace {

constexpr char kWorkload[] = "workload { messages: 10 publish_interval_ms: 5 }\n";

std::string Error(const std::string& faults) {
  auto s = ParseScenario("s.scenario", kWorkload + faults);
  EXPECT_FALSE(s.ok()) << faults;
  return s.ok() ? "" : std::string(s.status().message());
}

bool Valid(const std::string& faults) {
  auto s = ParseScenario("s.scenario", kWorkload + faults);
  EXPECT_TRUE(s.ok()) << s.status();
  return s.ok();
}

TEST(FaultValidation, StepCrashPointAtACheckpointSiteIsRejectedAtTheSiteField) {
  const std::string e = Error(
      "faults {\n"
      "  scripted {\n"
      "    site: CHECKPOINT\n"
      "    position: 2\n"
      "    crash { point: BEFORE_STEP }\n"
      "  }\n"
      "}\n");
  EXPECT_EQ(e.rfind("s.scenario:4:5:", 0), 0u) << e;
  EXPECT_NE(e.find("BEFORE_STEP"), std::string::npos) << e;
  EXPECT_NE(e.find("expected site STEP"), std::string::npos) << e;
}

TEST(FaultValidation, InStepCrashPointAtACheckpointSiteIsRejected) {
  const std::string e = Error(
      "faults {\n"
      "  scripted { site: CHECKPOINT position: 1 crash { point: IN_STEP_AFTER_BROKER_CALL after_calls: 1 } }\n"
      "}\n");
  EXPECT_EQ(e.rfind("s.scenario:3:14:", 0), 0u) << e;
  EXPECT_NE(e.find("expected site STEP"), std::string::npos) << e;
}

TEST(FaultValidation, CheckpointCrashPointsAtAStepSiteAreRejected) {
  for (const char* point : {"AFTER_CHECKPOINT_BEFORE_COMMIT", "AFTER_COMMIT_BEFORE_NOTICE", "IN_NOTICE_AFTER_ACK"}) {
    const std::string e = Error(std::string("faults {\n  scripted {\n    position: 3\n    site: STEP\n") +
                                "    crash { point: " + point + " }\n  }\n}\n");
    EXPECT_EQ(e.rfind("s.scenario:5:5:", 0), 0u) << e;
    EXPECT_NE(e.find(point), std::string::npos) << e;
    EXPECT_NE(e.find("expected site CHECKPOINT"), std::string::npos) << e;
  }
}

TEST(FaultValidation, CrashPointsAtTheirOwnSitesAreAccepted) {
  EXPECT_TRUE(
      Valid("faults {\n"
            "  scripted { site: STEP position: 1 crash { point: BEFORE_STEP } }\n"
            "  scripted { site: STEP position: 2 crash { point: IN_STEP_AFTER_BROKER_CALL after_calls: 1 } }\n"
            "  scripted { site: CHECKPOINT position: 1 crash { point: AFTER_CHECKPOINT_BEFORE_COMMIT } }\n"
            "  scripted { site: CHECKPOINT position: 2 crash { point: AFTER_COMMIT_BEFORE_NOTICE } }\n"
            "  scripted { site: CHECKPOINT position: 3 crash { point: IN_NOTICE_AFTER_ACK after_calls: 1 } }\n"
            "}\n"));
}

TEST(FaultValidation, CrashWithoutAPointIsRejected) {
  const std::string e = Error("faults {\n  scripted { site: STEP position: 1 crash { } }\n}\n");
  EXPECT_EQ(e.rfind("s.scenario:3:", 0), 0u) << e;
  EXPECT_NE(e.find("crash point"), std::string::npos) << e;
}

TEST(FaultValidation, BrokerFaultsAtTheWrongSiteAreRejectedAsInPlanFiles) {
  EXPECT_NE(Error("faults { scripted { site: PULL position: 1 lost_ack: true } }\n").find("expected site ACK"),
            std::string::npos);
  EXPECT_NE(Error("faults { scripted { site: STEP position: 1 latency_ms: 5 } }\n")
                .find("expected site PULL, ACK, NACK or EXTEND_LEASE"),
            std::string::npos);
  EXPECT_NE(
      Error("faults { scripted { site: ACK position: 1 commit_failure: true } }\n").find("expected site CHECKPOINT"),
      std::string::npos);
  EXPECT_TRUE(
      Valid("faults { scripted { site: ACK position: 1 lost_ack: true }\n"
            "         scripted { site: NACK position: 1 transient { code: UNAVAILABLE } }\n"
            "         scripted { site: PULL position: 1 broker_restart: true }\n"
            "         scripted { site: PUBLISH position: 1 visibility_delay_ms: 5 } }\n"));
}

}  // namespace
}  // namespace weir
