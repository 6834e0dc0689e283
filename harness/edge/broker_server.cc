#include "harness/edge/broker_server.h"

#include <cstdint>
#include <string>
#include <type_traits>

#include "absl/status/status.h"
#include "absl/strings/str_cat.h"
#include "absl/synchronization/mutex.h"
#include "weir/v1/status_details.pb.h"
#include "weir/v1/broker.grpc.pb.h"

namespace weir {
namespace {

constexpr std::size_t kMaxStrayNames = 1000;

// The status details of a failed call: a whole google.rpc.Status (what gRPC
// carries in "grpc-status-details-bin") with the call's code and message and
// `detail` packed in one Any.
std::string StatusDetails(grpc::StatusCode code, const std::string& message, const google::protobuf::Message& detail) {
  v1::StatusDetails status;
  status.set_code(static_cast<std::int32_t>(code));
  status.set_message(message);
  status.add_details()->PackFrom(detail);
  return status.SerializeAsString();
}

// `partition`: the partition a Read asked for (0 for other methods).
grpc::Status ToGrpc(const CallStatus& status, std::uint32_t partition, grpc::ServerContext& context) {
  context.AddTrailingMetadata("weir-now-ns", std::to_string(status.now));
  if (status.ok()) return grpc::Status::OK;
  if (status.code == CallCode::kResourceExhausted) {
    const std::int64_t ms = (status.retry_after + 999999) / 1000000;
    context.AddTrailingMetadata("retry-after-ms", std::to_string(ms));
    v1::RetryAfter detail;
    detail.set_retry_after_ns(status.retry_after);
    constexpr grpc::StatusCode kCode = grpc::StatusCode::RESOURCE_EXHAUSTED;
    return grpc::Status(kCode, status.message, StatusDetails(kCode, status.message, detail));
  }
  if (status.code == CallCode::kOutOfRange) {
    context.AddTrailingMetadata("weir-first-retained-offset", std::to_string(status.first_retained_offset));
    v1::OffsetOutOfRange detail;
    detail.set_partition(partition);
    detail.set_first_retained_offset(status.first_retained_offset);
    constexpr grpc::StatusCode kCode = grpc::StatusCode::OUT_OF_RANGE;
    return grpc::Status(kCode, status.message, StatusDetails(kCode, status.message, detail));
  }
  return grpc::Status(static_cast<grpc::StatusCode>(status.code), status.message);
}

}  // namespace

struct BrokerServer::Impl {
  v1::Broker::AsyncService service;
  std::unique_ptr<grpc::ServerCompletionQueue> queue;
  std::unique_ptr<grpc::Server> server;
  bool shutting_down = false;
};

// One accepted (or awaited) broker call. Lives from its Request* until its
// answer has been sent; re-arms its method when a call arrives, so exactly
// one call per method is awaited at any time.
class BrokerServer::Call : public QueueTag {
 public:
  explicit Call(BrokerServer& server) : server_(server) {}

  void Proceed(bool ok) override {
    if (state_ == State::kAwaited && ok && !server_.impl_->shutting_down) {
      state_ = State::kAccepted;
      Rearm();
      server_.Handle(*this);
      return;
    }
    // Answer sent, or the server is shutting down: nothing more to do.
    delete this;
  }

  virtual const char* method() const = 0;
  // Runs the call against the broker and sends its answer, unless a crash
  // point is reached (then the caller holds it).
  virtual CallStatus Run(BrokerEndpoint& broker) = 0;
  virtual void Answer(const CallStatus& status) = 0;
  virtual void Refuse(const grpc::Status& status) = 0;

 protected:
  enum class State { kAwaited, kAccepted, kAnswered };
  virtual void Rearm() = 0;

  BrokerServer& server_;
  State state_ = State::kAwaited;
  grpc::ServerContext context_;
};

namespace {

template <typename Request, typename Response>
using RequestFn = void (v1::Broker::AsyncService::*)(grpc::ServerContext*, Request*,
                                                     grpc::ServerAsyncResponseWriter<Response>*, grpc::CompletionQueue*,
                                                     grpc::ServerCompletionQueue*, void*);
template <typename Request, typename Response>
using BrokerFn = CallStatus (BrokerEndpoint::*)(const Request&, Response*);

}  // namespace

template <typename Request, typename Response>
class MethodCall final : public BrokerServer::Call {
 public:
  struct Method {
    const char* name;
    RequestFn<Request, Response> request;
    BrokerFn<Request, Response> run;
  };

  MethodCall(BrokerServer& server, v1::Broker::AsyncService& service, grpc::ServerCompletionQueue* queue,
             const Method& method)
      : Call(server), service_(service), queue_(queue), method_(method), responder_(&context_) {
    (service_.*method_.request)(&context_, &request_, &responder_, queue_, queue_, this);
  }

  const char* method() const override { return method_.name; }
  CallStatus Run(BrokerEndpoint& broker) override { return (broker.*method_.run)(request_, &response_); }
  void Answer(const CallStatus& status) override {
    state_ = State::kAnswered;
    std::uint32_t partition = 0;
    if constexpr (std::is_same_v<Request, v1::ReadRequest>) partition = request_.partition();
    const grpc::Status s = ToGrpc(status, partition, context_);
    if (s.ok()) {
      responder_.Finish(response_, s, this);
    } else {
      responder_.FinishWithError(s, this);
    }
  }
  void Refuse(const grpc::Status& status) override {
    state_ = State::kAnswered;
    responder_.FinishWithError(status, this);
  }

 private:
  void Rearm() override { new MethodCall(server_, service_, queue_, method_); }

  v1::Broker::AsyncService& service_;
  grpc::ServerCompletionQueue* queue_;
  const Method method_;
  Request request_;
  Response response_;
  grpc::ServerAsyncResponseWriter<Response> responder_;
};

absl::StatusOr<std::unique_ptr<BrokerServer>> BrokerServer::Start(const std::string& listen) {
  // Debian builds Abseil without NDEBUG, so every lock gRPC takes also feeds
  // Abseil's deadlock detector: a few per cent of each call in the profile.
  absl::SetMutexDeadlockDetectionMode(absl::OnDeadlockCycle::kIgnore);
  std::unique_ptr<BrokerServer> server(new BrokerServer());
  server->impl_ = std::make_unique<Impl>();
  Impl& impl = *server->impl_;
  grpc::ServerBuilder builder;
  builder.AddChannelArgument(GRPC_ARG_ALLOW_REUSEPORT, 0);
  builder.SetMaxReceiveMessageSize(4 << 20);
  // A connector that floods the broker gets bounded resources: a few streams
  // per connection, and its calls are served one at a time.
  builder.AddChannelArgument(GRPC_ARG_MAX_CONCURRENT_STREAMS, 16);
  int port = 0;
  builder.AddListeningPort(listen, grpc::InsecureServerCredentials(), &port);
  builder.RegisterService(&impl.service);
  impl.queue = builder.AddCompletionQueue();
  impl.server = builder.BuildAndStart();
  if (impl.server == nullptr) {
    return absl::UnavailableError(absl::StrCat("cannot listen on ", listen));
  }
  if (listen.rfind("unix:", 0) == 0) {
    server->address_ = listen;
  } else {
    if (port <= 0) return absl::UnavailableError(absl::StrCat("cannot bind ", listen));
    server->address_ = absl::StrCat(listen.substr(0, listen.rfind(':')), ":", port);
  }
  using Svc = v1::Broker::AsyncService;
  new MethodCall<v1::PullRequest, v1::PullResponse>(*server, impl.service, impl.queue.get(),
                                                    {"Pull", &Svc::RequestPull, &BrokerEndpoint::Pull});
  new MethodCall<v1::AckRequest, v1::AckResponse>(*server, impl.service, impl.queue.get(),
                                                  {"Ack", &Svc::RequestAck, &BrokerEndpoint::Ack});
  new MethodCall<v1::NackRequest, v1::NackResponse>(*server, impl.service, impl.queue.get(),
                                                    {"Nack", &Svc::RequestNack, &BrokerEndpoint::Nack});
  new MethodCall<v1::ExtendLeaseRequest, v1::ExtendLeaseResponse>(
      *server, impl.service, impl.queue.get(), {"ExtendLease", &Svc::RequestExtendLease, &BrokerEndpoint::ExtendLease});
  new MethodCall<v1::ListPartitionsRequest, v1::ListPartitionsResponse>(
      *server, impl.service, impl.queue.get(),
      {"ListPartitions", &Svc::RequestListPartitions, &BrokerEndpoint::ListPartitions});
  new MethodCall<v1::ReadRequest, v1::ReadResponse>(*server, impl.service, impl.queue.get(),
                                                    {"Read", &Svc::RequestRead, &BrokerEndpoint::Read});
  new MethodCall<v1::SaveBookmarksRequest, v1::SaveBookmarksResponse>(
      *server, impl.service, impl.queue.get(),
      {"SaveBookmarks", &Svc::RequestSaveBookmarks, &BrokerEndpoint::SaveBookmarks});
  new MethodCall<v1::LoadBookmarksRequest, v1::LoadBookmarksResponse>(
      *server, impl.service, impl.queue.get(),
      {"LoadBookmarks", &Svc::RequestLoadBookmarks, &BrokerEndpoint::LoadBookmarks});
  return server;
}

BrokerServer::~BrokerServer() {
  if (impl_ == nullptr) return;
  impl_->shutting_down = true;
  if (impl_->server != nullptr) {
    impl_->server->Shutdown(std::chrono::system_clock::now() + std::chrono::milliseconds(500));
  }
  impl_->queue->Shutdown();
  void* tag = nullptr;
  bool ok = false;
  while (impl_->queue->Next(&tag, &ok)) static_cast<QueueTag*>(tag)->Proceed(ok);
}

grpc::CompletionQueue* BrokerServer::queue() { return impl_->queue.get(); }

bool BrokerServer::PollOnce(std::chrono::system_clock::time_point deadline, bool* timed_out) {
  void* tag = nullptr;
  bool ok = false;
  switch (impl_->queue->AsyncNext(&tag, &ok, deadline)) {
    case grpc::CompletionQueue::GOT_EVENT:
      *timed_out = false;
      static_cast<QueueTag*>(tag)->Proceed(ok);
      return true;
    case grpc::CompletionQueue::TIMEOUT: *timed_out = true; return true;
    case grpc::CompletionQueue::SHUTDOWN: break;
  }
  *timed_out = true;
  return false;
}

void BrokerServer::Handle(Call& call) {
  if (window_ == nullptr) {
    if (stray_.size() < kMaxStrayNames) stray_.emplace_back(call.method());
    call.Refuse(grpc::Status(grpc::StatusCode::FAILED_PRECONDITION,
                             absl::StrCat(call.method(), " called outside a connector call")));
    return;
  }
  if (window_->crashed) {
    call.Refuse(
        grpc::Status(grpc::StatusCode::UNAVAILABLE, absl::StrCat(call.method(), " called after a crash point")));
    return;
  }
  const CallStatus status = call.Run(window_->broker);
  if (!window_->broker.CrashRequested()) {
    call.Answer(status);
    return;
  }
  window_->crashed = true;
  held_.push_back(&call);
  if (window_->on_crash) window_->on_crash();
}

void BrokerServer::RefuseQueued() {
  bool timed_out = false;
  while (PollOnce(std::chrono::system_clock::time_point{}, &timed_out) && !timed_out) {
  }
}

void BrokerServer::Serve(Window& window, absl::FunctionRef<bool()> done, std::chrono::milliseconds tick) {
  window_ = &window;
  bool timed_out = false;
  while (!done()) {
    if (!PollOnce(std::chrono::system_clock::now() + tick, &timed_out)) break;
  }
  window_ = nullptr;
  // The connector is dead by now (the crash action killed it): the held
  // answers can go out, nobody reads them.
  for (Call* call : held_) {
    call->Refuse(grpc::Status(grpc::StatusCode::UNAVAILABLE, "the connector crashed"));
  }
  held_.clear();
}

std::vector<std::string> BrokerServer::TakeStrayCalls() {
  std::vector<std::string> out;
  out.swap(stray_);
  return out;
}

}  // namespace weir
