// BrokerServer over real gRPC (loopback TCP, in this process): a broker call
// runs on the thread that serves the window, never on gRPC's threads; a call
// made between windows is refused and remembered as stray; a crash point runs
// the crash action and holds the call's answer until the window has ended; a
// throttled or out-of-range answer carries its status details the way every
// gRPC implementation reads them.
#include <atomic>
#include <chrono>
#include <functional>
#include <map>
#include <string>
#include <thread>

#include <gtest/gtest.h>

#include "weir/v1/status_details.pb.h"
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

// Pull is throttled, Read below offset 77 is out of range, Ack is unavailable.
class FailingBroker : public BrokerEndpoint {
 public:
  CallStatus Pull(const v1::PullRequest&, v1::PullResponse*) override {
    CallStatus status;
    status.code = CallCode::kResourceExhausted;
    status.message = "throttled: 4 calls/s";
    status.retry_after = 249'000'001;
    status.now = 42;
    return status;
  }
  CallStatus Ack(const v1::AckRequest&, v1::AckResponse*) override {
    CallStatus status;
    status.code = CallCode::kUnavailable;
    status.message = "partition leader moving";
    status.now = 43;
    return status;
  }
  CallStatus Nack(const v1::NackRequest&, v1::NackResponse*) override { return {}; }
  CallStatus ExtendLease(const v1::ExtendLeaseRequest&, v1::ExtendLeaseResponse*) override { return {}; }
  CallStatus Read(const v1::ReadRequest&, v1::ReadResponse*) override {
    CallStatus status;
    status.code = CallCode::kOutOfRange;
    status.message = "first retained offset 77";
    status.first_retained_offset = 77;
    status.now = 44;
    return status;
  }
  void OnStrayCall(const std::string&) override {}
};

struct Answer {
  grpc::Status status;
  std::multimap<std::string, std::string> trailers;
};

// One broker call, made from its own thread with a 5 s deadline and served
// in a window of `broker`.
Answer CallInAWindow(BrokerServer& server, BrokerEndpoint& broker,
                     const std::function<grpc::Status(v1::Broker::Stub&, grpc::ClientContext*)>& call) {
  auto stub = v1::Broker::NewStub(grpc::CreateChannel(server.address(), grpc::InsecureChannelCredentials()));
  Answer answer;
  std::atomic<bool> done{false};
  std::thread caller([&] {
    grpc::ClientContext context;
    context.set_deadline(std::chrono::system_clock::now() + std::chrono::seconds(5));
    answer.status = call(*stub, &context);
    for (const auto& [k, v] : context.GetServerTrailingMetadata()) {
      answer.trailers.emplace(std::string(k.data(), k.size()), std::string(v.data(), v.size()));
    }
    done.store(true);
  });
  BrokerServer::Window window{broker, [] {}};
  const auto give_up = Clock::now() + std::chrono::seconds(10);
  server.Serve(
      window, [&] { return done.load() || Clock::now() > give_up; }, milliseconds(5));
  caller.join();
  return answer;
}

std::string Trailer(const Answer& answer, const std::string& key) {
  auto it = answer.trailers.find(key);
  return it == answer.trailers.end() ? "(none)" : it->second;
}

// gRPC's rich error model (docs/references.md): the "grpc-status-details-bin"
// trailer holds a whole google.rpc.Status (code 1, message 2, details 3:
// repeated google.protobuf.Any), which gRPC for C++ hands over as
// error_details(); Any::PackFrom names the type "type.googleapis.com/" and
// the message's full name.
v1::StatusDetails Details(const Answer& answer) {
  EXPECT_EQ(Trailer(answer, "grpc-status-details-bin"), answer.status.error_details());
  v1::StatusDetails details;
  EXPECT_TRUE(details.ParseFromString(answer.status.error_details()));
  EXPECT_EQ(details.code(), answer.status.error_code());
  EXPECT_EQ(details.message(), answer.status.error_message());
  EXPECT_EQ(details.details_size(), 1);
  return details;
}

TEST(BrokerServer, AThrottledAnswerCarriesARetryAfterInAWholeStatus) {
  auto server = StartServer();
  ASSERT_NE(server, nullptr);
  FailingBroker broker;
  const Answer answer = CallInAWindow(*server, broker, [](v1::Broker::Stub& stub, grpc::ClientContext* context) {
    v1::PullResponse response;
    return stub.Pull(context, v1::PullRequest(), &response);
  });
  EXPECT_EQ(answer.status.error_code(), grpc::StatusCode::RESOURCE_EXHAUSTED);
  EXPECT_EQ(answer.status.error_message(), "throttled: 4 calls/s");
  EXPECT_EQ(Trailer(answer, "weir-now-ns"), "42");
  EXPECT_EQ(Trailer(answer, "retry-after-ms"), "250") << "rounded up";
  const v1::StatusDetails details = Details(answer);
  ASSERT_EQ(details.details_size(), 1);
  EXPECT_EQ(details.details(0).type_url(), "type.googleapis.com/weir.v1.RetryAfter");
  v1::RetryAfter retry_after;
  ASSERT_TRUE(details.details(0).UnpackTo(&retry_after));
  EXPECT_EQ(retry_after.retry_after_ns(), 249'000'001);
}

TEST(BrokerServer, AnOutOfRangeReadCarriesItsFirstRetainedOffsetInAWholeStatus) {
  auto server = StartServer();
  ASSERT_NE(server, nullptr);
  FailingBroker broker;
  const Answer answer = CallInAWindow(*server, broker, [](v1::Broker::Stub& stub, grpc::ClientContext* context) {
    v1::ReadRequest request;
    request.set_partition(3);
    request.set_offset(12);
    v1::ReadResponse response;
    return stub.Read(context, request, &response);
  });
  EXPECT_EQ(answer.status.error_code(), grpc::StatusCode::OUT_OF_RANGE);
  EXPECT_EQ(answer.status.error_message(), "first retained offset 77");
  EXPECT_EQ(Trailer(answer, "weir-now-ns"), "44");
  EXPECT_EQ(Trailer(answer, "weir-first-retained-offset"), "77");
  const v1::StatusDetails details = Details(answer);
  ASSERT_EQ(details.details_size(), 1);
  EXPECT_EQ(details.details(0).type_url(), "type.googleapis.com/weir.v1.OffsetOutOfRange");
  v1::OffsetOutOfRange out_of_range;
  ASSERT_TRUE(details.details(0).UnpackTo(&out_of_range));
  EXPECT_EQ(out_of_range.partition(), 3u);
  EXPECT_EQ(out_of_range.first_retained_offset(), 77u);
}

TEST(BrokerServer, OtherFailuresCarryNoStatusDetails) {
  auto server = StartServer();
  ASSERT_NE(server, nullptr);
  FailingBroker broker;
  const Answer answer = CallInAWindow(*server, broker, [](v1::Broker::Stub& stub, grpc::ClientContext* context) {
    v1::AckResponse response;
    return stub.Ack(context, v1::AckRequest(), &response);
  });
  EXPECT_EQ(answer.status.error_code(), grpc::StatusCode::UNAVAILABLE);
  EXPECT_EQ(Trailer(answer, "weir-now-ns"), "43");
  EXPECT_TRUE(answer.status.error_details().empty());
  EXPECT_EQ(Trailer(answer, "grpc-status-details-bin"), "(none)");
}

}  // namespace
}  // namespace weir
