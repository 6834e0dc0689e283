// CallRelay: broker calls run on the submitting (gRPC) thread only inside a
// window, one at a time; outside a window they are refused and remembered;
// a crash request holds the answer back until the window closes.
#include <atomic>
#include <chrono>
#include <thread>

#include <gtest/gtest.h>

#include "harness/edge/call_relay.h"

namespace weir {
namespace {

using std::chrono::milliseconds;

class FakeBroker : public BrokerEndpoint {
 public:
  CallStatus Pull(const v1::PullRequest&, v1::PullResponse*) override {
    ++pulls;
    if (crash_after_pulls > 0 && pulls >= crash_after_pulls) crash = true;
    return {};
  }
  CallStatus Ack(const v1::AckRequest&, v1::AckResponse*) override { return {}; }
  CallStatus Nack(const v1::NackRequest&, v1::NackResponse*) override { return {}; }
  CallStatus ExtendLease(const v1::ExtendLeaseRequest&, v1::ExtendLeaseResponse*) override {
    return {};
  }
  void OnStrayCall(const std::string&) override {}
  bool CrashRequested() const override { return crash; }

  int pulls = 0;
  int crash_after_pulls = 0;
  bool crash = false;
};

bool SubmitPull(CallRelay& relay) {
  return relay.Submit("Pull", [](BrokerEndpoint& b) {
    v1::PullResponse response;
    (void)b.Pull(v1::PullRequest(), &response);
  }, milliseconds(5000));
}

TEST(CallRelay, CallOutsideAWindowIsRefusedAndRememberedAsStray) {
  CallRelay relay;
  EXPECT_FALSE(SubmitPull(relay));
  EXPECT_EQ(relay.TakeStrayCalls(), std::vector<std::string>{"Pull"});
  EXPECT_TRUE(relay.TakeStrayCalls().empty());
}

TEST(CallRelay, CallInsideAWindowRunsOnTheSubmittingThread) {
  CallRelay relay;
  FakeBroker broker;
  relay.Open(broker, [] {});
  std::thread::id ran_on;
  bool ok = false;
  std::thread grpc_thread([&] {
    ok = relay.Submit("Pull", [&](BrokerEndpoint&) { ran_on = std::this_thread::get_id(); },
                      milliseconds(5000));
    EXPECT_EQ(ran_on, std::this_thread::get_id());
  });
  grpc_thread.join();
  EXPECT_TRUE(ok);
  EXPECT_FALSE(relay.Close());
  EXPECT_FALSE(SubmitPull(relay));  // closed again
}

TEST(CallRelay, CrashRequestRunsTheCrashActionAndHoldsTheAnswerUntilClose) {
  CallRelay relay;
  FakeBroker broker;
  broker.crash_after_pulls = 2;
  std::atomic<int> crash_actions{0};
  relay.Open(broker, [&] { ++crash_actions; });
  EXPECT_TRUE(SubmitPull(relay));
  std::atomic<bool> returned{false};
  bool answered = true;
  std::thread grpc_thread([&] {
    answered = SubmitPull(relay);
    returned = true;
  });
  while (!relay.crash_requested()) std::this_thread::sleep_for(milliseconds(1));
  EXPECT_EQ(crash_actions.load(), 1);
  std::this_thread::sleep_for(milliseconds(50));
  EXPECT_FALSE(returned.load()) << "the crashing call's answer must wait for Close()";
  EXPECT_FALSE(SubmitPull(relay)) << "calls after a crash request are refused";
  EXPECT_EQ(broker.pulls, 2);
  EXPECT_TRUE(relay.Close());
  grpc_thread.join();
  EXPECT_FALSE(answered);
  EXPECT_TRUE(relay.TakeStrayCalls().empty());
}

}  // namespace
}  // namespace weir
