// An in-process ConnectorPort for tests: a simple connector that calls the
// broker endpoint directly. Correct by default; `ack_on_pull` makes it ack each
// message as soon as it is pulled. Start() forgets everything, as a new process
// would. After each broker call it honours broker.CrashRequested() (the crash
// point contract of connector_port.h) by abandoning the call with kCrashed.
#pragma once

#include <map>
#include <set>
#include <string>
#include <vector>

#include "harness/runtime/connector_port.h"

namespace weir::testing {

class FakeConnector : public ConnectorPort {
 public:
  bool ack_on_pull = false;
  bool fail_restore = false;
  // Every step asks to be called again at once and does nothing (a livelock).
  bool livelock = false;
  // Nonzero: the process "dies on its own" (kExited) in the Advance of this step.
  std::uint64_t exit_on_step = 0;
  std::vector<std::string> calls;  // "Start", "Open", "Advance", …

  ConnectorFailure Start(std::uint64_t) override {
    calls.push_back("Start");
    seen_.clear();
    open_.clear();
    epochs_.clear();
    watermark_ = 0;
    return {};
  }
  ConnectorFailure Open(const v1::OpenRequest& rq, v1::OpenResponse*, BrokerEndpoint&) override {
    calls.push_back("Open");
    if (rq.restore() && fail_restore) {
      return ConnectorFailure{ConnectorFailure::Kind::kCallFailed, "corrupt checkpoint", "", ""};
    }
    return {};
  }
  ConnectorFailure Advance(const v1::AdvanceRequest& rq, v1::AdvanceResponse* rs, BrokerEndpoint& broker) override {
    calls.push_back("Advance");
    if (exit_on_step != 0 && rq.step() == exit_on_step) {
      return ConnectorFailure{ConnectorFailure::Kind::kExited, "died during Advance", "signal 11 (SIGSEGV)", ""};
    }
    if (livelock) {
      rs->set_resume_at_ns(rq.now_ns());
      return {};
    }
    v1::PullRequest pull;
    pull.set_max_messages(10);
    v1::PullResponse got;
    CallStatus st = broker.Pull(pull, &got);
    if (broker.CrashRequested()) return Crashed("Advance");
    if (!st.ok()) {
      rs->set_resume_at_ns(st.now + Millis(100));
      return {};
    }
    for (const auto& d : got.deliveries()) {
      if (ack_on_pull) {
        v1::AckRequest ack;
        ack.add_receipts(d.receipt());
        v1::AckResponse ignored;
        broker.Ack(ack, &ignored);
        if (broker.CrashRequested()) return Crashed("Advance");
      } else {
        open_.push_back(d.receipt());
      }
      if (seen_.insert(d.message_id()).second) {
        auto* r = rs->add_records();
        r->set_message_id(d.message_id());
        r->set_event_time_ns(d.event_time_ns());
        watermark_ = std::max(watermark_, d.event_time_ns());
      }
    }
    rs->set_watermark_ns(watermark_);
    rs->set_resume_at_ns(got.deliveries_size() > 0 ? got.now_ns() : got.now_ns() + Millis(100));
    (void)rq;
    return {};
  }
  ConnectorFailure Checkpoint(const v1::CheckpointRequest& rq, v1::CheckpointResponse* rs, BrokerEndpoint&) override {
    calls.push_back("Checkpoint");
    epochs_[rq.checkpoint_id()] = std::move(open_);
    open_.clear();
    rs->set_state("state-" + std::to_string(rq.checkpoint_id()));
    return {};
  }
  ConnectorFailure Committed(const v1::CommittedRequest& rq, v1::CommittedResponse*, BrokerEndpoint& broker) override {
    calls.push_back("Committed");
    // One ack call per epoch (at most ack_batch receipts each), so a notice
    // covering several epochs makes several ack calls.
    for (auto it = epochs_.begin(); it != epochs_.end() && it->first <= rq.checkpoint_id();) {
      std::vector<std::uint64_t> receipts = std::move(it->second);
      it = epochs_.erase(it);
      for (std::size_t i = 0; i < receipts.size(); i += ack_batch) {
        v1::AckRequest ack;
        for (std::size_t j = i; j < receipts.size() && j < i + ack_batch; ++j) {
          ack.add_receipts(receipts[j]);
        }
        v1::AckResponse ignored;
        broker.Ack(ack, &ignored);
        if (broker.CrashRequested()) return Crashed("Committed");
      }
    }
    return {};
  }
  void Kill() override { calls.push_back("Kill"); }

  // Receipts per ack call in Committed.
  std::size_t ack_batch = 2;

 private:
  ConnectorFailure Crashed(const char* call) {
    calls.push_back(std::string("Crashed in ") + call);
    return ConnectorFailure{ConnectorFailure::Kind::kCrashed, std::string("killed during ") + call, "", ""};
  }

  std::set<std::uint64_t> seen_;
  std::vector<std::uint64_t> open_;
  std::map<std::uint64_t, std::vector<std::uint64_t>> epochs_;
  std::int64_t watermark_ = 0;
};

}  // namespace weir::testing
