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

// A duplicate whose four proving events lie far apart (the first record,
// its commit, the second record, its commit: four windows of context that
// together exceed the drawing bound): every proving event is still drawn,
// each window keeps some context, and the drawing stays within the bound.
TEST(Explain, EveryProvingEventOfALongDuplicateIsDrawn) {
  TraceFileWriter w;
  w.Add(Millis(1)).mutable_published()->set_message_id(1);
  auto* d = w.Add(Millis(2)).mutable_delivered();
  d->set_message_id(1);
  d->set_receipt(7);
  d->set_attempt(1);
  d->set_lease_deadline_ns(Seconds(30));
  w.Filler(100, Millis(3));
  auto* e1 = w.Add(Millis(4)).mutable_emitted();  // seq 102
  e1->set_message_id(1);
  e1->set_step(1);
  w.Filler(200, Millis(5));
  w.Add(Millis(6)).mutable_checkpoint()->set_checkpoint_id(1);
  w.Add(Millis(6)).mutable_committed()->set_checkpoint_id(1);  // seq 304
  w.Filler(300, Millis(7));
  auto* d2 = w.Add(Millis(8)).mutable_delivered();
  d2->set_message_id(1);
  d2->set_receipt(8);
  d2->set_attempt(2);
  d2->set_lease_deadline_ns(Seconds(30));
  auto* e2 = w.Add(Millis(8)).mutable_emitted();  // seq 606
  e2->set_message_id(1);
  e2->set_step(2);
  w.Filler(300, Millis(9));
  w.Add(Millis(10)).mutable_checkpoint()->set_checkpoint_id(2);
  w.Add(Millis(10)).mutable_committed()->set_checkpoint_id(2);  // seq 908
  w.Filler(10, Millis(11));
  w.Add(Millis(12)).mutable_run_ended()->set_reason("all messages committed");
  const std::string path = w.Write(::testing::TempDir() + "/explain_dup_" + std::to_string(::getpid()) + ".jsonl");

  auto out = ExplainTrace(path);
  ASSERT_TRUE(out.ok()) << out.status();
  std::filesystem::remove(path);
  const ViolationTimeline* dup = nullptr;
  for (const ViolationTimeline& v : out->timelines.violations) {
    if (v.invariant == "duplicate-output") dup = &v;
  }
  ASSERT_NE(dup, nullptr) << out->text;
  std::vector<std::uint64_t> proving;
  std::size_t before_last = 0;  // context drawn in the last window, before its proving event
  for (const TimelineEvent& te : dup->events) {
    if (te.proving) proving.push_back(te.event.seq());
    if (!te.proving && te.event.seq() > 850 && te.event.seq() < 908) ++before_last;
  }
  EXPECT_EQ(proving, (std::vector<std::uint64_t>{102, 304, 606, 908}));
  EXPECT_GT(before_last, 0u);
  EXPECT_LE(dup->events.size(), kMaxDrawnEvents);
}

}  // namespace
}  // namespace weir
