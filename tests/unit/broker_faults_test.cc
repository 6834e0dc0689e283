// Broker-side faults: each kind occurs when its rate is on and never
// when it is off; decisions are a pure function of (seed, kind, position), so
// the same seed repeats them and turning one kind off leaves the others alone;
// a given plan applies exactly its decisions; the token bucket follows
// RFC 2697; duplicates of acked messages stay within the redelivery horizon.
#include <algorithm>
#include <cstdlib>
#include <filesystem>
#include <map>
#include <memory>
#include <set>
#include <string>
#include <vector>

#include <gtest/gtest.h>

#include "harness/broker/queue/queue_model.h"
#include "harness/broker/broker_session.h"
#include "harness/oracle/oracle.h"
#include "harness/runtime/runtime_model.h"
#include "harness/scenario/fault_validation.h"
#include "harness/scenario/text_file.h"
#include "tests/unit/fake_connector.h"
#include "tests/unit/test_support.h"

namespace weir {
namespace {

using testing::FakeConnector;
using testing::SmallScenario;
using testing::TraceRecorder;
using Kind = v1::FaultDecision::FaultCase;

// A broker (model + session) driven directly, as an in-process connector would.
struct Rig {
  Rig(v1::Scenario s, std::uint64_t seed) : scenario(std::move(s)) {
    log.AddObserver(&rec);
    faults = std::make_unique<FaultSource>(scenario.faults(), seed, log);
    Build(seed);
  }
  Rig(v1::Scenario s, v1::FaultPlan plan, std::uint64_t seed) : scenario(std::move(s)) {
    log.AddObserver(&rec);
    faults = std::make_unique<FaultSource>(std::move(plan), seed, log);
    Build(seed);
  }
  void Build(std::uint64_t seed) {
    broker = std::make_unique<QueueModel>(scenario, seed, log, *faults);
    session = std::make_unique<BrokerSession>(*broker, log, *faults);
  }

  // A fixed script: connector call i starts at i seconds and makes exactly one
  // Pull, one Ack (of what it got), one Nack and one ExtendLease (both empty),
  // so every method's call positions are the same whatever the faults do.
  void Script(int steps) {
    for (int i = 1; i <= steps; ++i) {
      session->BeginCall(Seconds(i));
      v1::PullRequest pull;
      pull.set_max_messages(5);
      v1::PullResponse got;
      session->Pull(pull, &got);
      v1::AckRequest ack;
      for (const auto& d : got.deliveries()) ack.add_receipts(d.receipt());
      v1::AckResponse ack_rs;
      session->Ack(ack, &ack_rs);
      v1::NackRequest nack;
      v1::NackResponse nack_rs;
      session->Nack(nack, &nack_rs);
      v1::ExtendLeaseRequest ext;
      v1::ExtendLeaseResponse ext_rs;
      session->ExtendLease(ext, &ext_rs);
      session->EndCall();
    }
  }

  std::vector<v1::FaultDecision> Applied(Kind kind) const {
    std::vector<v1::FaultDecision> out;
    for (const auto& e : rec.Of(v1::TraceEvent::kFaultApplied)) {
      if (e.fault_applied().decision().fault_case() == kind) out.push_back(e.fault_applied().decision());
    }
    return out;
  }
  std::vector<std::string> AppliedText(Kind kind) const {
    std::vector<std::string> out;
    for (const auto& d : Applied(kind)) out.push_back(d.SerializeAsString());
    return out;
  }

  v1::Scenario scenario;
  TraceLog log;
  TraceRecorder rec;
  std::unique_ptr<FaultSource> faults;
  std::unique_ptr<QueueModel> broker;
  std::unique_ptr<BrokerSession> session;
};

// Messages every 200 ms, lease 1.5 s, so a script of 1 s steps keeps a few in
// flight and leases run out between steps.
v1::Scenario Base() {
  v1::Scenario s = SmallScenario(60);
  s.mutable_workload()->set_publish_interval_ms(200);
  s.mutable_broker()->set_lease_ms(1500);
  s.mutable_broker()->set_redelivery_horizon_ms(3000);
  return s;
}

// Every per-position kind at a middling rate (no throttling: it would mask the
// transient draws of the calls it throttles).
void AllOn(v1::FaultConfig* f) {
  f->mutable_latency()->set_rate(0.4);
  f->mutable_latency()->set_distribution(v1::FaultConfig::UNIFORM);
  f->mutable_latency()->set_min_ms(1);
  f->mutable_latency()->set_max_ms(50);
  f->set_visibility_delay_rate(0.3);
  f->set_max_visibility_delay_ms(2500);
  f->set_reorder_rate(0.5);
  f->set_duplicate_rate(0.3);
  f->set_lost_ack_rate(0.2);
  f->set_unavailable_rate(0.1);
  f->set_deadline_exceeded_rate(0.1);
  f->set_broker_restart_rate(0.05);
}

struct KindCase {
  const char* name;
  Kind kind;
  void (*on)(v1::FaultConfig*);
};

const KindCase kKinds[] = {
    {"latency", v1::FaultDecision::kLatencyMs,
     [](v1::FaultConfig* f) {
       f->mutable_latency()->set_rate(0.5);
       f->mutable_latency()->set_distribution(v1::FaultConfig::EXPONENTIAL);
       f->mutable_latency()->set_mean_ms(20);
     }},
    {"visibility", v1::FaultDecision::kVisibilityDelayMs,
     [](v1::FaultConfig* f) {
       f->set_visibility_delay_rate(0.5);
       f->set_max_visibility_delay_ms(3000);
     }},
    {"reorder", v1::FaultDecision::kReorder, [](v1::FaultConfig* f) { f->set_reorder_rate(0.5); }},
    {"duplicate", v1::FaultDecision::kDuplicate, [](v1::FaultConfig* f) { f->set_duplicate_rate(0.5); }},
    {"lost_ack", v1::FaultDecision::kLostAck, [](v1::FaultConfig* f) { f->set_lost_ack_rate(0.3); }},
    {"transient", v1::FaultDecision::kTransient,
     [](v1::FaultConfig* f) {
       f->set_unavailable_rate(0.2);
       f->set_deadline_exceeded_rate(0.2);
     }},
    {"broker_restart", v1::FaultDecision::kBrokerRestart, [](v1::FaultConfig* f) { f->set_broker_restart_rate(0.2); }},
    {"throttle_window", v1::FaultDecision::kThrottleRetryAfterMs,
     [](v1::FaultConfig* f) {
       auto* w = f->add_throttle_windows();
       w->set_start_ms(5000);
       w->set_end_ms(7500);
     }},
};

TEST(BrokerFaults, NothingAppliesWithEveryRateOff) {
  Rig r(Base(), 5);
  r.Script(40);
  EXPECT_TRUE(r.rec.Of(v1::TraceEvent::kFaultApplied).empty());
  EXPECT_TRUE(r.rec.Of(v1::TraceEvent::kBrokerCallFailed).empty());
  EXPECT_EQ(r.rec.Of(v1::TraceEvent::kBrokerCall).size(), 4u * 40u);
}

TEST(BrokerFaults, EachKindOccursWhenOnAndOnlyIt) {
  for (const KindCase& k : kKinds) {
    SCOPED_TRACE(k.name);
    v1::Scenario s = Base();
    k.on(s.mutable_faults());
    Rig r(s, 5);
    r.Script(40);
    EXPECT_FALSE(r.Applied(k.kind).empty());
    for (const auto& e : r.rec.Of(v1::TraceEvent::kFaultApplied)) {
      EXPECT_EQ(e.fault_applied().decision().fault_case(), k.kind);
    }
  }
}

TEST(BrokerFaults, EffectsShowInTheTrace) {
  // Latency: an answer's now is later than the call's start.
  {
    v1::Scenario s = Base();
    kKinds[0].on(s.mutable_faults());
    Rig r(s, 5);
    r.session->BeginCall(Seconds(1));
    bool later = false;
    for (int i = 0; i < 20; ++i) {
      v1::NackRequest rq;
      v1::NackResponse rs;
      const VirtualTime before = r.session->EndCall();
      r.session->BeginCall(before);
      CallStatus st = r.session->Nack(rq, &rs);
      later |= st.now > before;
      EXPECT_EQ(rs.now_ns(), st.now);
    }
    EXPECT_TRUE(later);
  }
  // Transient: failed calls with UNAVAILABLE (14) and DEADLINE_EXCEEDED (4).
  {
    v1::Scenario s = Base();
    kKinds[5].on(s.mutable_faults());
    Rig r(s, 5);
    r.Script(40);
    std::set<int> codes;
    for (const auto& e : r.rec.Of(v1::TraceEvent::kBrokerCallFailed)) {
      codes.insert(e.broker_call_failed().code());
      EXPECT_EQ(e.broker_call_failed().retry_after_ns(), 0);
    }
    EXPECT_EQ(codes, (std::set<int>{4, 14}));
  }
  // Throttle window [5 s, 7.5 s): calls in it fail with RESOURCE_EXHAUSTED until 7.5 s.
  {
    v1::Scenario s = Base();
    kKinds[7].on(s.mutable_faults());
    Rig r(s, 5);
    r.Script(10);
    const auto failed = r.rec.Of(v1::TraceEvent::kBrokerCallFailed);
    ASSERT_EQ(failed.size(), 3u * 4u);  // the calls at 5, 6 and 7 s, four methods each
    for (const auto& e : failed) {
      EXPECT_EQ(e.broker_call_failed().code(), 8);
      EXPECT_EQ(e.t_ns() + e.broker_call_failed().retry_after_ns(), Millis(7500));
    }
  }
  // Reorder: some pull hands out ids out of publish order.
  {
    v1::Scenario s = Base();
    kKinds[2].on(s.mutable_faults());
    Rig r(s, 5);
    r.Script(40);
    bool out_of_order = false;
    std::uint64_t last = 0;
    VirtualTime last_t = -1;
    for (const auto& e : r.rec.Of(v1::TraceEvent::kDelivered)) {
      if (e.t_ns() == last_t && e.delivered().message_id() < last) out_of_order = true;
      last = e.delivered().message_id();
      last_t = e.t_ns();
    }
    EXPECT_TRUE(out_of_order);
  }
  // Visibility: a delayed message is first delivered no earlier than publish + delay.
  {
    v1::Scenario s = Base();
    kKinds[1].on(s.mutable_faults());
    Rig r(s, 5);
    r.Script(40);
    std::map<std::uint64_t, VirtualTime> published, first_delivered;
    for (const auto& e : r.rec.events) {
      if (e.has_published()) published[e.published().message_id()] = e.t_ns();
      if (e.has_delivered()) first_delivered.emplace(e.delivered().message_id(), e.t_ns());
    }
    for (const auto& d : r.Applied(v1::FaultDecision::kVisibilityDelayMs)) {
      ASSERT_TRUE(first_delivered.contains(d.position()));
      EXPECT_GE(first_delivered[d.position()], published[d.position()] + Millis(d.visibility_delay_ms()));
    }
  }
  // Lost ack: the call says OK, nothing is acked, and the message comes back.
  {
    v1::Scenario s = Base();
    kKinds[4].on(s.mutable_faults());
    Rig r(s, 5);
    r.Script(40);
    EXPECT_TRUE(r.rec.Of(v1::TraceEvent::kBrokerCallFailed).empty());
    std::set<std::uint64_t> lost;
    for (const auto& e : r.rec.Of(v1::TraceEvent::kAckIgnored)) {
      if (e.ack_ignored().reason().find("lost") != std::string::npos) lost.insert(e.ack_ignored().message_id());
    }
    ASSERT_FALSE(lost.empty());
    std::set<std::uint64_t> redelivered;
    for (const auto& e : r.rec.Of(v1::TraceEvent::kDelivered)) {
      if (e.delivered().attempt() > 1) redelivered.insert(e.delivered().message_id());
    }
    for (std::uint64_t id : lost) EXPECT_TRUE(redelivered.contains(id)) << "message " << id;
  }
  // Broker restart: every lease held before the pull expires at it.
  {
    v1::Scenario s = Base();
    kKinds[6].on(s.mutable_faults());
    s.mutable_broker()->set_lease_ms(60000);  // only a restart ends a lease here
    Rig r(s, 5);
    r.Script(40);
    std::set<VirtualTime> restarts;
    for (const auto& e : r.rec.events) {
      if (e.has_fault_applied()) restarts.insert(e.t_ns());
    }
    ASSERT_FALSE(restarts.empty());
    for (const auto& e : r.rec.Of(v1::TraceEvent::kLeaseExpired)) {
      EXPECT_TRUE(restarts.contains(e.t_ns())) << "lease expired at " << e.t_ns();
    }
  }
}

TEST(BrokerFaults, DuplicatesOfAckedMessagesStayWithinTheHorizon) {
  v1::Scenario s = Base();
  s.mutable_faults()->set_duplicate_rate(0.6);
  Rig r(s, 9);
  r.Script(60);
  const VirtualDuration horizon = Millis(s.broker().redelivery_horizon_ms());
  std::map<std::uint64_t, VirtualTime> acked;  // first ack of each message
  std::set<std::uint64_t> deliveries_of_acked;
  for (const auto& e : r.rec.events) {
    if (e.has_acked()) acked.emplace(e.acked().message_id(), e.t_ns());
    if (e.has_delivered()) {
      auto it = acked.find(e.delivered().message_id());
      if (it == acked.end()) continue;
      deliveries_of_acked.insert(e.delivered().message_id());
      EXPECT_LE(e.t_ns() - it->second, horizon) << "message " << it->first;
    }
  }
  EXPECT_FALSE(deliveries_of_acked.empty()) << "no duplicate of an acked message was drawn";
  // Memory is bounded: once the horizon has passed, nothing acked is remembered.
  r.broker->AdvanceTo(Seconds(1000));
  EXPECT_EQ(r.broker->remembered_acks(), 0u);
}

TEST(BrokerFaults, SameSeedSameDecisionsOtherSeedOthers) {
  v1::Scenario s = Base();
  AllOn(s.mutable_faults());
  Rig a(s, 21), b(s, 21), c(s, 22);
  a.Script(40);
  b.Script(40);
  c.Script(40);
  ASSERT_EQ(a.rec.events.size(), b.rec.events.size());
  for (std::size_t i = 0; i < a.rec.events.size(); ++i) {
    ASSERT_EQ(a.rec.events[i].SerializeAsString(), b.rec.events[i].SerializeAsString()) << i;
  }
  EXPECT_NE(a.AppliedText(v1::FaultDecision::kLatencyMs), c.AppliedText(v1::FaultDecision::kLatencyMs));
}

TEST(BrokerFaults, TurningOneKindOffLeavesTheOthersDecisionsUnchanged) {
  // Kinds whose decision depends only on (seed, position): reorder and
  // duplicate also need something to reorder or copy, which the others change.
  struct Off {
    Kind kind;
    void (*off)(v1::FaultConfig*);
  };
  const Off offs[] = {
      {v1::FaultDecision::kLatencyMs, [](v1::FaultConfig* f) { f->mutable_latency()->set_rate(0); }},
      {v1::FaultDecision::kVisibilityDelayMs, [](v1::FaultConfig* f) { f->set_visibility_delay_rate(0); }},
      {v1::FaultDecision::kLostAck, [](v1::FaultConfig* f) { f->set_lost_ack_rate(0); }},
      {v1::FaultDecision::kTransient,
       [](v1::FaultConfig* f) {
         f->set_unavailable_rate(0);
         f->set_deadline_exceeded_rate(0);
       }},
      {v1::FaultDecision::kBrokerRestart, [](v1::FaultConfig* f) { f->set_broker_restart_rate(0); }},
  };
  v1::Scenario all = Base();
  AllOn(all.mutable_faults());
  Rig full(all, 33);
  full.Script(40);
  for (const Off& o : offs) ASSERT_FALSE(full.Applied(o.kind).empty()) << "kind " << o.kind;
  for (const Off& o : offs) {
    v1::Scenario s = all;
    o.off(s.mutable_faults());
    Rig r(s, 33);
    r.Script(40);
    EXPECT_TRUE(r.Applied(o.kind).empty());
    for (const Off& other : offs) {
      if (other.kind == o.kind) continue;
      // Transient failures skip the model: with them off, the model sees more
      // acks and pulls, but the decisions at each position stay the same.
      auto with = full.AppliedText(other.kind), without = r.AppliedText(other.kind);
      if (o.kind == v1::FaultDecision::kTransient &&
          (other.kind == v1::FaultDecision::kLostAck || other.kind == v1::FaultDecision::kBrokerRestart)) {
        // Positions failed by a transient never reach the model: compare the rest.
        std::set<std::string> a(with.begin(), with.end());
        for (const auto& d : a) {
          EXPECT_TRUE(std::find(without.begin(), without.end(), d) != without.end());
        }
        continue;
      }
      EXPECT_EQ(with, without) << "turning off kind " << o.kind << " moved kind " << other.kind;
    }
  }
}

TEST(BrokerFaults, PlanModeReplaysADrawnRunExactly) {
  v1::Scenario s = Base();
  AllOn(s.mutable_faults());
  auto* w = s.mutable_faults()->add_throttle_windows();
  w->set_start_ms(10000);
  w->set_end_ms(12500);
  s.mutable_faults()->mutable_token_bucket()->set_rate_per_s(3);
  s.mutable_faults()->mutable_token_bucket()->set_burst(4);
  Rig drawn(s, 44);
  drawn.Script(40);
  ASSERT_FALSE(drawn.faults->plan().decisions().empty());
  ASSERT_FALSE(drawn.Applied(v1::FaultDecision::kThrottleRetryAfterMs).empty());

  v1::Scenario bare = s;
  bare.clear_faults();  // plan mode: neither rates nor bucket nor windows are consulted
  Rig replayed(bare, drawn.faults->plan(), 44);
  replayed.Script(40);
  ASSERT_EQ(drawn.rec.events.size(), replayed.rec.events.size());
  for (std::size_t i = 0; i < drawn.rec.events.size(); ++i) {
    ASSERT_EQ(drawn.rec.events[i].SerializeAsString(), replayed.rec.events[i].SerializeAsString()) << i;
  }
}

TEST(BrokerFaults, PlanModeAppliesExactlyThePlansDecisions) {
  v1::FaultPlan plan;
  auto add = [&](v1::Site site, std::uint64_t pos) {
    auto* d = plan.add_decisions();
    d->set_site(site);
    d->set_position(pos);
    return d;
  };
  add(v1::PULL, 3)->set_broker_restart(true);
  add(v1::ACK, 2)->set_lost_ack(true);
  add(v1::NACK, 4)->set_throttle_retry_after_ms(250);
  add(v1::EXTEND_LEASE, 5)->mutable_transient()->set_code(v1::DEADLINE_EXCEEDED);
  add(v1::PULL, 6)->set_latency_ms(70);
  add(v1::PUBLISH, 9)->set_visibility_delay_ms(1200);
  v1::Scenario s = Base();
  AllOn(s.mutable_faults());  // ignored in plan mode
  Rig r(s, plan, 8);
  r.Script(10);
  const auto applied = r.rec.Of(v1::TraceEvent::kFaultApplied);
  ASSERT_EQ(applied.size(), static_cast<std::size_t>(plan.decisions_size()));
  std::multiset<std::string> want, got;
  for (const auto& d : plan.decisions()) want.insert(d.SerializeAsString());
  for (const auto& e : applied) got.insert(e.fault_applied().decision().SerializeAsString());
  EXPECT_EQ(want, got);
  const auto failed = r.rec.Of(v1::TraceEvent::kBrokerCallFailed);
  ASSERT_EQ(failed.size(), 2u);
  EXPECT_EQ(failed[0].broker_call_failed().method(), "Nack");
  EXPECT_EQ(failed[0].broker_call_failed().retry_after_ns(), Millis(250));
  EXPECT_EQ(failed[1].broker_call_failed().method(), "ExtendLease");
  EXPECT_EQ(failed[1].broker_call_failed().code(), 4);
}

TEST(BrokerFaults, TokenBucketFollowsRfc2697) {
  // Source: RFC 2697 ("A Single Rate Three Color Marker"), §3, with the C
  // bucket only (no E bucket, i.e. EBS = 0) and every call of size B = 1:
  // "The token buckets C and E are initially (at time 0) full, i.e., the token
  // count Tc(0) = CBS … Thereafter, the token count Tc is … incremented by one
  // CIR times per second up to CBS"; a packet of size B arriving at t is green
  // (admitted) "if Tc(t)-B >= 0 … and Tc is decremented by B", else it is red
  // (here: throttled). The reference below is that rule, tick by tick
  // (docs/references.md).
  constexpr double kRate = 10;        // CIR: one token per 100 ms
  constexpr std::int64_t kBurst = 3;  // CBS
  v1::Scenario s = Base();
  s.mutable_faults()->mutable_token_bucket()->set_rate_per_s(kRate);
  s.mutable_faults()->mutable_token_bucket()->set_burst(kBurst);
  Rig r(s, 1);

  // Bursty call times (ms): a burst at 0, a trickle, another burst, a gap.
  std::vector<std::int64_t> times_ms = {0,   0,   1,   2,   3,   50,  99,  100, 101, 150, 199, 200,
                                        200, 250, 300, 305, 310, 800, 800, 800, 800, 801, 900, 1000};
  std::vector<bool> throttled;
  std::vector<VirtualDuration> retry_after;
  for (std::int64_t t : times_ms) {
    r.session->BeginCall(Millis(t));
    v1::PullRequest rq;
    rq.set_max_messages(1);
    v1::PullResponse rs;
    CallStatus st = r.session->Pull(rq, &rs);
    r.session->EndCall();
    throttled.push_back(st.code == CallCode::kResourceExhausted);
    retry_after.push_back(st.retry_after);
  }

  std::int64_t tc = kBurst;      // Tc(0) = CBS
  std::int64_t next_tick = 100;  // ms of the next increment (CIR = 10/s)
  std::vector<bool> want;
  for (std::int64_t t : times_ms) {
    for (; next_tick <= t; next_tick += 100) tc = std::min(kBurst, tc + 1);
    if (tc - 1 >= 0) {
      --tc;
      want.push_back(false);
    } else {
      want.push_back(true);
    }
  }
  EXPECT_EQ(throttled, want);
  EXPECT_NE(std::count(want.begin(), want.end(), true), 0);
  // A throttled call is told to wait until the next token: the next tick.
  for (std::size_t i = 0; i < times_ms.size(); ++i) {
    if (!throttled[i]) continue;
    const std::int64_t next = (times_ms[i] / 100 + 1) * 100;
    EXPECT_EQ(retry_after[i], Millis(next - times_ms[i])) << "call at " << times_ms[i] << " ms";
  }
  // Every bucket throttle is a recorded decision, so a plan replays it.
  EXPECT_EQ(r.Applied(v1::FaultDecision::kThrottleRetryAfterMs).size(),
            static_cast<std::size_t>(std::count(want.begin(), want.end(), true)));
}

// End to end in process: the runtime, a correct connector and every broker
// fault but throttling (the fake connector does not honour retry-after).
TEST(BrokerFaults, CorrectConnectorSurvivesBrokerFaultsEndToEnd) {
  v1::Scenario s = SmallScenario(60);
  s.mutable_broker()->set_lease_ms(400);
  AllOn(s.mutable_faults());
  s.mutable_faults()->mutable_latency()->set_max_ms(20);
  TraceLog log;
  TraceRecorder rec;
  log.AddObserver(&rec);
  Oracle oracle(s.profile());
  log.AddObserver(&oracle);
  FaultSource faults(s.faults(), 3, log);
  QueueModel broker(s, 3, log, faults);
  BrokerSession session(broker, log, faults);
  FakeConnector port;
  RuntimeModel runtime(s, broker, session, port, log, faults);
  RunSummary summary = runtime.Run();
  EXPECT_EQ(summary.end_reason, "all messages committed");
  std::set<Kind> kinds;
  for (const auto& e : rec.Of(v1::TraceEvent::kFaultApplied)) {
    kinds.insert(e.fault_applied().decision().fault_case());
  }
  EXPECT_TRUE(kinds.contains(v1::FaultDecision::kLatencyMs));
  EXPECT_TRUE(kinds.contains(v1::FaultDecision::kTransient));
  EXPECT_TRUE(kinds.contains(v1::FaultDecision::kVisibilityDelayMs));
  Verdict v = oracle.Finish();
  EXPECT_EQ(v.at(Invariant::kAckBeforeCommit).violations, 0u);
  EXPECT_EQ(v.at(Invariant::kLostMessage).violations, 0u);
  EXPECT_EQ(v.at(Invariant::kThrottleViolation).violations, 0u);
}

// The faults block's meaning, checked where the scenario loader calls it.
std::string FaultErrors(const std::string& text) {
  TextFile f("s.scenario");
  v1::Scenario s;
  if (auto st = f.ParseText(text, &s); !st.ok()) return "parse: " + std::string(st.message());
  ValidateFaults(f, s.faults());
  return std::string(f.status().message());
}

TEST(FaultValidation, AcceptsASoundFaultsBlock) {
  EXPECT_EQ(FaultErrors("faults {\n"
                        "  latency { rate: 0.5 distribution: UNIFORM min_ms: 1 max_ms: 9 }\n"
                        "  token_bucket { rate_per_s: 5 burst: 2 }\n"
                        "  throttle_windows { start_ms: 0 end_ms: 10 }\n"
                        "  visibility_delay_rate: 1 max_visibility_delay_ms: 5\n"
                        "  scripted { site: ACK position: 2 lost_ack: true }\n"
                        "}\n"),
            "");
}

TEST(FaultValidation, NamesEachBadFieldWithItsLine) {
  const std::string errors = FaultErrors(
      "faults {\n"
      "  crash_rate: 1.5\n"
      "  latency { rate: 0.5 distribution: UNIFORM min_ms: 9 max_ms: 1 }\n"
      "  throttle_windows { start_ms: 10 end_ms: 10 }\n"
      "  max_visibility_delay_ms: -3\n"
      "  token_bucket { rate_per_s: 0 burst: 0 }\n"
      "  scripted { site: PULL position: 0 reorder: true }\n"
      "}\n");
  EXPECT_NE(errors.find("s.scenario:2:"), std::string::npos) << errors;  // crash_rate
  EXPECT_NE(errors.find("faults.crash_rate is 1.5"), std::string::npos) << errors;
  EXPECT_NE(errors.find("s.scenario:3:"), std::string::npos) << errors;  // min > max
  EXPECT_NE(errors.find("expected min_ms <= max_ms"), std::string::npos) << errors;
  EXPECT_NE(errors.find("s.scenario:4:"), std::string::npos) << errors;  // empty window
  EXPECT_NE(errors.find("expected start_ms < end_ms"), std::string::npos) << errors;
  EXPECT_NE(errors.find("s.scenario:5:"), std::string::npos) << errors;  // negative duration
  EXPECT_NE(errors.find("s.scenario:6:"), std::string::npos) << errors;  // bucket
  EXPECT_NE(errors.find("s.scenario:7:"), std::string::npos) << errors;  // position 0
}

TEST(FaultValidation, BundledScenariosAreClean) {
  // WEIR_SOURCE_DIR (set by weir_add_test): __FILE__ is relative when ccache
  // rewrites paths under its base_dir.
  const char* source = std::getenv("WEIR_SOURCE_DIR");
  const auto dir = source != nullptr ? std::filesystem::path(source) / "fixtures/scenarios"
                                     : std::filesystem::path(__FILE__).parent_path() / "../../fixtures/scenarios";
  int seen = 0;
  for (const auto& entry : std::filesystem::directory_iterator(dir)) {
    if (entry.path().extension() != ".scenario") continue;
    ++seen;
    TextFile f(entry.path().string());
    v1::Scenario s;
    ASSERT_TRUE(f.Parse(&s).ok()) << entry.path();
    ValidateFaults(f, s.faults());
    EXPECT_TRUE(f.status().ok()) << f.status().message();
  }
  EXPECT_GT(seen, 0);
}

}  // namespace
}  // namespace weir
