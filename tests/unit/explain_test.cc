// weir explain over a hand-made trace: a fault the plan applied far from the
// violation's window but at the time of an event it shows (a broker restart
// that ended the lease of the lost message) is shown in the text and drawn in
// the HTML timeline.
#include "harness/replay/explain.h"

#include <gtest/gtest.h>
#include <unistd.h>

#include <filesystem>
#include <fstream>

#include "harness/trace/trace_format.h"

namespace weir {
namespace {

class TraceFileWriter {
 public:
  TraceFileWriter() {
    auto* h = header_.mutable_header();
    h->set_weir_version("test");
    h->set_seed(1);
    h->set_scenario_path("test.scenario");
    h->mutable_scenario()->set_name("test");
    h->mutable_scenario()->mutable_profile()->set_guarantee(v1::Profile::EXACTLY_ONCE);
  }
  v1::TraceEvent& Add(VirtualTime t) {
    v1::TraceEvent& e = events_.emplace_back();
    e.set_seq(events_.size() - 1);
    e.set_t_ns(t);
    e.set_incarnation(1);
    return e;
  }
  void Filler(int n, VirtualTime t) {
    for (int i = 0; i < n; ++i) {
      auto* x = Add(t).mutable_stepped();
      x->set_step(++step_);
      x->set_resume_at_ns(t);
    }
  }
  std::string Write(const std::string& path) {
    std::string body;
    Sha256 digest;
    for (const auto& e : events_) {
      v1::TraceLine line;
      *line.mutable_event() = e;
      const std::string text = EncodeTraceLine(line);
      digest.Update(text);
      body += text;
    }
    v1::TraceLine footer;
    footer.mutable_footer()->set_events(events_.size());
    footer.mutable_footer()->set_digest(digest.HexDigest());
    std::ofstream(path) << EncodeTraceLine(header_) << body << EncodeTraceLine(footer);
    return path;
  }

 private:
  v1::TraceLine header_;
  std::vector<v1::TraceEvent> events_;
  std::uint64_t step_ = 0;
};

TEST(Explain, AFaultAppliedAtTheTimeOfAShownEventIsInTheTimeline) {
  TraceFileWriter w;
  w.Add(Millis(1)).mutable_published()->set_message_id(1);
  auto* d = w.Add(Millis(2)).mutable_delivered();
  d->set_message_id(1);
  d->set_receipt(7);
  d->set_attempt(1);
  d->set_lease_deadline_ns(Seconds(30));
  w.Filler(40, Millis(3));
  auto& fault = w.Add(Seconds(2));  // seq 42: far from every proving event
  fault.mutable_fault_applied()->mutable_decision()->set_site(v1::PULL);
  fault.mutable_fault_applied()->mutable_decision()->set_position(3);
  fault.mutable_fault_applied()->mutable_decision()->set_broker_restart(true);
  auto* x = w.Add(Seconds(2)).mutable_lease_expired();  // long before its deadline
  x->set_message_id(1);
  x->set_receipt(7);
  w.Filler(40, Seconds(3));
  w.Add(Seconds(4)).mutable_run_ended()->set_reason("drain bound reached");
  const std::string path = w.Write(::testing::TempDir() + "/explain_fault_" + std::to_string(::getpid()) + ".jsonl");

  auto out = ExplainTrace(path);
  ASSERT_TRUE(out.ok()) << out.status();
  std::filesystem::remove(path);
  EXPECT_NE(out->text.find("#42 "), std::string::npos) << out->text;
  EXPECT_NE(out->text.find("fault applied"), std::string::npos) << out->text;
  EXPECT_LT(out->text.find("fault applied"), out->text.find("lease of message 1 (receipt 7) expired")) << out->text;
  ASSERT_EQ(out->timelines.violations.size(), 1u);
  bool drawn = false;
  std::uint64_t last = 0;
  for (const TimelineEvent& te : out->timelines.violations[0].events) {
    drawn |= te.event.has_fault_applied();
    EXPECT_GE(te.event.seq(), last);
    last = te.event.seq();
  }
  EXPECT_TRUE(drawn);
}

}  // namespace
}  // namespace weir
