// Golden tests of the text report: hand-built traces go through the oracle and
// FormatVerdictTable + FormatViolations; the text is compared with
// tests/golden/<name>.txt after masking virtual times ("12.000000000s" → <t>)
// and absolute paths (→ <path>), so a change of formatting shows as a diff.
//
// Regenerate after an intended change of the report:
//   WEIR_UPDATE_GOLDEN=1 ctest --test-dir build -R report_golden_test
// then review `git diff tests/golden/`.
#include <cstdlib>
#include <fstream>
#include <regex>
#include <sstream>
#include <string>

#include <gtest/gtest.h>

#include "harness/oracle/oracle.h"
#include "harness/report/text_report.h"

namespace weir {
namespace {

std::string Mask(std::string text) {
  static const std::regex kTime(R"(-?\d+\.\d{9}s)");
  static const std::regex kPath(R"((/[A-Za-z0-9._-]+)+)");
  text = std::regex_replace(text, kTime, "<t>");
  return std::regex_replace(text, kPath, "<path>");
}

std::string GoldenPath(const std::string& name) {
  const char* src = std::getenv("WEIR_SOURCE_DIR");
  return std::string(src != nullptr ? src : ".") + "/tests/golden/" + name + ".txt";
}

void ExpectGolden(const std::string& name, const Verdict& v) {
  const std::string actual = Mask(FormatVerdictTable(v) + FormatViolations(v));
  const std::string path = GoldenPath(name);
  const char* update = std::getenv("WEIR_UPDATE_GOLDEN");
  if (update != nullptr && std::string(update) == "1") {
    std::ofstream(path, std::ios::binary) << actual;
    GTEST_SKIP() << "rewrote " << path;
  }
  std::ifstream in(path, std::ios::binary);
  ASSERT_TRUE(in.good()) << path << " is missing; run with WEIR_UPDATE_GOLDEN=1 to create it";
  std::stringstream expected;
  expected << in.rdbuf();
  EXPECT_EQ(actual, expected.str()) << "report differs from " << path << " (WEIR_UPDATE_GOLDEN=1 rewrites it)";
}

// Feeds events one at a time, numbering them and stamping time = seq × 1 ms.
class Feed {
 public:
  explicit Feed(const v1::Profile& p) : oracle_(p) {}
  v1::TraceEvent& Next(std::uint64_t incarnation = 1) {
    e_.Clear();
    e_.set_seq(seq_);
    e_.set_t_ns(Millis(static_cast<std::int64_t>(seq_)));
    e_.set_incarnation(incarnation);
    return e_;
  }
  void Send() {
    oracle_.OnEvent(e_);
    ++seq_;
  }
  Verdict End() {
    Next().mutable_run_ended()->set_reason("all messages committed");
    Send();
    return oracle_.Finish();
  }

 private:
  Oracle oracle_;
  v1::TraceEvent e_;
  std::uint64_t seq_ = 0;
};

v1::Profile Strict() {
  v1::Profile p;
  p.set_guarantee(v1::Profile::EXACTLY_ONCE);
  p.set_watermark_policy(v1::Profile::BOUNDED_LATENESS);
  p.set_allowed_lateness_ms(0);
  p.set_idle_timeout_ms(5);
  p.set_min_backoff_ms(10);
  return p;
}

TEST(ReportGolden, PassingRun) {
  Feed f(Strict());
  f.Next().mutable_published()->set_message_id(1);
  f.Send();
  auto* d = f.Next().mutable_delivered();
  d->set_message_id(1);
  d->set_receipt(1);
  d->set_attempt(1);
  f.Send();
  f.Next().mutable_emitted()->set_message_id(1);
  f.Send();
  f.Next().mutable_checkpoint()->set_checkpoint_id(1);
  f.Send();
  f.Next().mutable_committed()->set_checkpoint_id(1);
  f.Send();
  f.Next().mutable_acked()->set_message_id(1);
  f.Send();
  // One step: the rules judged at every step had a chance (held); the fault
  // rules had none (not exercised: no crash, throttle or idle period).
  auto* st = f.Next().mutable_stepped();
  st->set_step(1);
  st->set_watermark_ns(0);
  st->set_resume_at_ns(Millis(7));
  f.Send();
  ExpectGolden("passing_run", f.End());
}

TEST(ReportGolden, EveryKindOfFailure) {
  Feed f(Strict());
  for (std::uint64_t id = 1; id <= 3; ++id) {
    f.Next().mutable_published()->set_message_id(id);
    f.Send();
  }
  auto* d = f.Next().mutable_delivered();
  d->set_message_id(1);
  d->set_receipt(1);
  d->set_attempt(1);
  f.Send();
  auto* r = f.Next().mutable_emitted();
  r->set_message_id(1);
  r->set_event_time_ns(Millis(1));
  r->set_step(1);
  f.Send();
  auto* s = f.Next().mutable_stepped();
  s->set_step(1);
  s->set_records(1);
  s->set_watermark_ns(Millis(6));
  s->set_resume_at_ns(Millis(7));
  s->set_broker_idle(true);
  f.Send();
  f.Next().mutable_acked()->set_message_id(1);  // ack-before-commit
  f.Send();
  auto* late = f.Next().mutable_emitted();  // never delivered, and late
  late->set_message_id(2);
  late->set_event_time_ns(Millis(2));
  late->set_step(2);
  f.Send();
  auto* s2 = f.Next().mutable_stepped();
  s2->set_step(2);
  s2->set_records(1);
  s2->set_watermark_ns(Millis(3));  // regression
  s2->set_resume_at_ns(Millis(20));
  s2->set_broker_idle(true);
  f.Send();
  f.Next().mutable_checkpoint()->set_checkpoint_id(1);
  f.Send();
  f.Next().mutable_committed()->set_checkpoint_id(1);
  f.Send();
  auto* ign = f.Next().mutable_ack_ignored();
  ign->set_receipt(42);
  ign->set_reason("ack: receipt never issued");
  f.Send();
  for (int i = 0; i < 10; ++i) {  // time passes
    f.Next();
    f.Send();
  }
  auto* s3 = f.Next().mutable_stepped();  // idle since step 1: stalled
  s3->set_step(3);
  s3->set_watermark_ns(Millis(6));
  s3->set_resume_at_ns(Millis(30));
  s3->set_broker_idle(true);
  f.Send();
  ExpectGolden("every_kind_of_failure", f.End());
}

}  // namespace
}  // namespace weir
