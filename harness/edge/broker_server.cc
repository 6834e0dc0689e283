#include "harness/edge/broker_server.h"

#include "absl/status/status.h"
#include "absl/synchronization/mutex.h"
#include "absl/strings/str_cat.h"
#include "weir/v1/broker.grpc.pb.h"

namespace weir {
namespace {

grpc::Status ToGrpc(const CallStatus& status, grpc::ServerContext* context) {
  context->AddTrailingMetadata("weir-now-ns", std::to_string(status.now));
  if (status.ok()) return grpc::Status::OK;
  if (status.code == CallCode::kResourceExhausted) {
    const std::int64_t ms = (status.retry_after + 999999) / 1000000;
    context->AddTrailingMetadata("retry-after-ms", std::to_string(ms));
    v1::RetryAfter detail;
    detail.set_retry_after_ns(status.retry_after);
    return grpc::Status(grpc::StatusCode::RESOURCE_EXHAUSTED, status.message,
                        detail.SerializeAsString());
  }
  return grpc::Status(static_cast<grpc::StatusCode>(status.code), status.message);
}

grpc::Status Refused(const char* method) {
  return grpc::Status(grpc::StatusCode::FAILED_PRECONDITION,
                      absl::StrCat(method, " called outside a connector call"));
}

}  // namespace

class BrokerServer::Service final : public v1::Broker::Service {
 public:
  Service(CallRelay& relay, std::chrono::milliseconds bound) : relay_(relay), bound_(bound) {}

  grpc::Status Pull(grpc::ServerContext* context, const v1::PullRequest* request,
                    v1::PullResponse* response) override {
    CallStatus status;
    if (!relay_.Submit("Pull", [&](BrokerEndpoint& b) { status = b.Pull(*request, response); },
                       bound_)) {
      return Refused("Pull");
    }
    return ToGrpc(status, context);
  }
  grpc::Status Ack(grpc::ServerContext* context, const v1::AckRequest* request,
                   v1::AckResponse* response) override {
    CallStatus status;
    if (!relay_.Submit("Ack", [&](BrokerEndpoint& b) { status = b.Ack(*request, response); },
                       bound_)) {
      return Refused("Ack");
    }
    return ToGrpc(status, context);
  }
  grpc::Status Nack(grpc::ServerContext* context, const v1::NackRequest* request,
                    v1::NackResponse* response) override {
    CallStatus status;
    if (!relay_.Submit("Nack", [&](BrokerEndpoint& b) { status = b.Nack(*request, response); },
                       bound_)) {
      return Refused("Nack");
    }
    return ToGrpc(status, context);
  }
  grpc::Status ExtendLease(grpc::ServerContext* context, const v1::ExtendLeaseRequest* request,
                           v1::ExtendLeaseResponse* response) override {
    CallStatus status;
    if (!relay_.Submit("ExtendLease",
                       [&](BrokerEndpoint& b) { status = b.ExtendLease(*request, response); },
                       bound_)) {
      return Refused("ExtendLease");
    }
    return ToGrpc(status, context);
  }

 private:
  CallRelay& relay_;
  const std::chrono::milliseconds bound_;
};

absl::StatusOr<std::unique_ptr<BrokerServer>> BrokerServer::Start(
    const std::string& listen, CallRelay& relay, std::chrono::milliseconds call_bound) {
  // Debian builds Abseil without NDEBUG, so every lock gRPC takes also feeds
  // Abseil's deadlock detector: a few per cent of each call in the profile.
  absl::SetMutexDeadlockDetectionMode(absl::OnDeadlockCycle::kIgnore);
  std::unique_ptr<BrokerServer> server(new BrokerServer());
  server->service_ = std::make_unique<Service>(relay, call_bound);
  grpc::ServerBuilder builder;
  builder.AddChannelArgument(GRPC_ARG_ALLOW_REUSEPORT, 0);
  builder.SetMaxReceiveMessageSize(4 << 20);
  // A connector that floods the broker gets bounded resources: a few streams
  // per connection and a fixed pool of server threads, each running one call
  // through the relay; calls beyond it are refused by gRPC (RESOURCE_EXHAUSTED).
  builder.AddChannelArgument(GRPC_ARG_MAX_CONCURRENT_STREAMS, 16);
  grpc::ResourceQuota quota("weir-broker");
  quota.SetMaxThreads(kMaxServerThreads);
  builder.SetResourceQuota(quota);
  int port = 0;
  builder.AddListeningPort(listen, grpc::InsecureServerCredentials(), &port);
  builder.RegisterService(server->service_.get());
  server->server_ = builder.BuildAndStart();
  if (server->server_ == nullptr) {
    return absl::UnavailableError(absl::StrCat("cannot listen on ", listen));
  }
  if (listen.rfind("unix:", 0) == 0) {
    server->address_ = listen;
  } else {
    if (port <= 0) return absl::UnavailableError(absl::StrCat("cannot bind ", listen));
    server->address_ = absl::StrCat(listen.substr(0, listen.rfind(':')), ":", port);
  }
  return server;
}

BrokerServer::~BrokerServer() {
  if (server_ != nullptr) {
    server_->Shutdown(std::chrono::system_clock::now() + std::chrono::milliseconds(500));
  }
}

}  // namespace weir
