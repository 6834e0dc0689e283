// BrokerServer over real gRPC (loopback TCP, in this process): a broker call
// runs on the thread that serves the window, never on gRPC's threads; a call
// made between windows is refused and remembered as stray; a crash point runs
// the crash action and holds the call's answer until the window has ended.
#include <atomic>
#include <chrono>
#include <thread>

#include <gtest/gtest.h>

#include "harness/edge/broker_server.h"
#include "weir/v1/broker.grpc.pb.h"

namespace weir {
namespace {

using std::chrono::milliseconds;
using Clock = std::chrono::steady_clock;

class FakeBroker : public BrokerEndpoint {
 public:
  CallStatus Pull(const v1::PullRequest&, v1::PullResponse*) override {
    ++pulls;
    ran_on = std::this_thread::get_id();
    if (crash_on_pull) crash = true;
    CallStatus status;
    status.now = 42;
    return status;
  }
  CallStatus Ack(const v1::AckRequest&, v1::AckResponse*) override { return {}; }
  CallStatus Nack(const v1::NackRequest&, v1::NackResponse*) override { return {}; }
  CallStatus ExtendLease(const v1::ExtendLeaseRequest&, v1::ExtendLeaseResponse*) override { return {}; }
  void OnStrayCall(const std::string&) override {}
  bool CrashRequested() const override { return crash; }

  int pulls = 0;
  bool crash_on_pull = false;
  bool crash = false;
  std::thread::id ran_on;
};

// A connector's broker call, made from its own thread with a 5 s deadline.
class Caller {
 public:
  explicit Caller(const std::string& address)
      : stub_(v1::Broker::NewStub(grpc::CreateChannel(address, grpc::InsecureChannelCredentials()))) {
    thread_ = std::thread([this] {
      grpc::ClientContext context;
      context.set_deadline(std::chrono::system_clock::now() + std::chrono::seconds(5));
      v1::PullResponse response;
      status_ = stub_->Pull(&context, v1::PullRequest(), &response);
      for (const auto& [k, v] : context.GetServerTrailingMetadata()) {
        if (k == "weir-now-ns") now_ = std::string(v.data(), v.size());
      }
      done_.store(true);
    });
  }
  ~Caller() { thread_.join(); }
  bool done() const { return done_.load(); }
  const grpc::Status& status() const { return status_; }  // after done()
  const std::string& now() const { return now_; }

 private:
  std::unique_ptr<v1::Broker::Stub> stub_;
  std::atomic<bool> done_{false};
  grpc::Status status_;
  std::string now_;
  std::thread thread_;
};

std::unique_ptr<BrokerServer> StartServer() {
  auto server = BrokerServer::Start("127.0.0.1:0");
  EXPECT_TRUE(server.ok()) << server.status();
  return server.ok() ? std::move(*server) : nullptr;
}

TEST(BrokerServer, CallInsideAWindowRunsOnTheServingThread) {
  auto server = StartServer();
  ASSERT_NE(server, nullptr);
  FakeBroker broker;
  BrokerServer::Window window{broker, [] {}};
  Caller caller(server->address());
  const auto give_up = Clock::now() + std::chrono::seconds(10);
  server->Serve(
      window, [&] { return caller.done() || Clock::now() > give_up; }, milliseconds(5));
  ASSERT_TRUE(caller.done());
  EXPECT_TRUE(caller.status().ok()) << caller.status().error_message();
  EXPECT_EQ(broker.pulls, 1);
  EXPECT_EQ(broker.ran_on, std::this_thread::get_id());
  EXPECT_EQ(caller.now(), "42");
  EXPECT_FALSE(window.crashed);
  EXPECT_TRUE(server->TakeStrayCalls().empty());
}

TEST(BrokerServer, CallBetweenWindowsIsRefusedAndRememberedAsStray) {
  auto server = StartServer();
  ASSERT_NE(server, nullptr);
  Caller caller(server->address());
  const auto give_up = Clock::now() + std::chrono::seconds(10);
  while (!caller.done() && Clock::now() < give_up) {
    server->RefuseQueued();
    std::this_thread::sleep_for(milliseconds(2));
  }
  ASSERT_TRUE(caller.done());
  EXPECT_EQ(caller.status().error_code(), grpc::StatusCode::FAILED_PRECONDITION);
  EXPECT_EQ(server->TakeStrayCalls(), std::vector<std::string>{"Pull"});
  EXPECT_TRUE(server->TakeStrayCalls().empty());
}

TEST(BrokerServer, CrashPointRunsTheCrashActionAndHoldsTheAnswerUntilTheWindowEnds) {
  auto server = StartServer();
  ASSERT_NE(server, nullptr);
  FakeBroker broker;
  broker.crash_on_pull = true;
  bool crash_action_ran = false;
  BrokerServer::Window window{broker, [&] { crash_action_ran = true; }};
  Caller caller(server->address());
  const auto give_up = Clock::now() + std::chrono::seconds(10);
  bool answer_seen_in_window = false;
  server->Serve(
      window,
      [&] {
        if (!crash_action_ran) return Clock::now() > give_up;
        // The crash action ran: the answer must not reach the caller while the
        // window is open, however long it stays open.
        std::this_thread::sleep_for(milliseconds(200));
        answer_seen_in_window = caller.done();
        return true;
      },
      milliseconds(5));
  EXPECT_TRUE(crash_action_ran);
  EXPECT_TRUE(window.crashed);
  EXPECT_FALSE(answer_seen_in_window);
  EXPECT_EQ(broker.pulls, 1);
  // Released as the window ended; nobody but this test would read it.
  while (!caller.done() && Clock::now() < give_up) {
    server->RefuseQueued();
    std::this_thread::sleep_for(milliseconds(2));
  }
  ASSERT_TRUE(caller.done());
  EXPECT_EQ(caller.status().error_code(), grpc::StatusCode::UNAVAILABLE);
}

}  // namespace
}  // namespace weir
