// Property test: the streaming Oracle against a brute-force checker.
//
// rapidcheck draws a list of actions; a small model of a run turns them into a
// trace (published, delivered with fresh receipts, records emitted into the
// open epoch, steps with watermarks that sometimes go back, checkpoints,
// commits, commit failures, crashes and restores from the last committed
// checkpoint, acks at random moments, run end). The brute-force checker below
// shares no code with the oracle: it keeps the whole trace and recomputes each
// invariant from scratch by its one-sentence rule (README, "The oracle's
// rules"). Both must agree on the violation count of ack-before-commit,
// lost-message, duplicate-output and watermark-regression, and on
// duplicate_records, for every generated trace.
//
// The number of traces: RC_PARAMS (ctest sets max_success).
#include <gtest/gtest.h>
#include <rapidcheck.h>
#include <rapidcheck/gtest.h>

#include <algorithm>
#include <cstdint>
#include <map>
#include <optional>
#include <set>
#include <vector>

#include "harness/oracle/oracle.h"

namespace weir {
namespace {

using v1::TraceEvent;

// ---------------------------------------------------------------------------
// The generator: a small model of a run, driven by rapidcheck's actions.

struct Action {
  int kind = 0;
  std::uint32_t a = 0;
  std::uint32_t b = 0;
};

}  // namespace
}  // namespace weir

namespace rc {
template <>
struct Arbitrary<weir::Action> {
  static Gen<weir::Action> arbitrary() {
    return gen::build<weir::Action>(gen::set(&weir::Action::kind, gen::inRange(0, 12)),
                                    gen::set(&weir::Action::a, gen::arbitrary<std::uint32_t>()),
                                    gen::set(&weir::Action::b, gen::arbitrary<std::uint32_t>()));
  }
};
}  // namespace rc

namespace weir {
namespace {

class RunModel {
 public:
  const std::vector<TraceEvent>& trace() const { return trace_; }

  void Start() { Opened(); }

  void Apply(const Action& x) {
    switch (x.kind) {
      case 0:
      case 1: Publish(); break;
      case 2:
      case 3: Deliver(x.a); break;
      case 4:
      case 5: Step(x.a, x.b); break;
      case 6: Checkpoint(); break;
      case 7: Commit(x.a, x.b); break;
      case 8:
        if (x.b % 3 == 0)
          CommitFailed(x.a);
        else
          Commit(x.a, x.b);
        break;
      case 9: Ack(x.a, x.b); break;
      case 10:
        if (x.b % 2 == 0)
          CrashAndOpen(x.a);
        else
          LeaseExpired(x.a);
        break;
      case 11: Ack(x.a, x.b); break;
      default: break;
    }
  }

  // A well-behaved finish: every message not yet committed is delivered,
  // emitted, checkpointed, committed and acked.
  void Drain() {
    std::vector<std::uint64_t> todo;
    for (std::uint64_t id = 1; id < next_id_; ++id) {
      if (!committed_.count(id)) todo.push_back(id);
    }
    if (todo.empty()) return;
    for (std::uint64_t id : todo) DeliverId(id);
    for (std::uint64_t id : todo) EmitRecord(id);
    EndStep(std::nullopt);
    Checkpoint();
    Commit(static_cast<std::uint32_t>(pending_.size() - 1), 0);
    for (std::uint64_t id : todo) AckId(id, receipts_[id].back());
  }

  void End() {
    auto& e = Next();
    e.mutable_run_ended()->set_reason("property test over");
  }

 private:
  TraceEvent& Next() {
    trace_.emplace_back();
    TraceEvent& e = trace_.back();
    e.set_seq(trace_.size() - 1);
    e.set_t_ns(Millis(static_cast<std::int64_t>(trace_.size())));
    e.set_incarnation(incarnation_);
    return e;
  }

  void Opened() {
    ++incarnation_;
    auto& e = Next();
    auto* o = e.mutable_opened();
    delivered_here_.clear();
    pending_.clear();
    if (last_committed_.has_value()) {
      o->set_restored(true);
      o->set_checkpoint_id(last_committed_->first);
      if (last_committed_->second.has_value()) o->set_watermark_ns(*last_committed_->second);
    }
  }

  void Publish() {
    auto& e = Next();
    e.mutable_published()->set_message_id(next_id_);
    e.mutable_published()->set_event_time_ns(Millis(static_cast<std::int64_t>(next_id_)));
    ++next_id_;
  }

  void Deliver(std::uint32_t a) {
    if (next_id_ == 1) return;
    DeliverId(1 + a % (next_id_ - 1));
  }
  void DeliverId(std::uint64_t id) {
    auto& e = Next();
    auto* d = e.mutable_delivered();
    d->set_message_id(id);
    d->set_receipt(next_receipt_);
    d->set_attempt(static_cast<std::uint32_t>(receipts_[id].size() + 1));
    d->set_lease_deadline_ns(e.t_ns() + Millis(30));
    receipts_[id].push_back(next_receipt_++);
    delivered_here_.insert(id);
  }

  void LeaseExpired(std::uint32_t a) {
    if (receipts_.empty()) return;
    auto it = receipts_.begin();
    std::advance(it, a % receipts_.size());
    auto& e = Next();
    e.mutable_lease_expired()->set_message_id(it->first);
    e.mutable_lease_expired()->set_receipt(it->second.back());
  }

  void EmitRecord(std::uint64_t id) {
    auto& e = Next();
    e.mutable_emitted()->set_message_id(id);
    e.mutable_emitted()->set_event_time_ns(Millis(static_cast<std::int64_t>(id)));
    e.mutable_emitted()->set_step(step_ + 1);
  }

  void EndStep(std::optional<std::int64_t> watermark) {
    auto& e = Next();
    auto* s = e.mutable_stepped();
    s->set_step(++step_);
    s->set_resume_at_ns(e.t_ns());
    if (watermark.has_value()) {
      s->set_watermark_ns(*watermark);
      watermark_ = watermark;
    }
  }

  // A step: up to three records of messages delivered to this incarnation
  // (sometimes one twice), then the stepped event with maybe a watermark.
  void Step(std::uint32_t a, std::uint32_t b) {
    std::vector<std::uint64_t> here(delivered_here_.begin(), delivered_here_.end());
    std::uint32_t r = a;
    const int records = here.empty() ? 0 : static_cast<int>(r % 4);
    for (int i = 0; i < records; ++i) {
      r = r * 1103515245u + 12345u;
      EmitRecord(here[(r >> 8) % here.size()]);
    }
    std::optional<std::int64_t> w;
    const std::int64_t base = watermark_.value_or(0);
    const std::int64_t delta = Millis(static_cast<std::int64_t>((b >> 4) % 50));
    switch (b % 8) {
      case 0:
      case 1: break;  // no watermark
      case 2:
        w = base;  // same again
        break;
      case 3:
        w = base - delta;  // goes back (a regression unless delta is 0)
        break;
      case 4:
        w = std::int64_t{0};  // a connector that forgot its watermark
        break;
      default: w = base + delta; break;
    }
    EndStep(w);
  }

  void Checkpoint() {
    auto& e = Next();
    auto* c = e.mutable_checkpoint();
    c->set_checkpoint_id(next_checkpoint_);
    if (watermark_.has_value()) c->set_watermark_ns(*watermark_);
    pending_.push_back({next_checkpoint_, watermark_});
    ++next_checkpoint_;
  }

  void Commit(std::uint32_t a, std::uint32_t b) {
    if (pending_.empty()) return;
    const std::size_t i = a % pending_.size();
    const auto cp = pending_[i];
    pending_.erase(pending_.begin() + static_cast<std::ptrdiff_t>(i));
    auto& e = Next();
    e.mutable_committed()->set_checkpoint_id(cp.first);
    // The last committed checkpoint is the one a restore starts from.
    if (!last_committed_.has_value() || cp.first > last_committed_->first) last_committed_ = cp;
    // Which messages are now in the committed output: recomputed by the
    // checker; the model keeps an approximation only to steer Drain().
    RecomputeCommitted();
    if (b % 2 == 1) {
      auto& n = Next();
      n.mutable_commit_notice()->set_checkpoint_id(cp.first);
    }
  }

  void CommitFailed(std::uint32_t a) {
    if (pending_.empty()) return;
    const std::size_t i = a % pending_.size();
    const auto cp = pending_[i];
    pending_.erase(pending_.begin() + static_cast<std::ptrdiff_t>(i));
    auto& e = Next();
    e.mutable_commit_failed()->set_checkpoint_id(cp.first);
  }

  void Ack(std::uint32_t a, std::uint32_t b) {
    if (receipts_.empty()) return;
    auto it = receipts_.begin();
    std::advance(it, a % receipts_.size());
    AckId(it->first, it->second[b % it->second.size()]);
  }
  void AckId(std::uint64_t id, std::uint64_t receipt) {
    auto& e = Next();
    e.mutable_acked()->set_message_id(id);
    e.mutable_acked()->set_receipt(receipt);
  }

  void CrashAndOpen(std::uint32_t a) {
    auto& e = Next();
    e.mutable_crashed()->set_point(a % 2 ? "before-step" : "after-checkpoint");
    Opened();
    // The restored connector resumes from the committed watermark, or (a bug
    // the oracle must catch) from nothing.
    if (last_committed_.has_value() && a % 3 != 0)
      watermark_ = last_committed_->second;
    else
      watermark_.reset();
  }

  void RecomputeCommitted() {
    // Records are committed when their epoch's checkpoint is; a rough replay
    // for steering only (the checker does it properly).
    std::vector<std::uint64_t> open;
    std::map<std::uint64_t, std::vector<std::uint64_t>> epochs;
    committed_.clear();
    for (const TraceEvent& e : trace_) {
      switch (e.kind_case()) {
        case TraceEvent::kEmitted: open.push_back(e.emitted().message_id()); break;
        case TraceEvent::kCheckpoint:
          epochs[e.checkpoint().checkpoint_id()] = open;
          open.clear();
          break;
        case TraceEvent::kCommitted:
          for (auto id : epochs[e.committed().checkpoint_id()]) committed_.insert(id);
          break;
        case TraceEvent::kCrashed:
        case TraceEvent::kOpened:
          open.clear();
          epochs.clear();
          break;
        default: break;
      }
    }
  }

  std::vector<TraceEvent> trace_;
  std::uint64_t incarnation_ = 0;
  std::uint64_t next_id_ = 1;
  std::uint64_t next_receipt_ = 100;
  std::uint64_t next_checkpoint_ = 1;
  std::uint64_t step_ = 0;
  std::optional<std::int64_t> watermark_;                         // the connector's last reported
  std::map<std::uint64_t, std::vector<std::uint64_t>> receipts_;  // by message
  std::set<std::uint64_t> delivered_here_;                        // this incarnation
  std::set<std::uint64_t> committed_;
  // Taken, not yet committed or failed, in this incarnation: id, watermark.
  std::vector<std::pair<std::uint64_t, std::optional<std::int64_t>>> pending_;
  std::optional<std::pair<std::uint64_t, std::optional<std::int64_t>>> last_committed_;
};

// ---------------------------------------------------------------------------
// The brute-force checker: whole trace in memory, each rule from scratch.

struct Counts {
  std::uint64_t ack_before_commit = 0;
  std::uint64_t lost = 0;
  std::uint64_t duplicate_violations = 0;
  std::uint64_t watermark_regression = 0;
  std::uint64_t watermark_regression_echoes = 0;
  std::uint64_t duplicate_records = 0;
};

// Where the record emitted at index i became committed output: the index of
// the Committed event for the checkpoint that closed its epoch, or none.
// Its epoch is closed by the first checkpoint after it, unless a crash or an
// open comes first (the open epoch dies with the process). That checkpoint is
// committed by a later Committed event with its id, unless a commit failure,
// a crash or an open comes first.
std::optional<std::size_t> CommittedAt(const std::vector<TraceEvent>& t, std::size_t i) {
  std::size_t j = i + 1;
  for (; j < t.size(); ++j) {
    const auto k = t[j].kind_case();
    if (k == TraceEvent::kCrashed || k == TraceEvent::kOpened) return std::nullopt;
    if (k == TraceEvent::kCheckpoint) break;
  }
  if (j >= t.size()) return std::nullopt;
  const std::uint64_t cp = t[j].checkpoint().checkpoint_id();
  for (std::size_t c = j + 1; c < t.size(); ++c) {
    const auto k = t[c].kind_case();
    if (k == TraceEvent::kCrashed || k == TraceEvent::kOpened) return std::nullopt;
    if (k == TraceEvent::kCommitFailed && t[c].commit_failed().checkpoint_id() == cp) {
      return std::nullopt;
    }
    if (k == TraceEvent::kCommitted && t[c].committed().checkpoint_id() == cp) return c;
  }
  return std::nullopt;
}

Counts BruteForce(const std::vector<TraceEvent>& t, bool exactly_once) {
  Counts out;
  // Every committed record, by message: the indexes of the commits.
  std::map<std::uint64_t, std::vector<std::size_t>> committed;
  for (std::size_t i = 0; i < t.size(); ++i) {
    if (t[i].kind_case() != TraceEvent::kEmitted) continue;
    if (auto c = CommittedAt(t, i)) committed[t[i].emitted().message_id()].push_back(*c);
  }
  auto committed_before = [&](std::uint64_t id, std::size_t j) {
    auto it = committed.find(id);
    if (it == committed.end()) return false;
    for (std::size_t c : it->second) {
      if (c < j) return true;
    }
    return false;
  };

  // ack-before-commit: an ack of a message with no record in a committed
  // epoch yet.
  for (std::size_t j = 0; j < t.size(); ++j) {
    if (t[j].kind_case() == TraceEvent::kAcked && !committed_before(t[j].acked().message_id(), j)) {
      ++out.ack_before_commit;
    }
  }

  // lost-message: published, and no committed record when the run ended.
  std::size_t end = t.size();
  for (std::size_t j = 0; j < t.size(); ++j) {
    if (t[j].kind_case() == TraceEvent::kRunEnded) end = j;
  }
  for (std::size_t j = 0; j < t.size(); ++j) {
    if (t[j].kind_case() == TraceEvent::kPublished && !committed_before(t[j].published().message_id(), end)) {
      ++out.lost;
    }
  }

  // duplicate-output: more than one record of a message in the committed output.
  for (const auto& [id, commits] : committed) out.duplicate_records += commits.size() - 1;
  if (exactly_once) out.duplicate_violations = out.duplicate_records;

  // watermark-regression: lower than any watermark reported before it in the
  // same incarnation, or than the watermark committed with the checkpoint the
  // incarnation was restored from (read from that checkpoint's own event).
  // A regressed step right after a regressed step of the same incarnation,
  // not lower than it, repeats that regression: an echo, not a violation.
  constexpr std::size_t kNone = ~std::size_t{0};
  std::size_t prev = kNone;  // the last step with a watermark, this incarnation
  bool prev_regressed = false;
  for (std::size_t j = 0; j < t.size(); ++j) {
    if (t[j].kind_case() == TraceEvent::kOpened) prev = kNone;
    if (t[j].kind_case() != TraceEvent::kStepped || !t[j].stepped().has_watermark_ns()) continue;
    const std::int64_t w = t[j].stepped().watermark_ns();
    const std::uint64_t inc = t[j].incarnation();
    bool regressed = false;
    for (std::size_t k = 0; k < j; ++k) {
      if (t[k].incarnation() != inc) continue;
      if (t[k].kind_case() == TraceEvent::kStepped && t[k].stepped().has_watermark_ns() &&
          w < t[k].stepped().watermark_ns()) {
        regressed = true;
      }
      if (t[k].kind_case() == TraceEvent::kOpened && t[k].opened().restored()) {
        for (std::size_t c = 0; c < k; ++c) {
          if (t[c].kind_case() == TraceEvent::kCheckpoint &&
              t[c].checkpoint().checkpoint_id() == t[k].opened().checkpoint_id() &&
              t[c].checkpoint().has_watermark_ns() && w < t[c].checkpoint().watermark_ns()) {
            regressed = true;
          }
        }
      }
    }
    const bool echo = regressed && prev_regressed && prev != kNone && w >= t[prev].stepped().watermark_ns();
    if (echo) {
      ++out.watermark_regression_echoes;
    } else if (regressed) {
      ++out.watermark_regression;
    }
    prev = j;
    prev_regressed = regressed;
  }
  return out;
}

Verdict RunOracle(const std::vector<TraceEvent>& trace, bool exactly_once) {
  v1::Profile p;
  p.set_guarantee(exactly_once ? v1::Profile::EXACTLY_ONCE : v1::Profile::AT_LEAST_ONCE);
  Oracle oracle(p);
  for (const TraceEvent& e : trace) oracle.OnEvent(e);
  return oracle.Finish();
}

std::vector<TraceEvent> Generate(const std::vector<Action>& actions, bool drain) {
  RunModel m;
  m.Start();
  for (const Action& a : actions) m.Apply(a);
  if (drain) m.Drain();
  m.End();
  return m.trace();
}

RC_GTEST_PROP(OracleProperty, AgreesWithBruteForce, ()) {
  const auto actions = *rc::gen::scale(3.0, rc::gen::arbitrary<std::vector<Action>>()).as("actions");
  const bool drain = *rc::gen::arbitrary<bool>().as("drain");
  const bool exactly_once = *rc::gen::arbitrary<bool>().as("exactly_once");
  const std::vector<TraceEvent> trace = Generate(actions, drain);
  const Counts want = BruteForce(trace, exactly_once);
  const Verdict got = RunOracle(trace, exactly_once);

  RC_TAG(want.ack_before_commit > 0, want.lost > 0, want.duplicate_records > 0, want.watermark_regression > 0);
  RC_ASSERT(got.at(Invariant::kAckBeforeCommit).violations == want.ack_before_commit);
  RC_ASSERT(got.at(Invariant::kLostMessage).violations == want.lost);
  RC_ASSERT(got.at(Invariant::kDuplicateOutput).violations == want.duplicate_violations);
  RC_ASSERT(got.at(Invariant::kWatermarkRegression).violations == want.watermark_regression);
  RC_ASSERT(got.at(Invariant::kWatermarkRegression).echoes == want.watermark_regression_echoes);
  RC_ASSERT(got.duplicate_records == want.duplicate_records);
  // The model makes no malformed exchanges.
  RC_ASSERT(got.at(Invariant::kProtocolError).violations == 0u);
  RC_ASSERT(got.events == trace.size());
}

// A fixed trace through the same two checkers, so a reader sees the shape.
TEST(OracleProperty, HandWrittenTraceAgrees) {
  std::vector<Action> actions = {
      {0, 0, 0},  {0, 0, 0}, {2, 0, 0},
      {2, 1, 0},  {4, 2, 5}, {9, 0, 0},              // ack before commit
      {6, 0, 0},  {7, 0, 0}, {4, 0, 3 + (20 << 4)},  // regression
      {10, 1, 0},                                    // crash, restore
      {4, 0, 4},                                     // back to 0: below the restored checkpoint's watermark?
  };
  for (bool eo : {true, false}) {
    const auto trace = Generate(actions, true);
    const Counts want = BruteForce(trace, eo);
    const Verdict got = RunOracle(trace, eo);
    EXPECT_EQ(got.at(Invariant::kAckBeforeCommit).violations, want.ack_before_commit);
    EXPECT_EQ(got.at(Invariant::kLostMessage).violations, want.lost);
    EXPECT_EQ(got.at(Invariant::kDuplicateOutput).violations, want.duplicate_violations);
    EXPECT_EQ(got.at(Invariant::kWatermarkRegression).violations, want.watermark_regression);
    EXPECT_EQ(got.duplicate_records, want.duplicate_records);
    EXPECT_GE(want.ack_before_commit, 1u);
  }
}

}  // namespace
}  // namespace weir
