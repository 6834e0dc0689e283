#include "weir/adapter/serve.h"

#include <fcntl.h>
#include <unistd.h>

#include <cerrno>
#include <charconv>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <exception>
#include <memory>
#include <string>
#include <string_view>

#include <grpcpp/grpcpp.h>

#include "absl/synchronization/mutex.h"

#include "call_queue.h"
#include "grpc_broker_client.h"
#include "weir/v1/connector.grpc.pb.h"

namespace weir::adapter {
namespace {

constexpr int kExitBadEnvironment = 2;

int StartupError(const std::string& what) {
  std::fprintf(stderr, "weir connector: %s\n", what.c_str());
  return kExitBadEnvironment;
}

// Runs one source call, turning an escaped exception or a misuse of the
// Context into a failed call rather than a dead process.
template <typename Body>
grpc::Status Guarded(const char* call, Context& ctx, Body body) {
  try {
    grpc::Status status = body();
    if (!status.ok()) return status;
  } catch (const std::exception& e) {
    return grpc::Status(grpc::StatusCode::INTERNAL, std::string("source threw during ") + call + ": " + e.what());
  } catch (...) {
    return grpc::Status(grpc::StatusCode::INTERNAL, std::string("source threw a non-exception during ") + call);
  }
  if (!ctx.misuse().empty()) return grpc::Status(grpc::StatusCode::FAILED_PRECONDITION, ctx.misuse());
  return grpc::Status::OK;
}

// The Connector service's calls, run against the source. CallQueue runs one
// at a time on the serving thread, so the source sees one call at a time.
class ConnectorCalls {
 public:
  ConnectorCalls(Source& source, BrokerClient& broker) : source_(source), broker_(broker) {}

  grpc::Status Open(const v1::OpenRequest& request, v1::OpenResponse* response) {
    Context ctx(CallKind::kOpen, request.now_ns(), broker_);
    const OpenInfo info = OpenInfoFrom(request);
    return Guarded("Open", ctx, [&] {
      grpc::Status status = source_.Open(info, ctx);
      if (status.ok()) {
        WriteOpen(source_, response);
        told_.Opened(info);
      }
      return status;
    });
  }

  grpc::Status Advance(const v1::AdvanceRequest& request, v1::AdvanceResponse* response) {
    Context ctx(CallKind::kAdvance, request.now_ns(), broker_);
    grpc::Status status = Guarded("Advance", ctx, [&] {
      source_.Advance(ctx);
      return grpc::Status::OK;
    });
    if (status.ok()) ctx.WriteStep(response);
    return status;
  }

  grpc::Status Checkpoint(const v1::CheckpointRequest& request, v1::CheckpointResponse* response) {
    Context ctx(CallKind::kCheckpoint, request.now_ns(), broker_);
    return Guarded("Checkpoint", ctx, [&] {
      RunCheckpoint(source_, request.checkpoint_id(), ctx, response);
      return grpc::Status::OK;
    });
  }

  grpc::Status Committed(const v1::CommittedRequest& request, v1::CommittedResponse*) {
    Context ctx(CallKind::kCommitted, request.now_ns(), broker_);
    return Guarded("Committed", ctx, [&] {
      source_.Committed(request.checkpoint_id(), ctx);
      return grpc::Status::OK;
    });
  }

  grpc::Status Assign(const v1::AssignRequest& request, v1::AssignResponse*) {
    Context ctx(CallKind::kAssign, request.now_ns(), broker_);
    return Guarded("Assign", ctx, [&] { return RunAssign(source_, request, ctx, &told_); });
  }

  grpc::Status Revoke(const v1::RevokeRequest& request, v1::RevokeResponse*) {
    Context ctx(CallKind::kRevoke, request.now_ns(), broker_);
    return Guarded("Revoke", ctx, [&] { return RunRevoke(source_, request, ctx, &told_); });
  }

  grpc::Status Cut(const v1::CutRequest& request, v1::CutResponse* response) {
    Context ctx(CallKind::kCut, request.now_ns(), broker_);
    return Guarded("Cut", ctx, [&] {
      RunCut(source_, request, ctx, &told_, response);
      return grpc::Status::OK;
    });
  }

 private:
  Source& source_;
  BrokerClient& broker_;
  SpansTold told_;  // many readers: the spans the source holds, for Cut
};

template <typename Request, typename Response>
using RequestFn = void (v1::Connector::AsyncService::*)(grpc::ServerContext*, Request*,
                                                        grpc::ServerAsyncResponseWriter<Response>*,
                                                        grpc::CompletionQueue*, grpc::ServerCompletionQueue*, void*);
template <typename Request, typename Response>
using HandlerFn = grpc::Status (ConnectorCalls::*)(const Request&, Response*);

// One connector call of one method, from the moment it is awaited until its
// answer has been sent. When it arrives, the next call of the method is
// awaited at once and this one goes to the CallQueue to run.
template <typename Request, typename Response>
class MethodCall final : public internal::QueueTag, public internal::ArrivedCall {
 public:
  struct Method {
    RequestFn<Request, Response> request;
    HandlerFn<Request, Response> handle;
  };
  struct Shared {
    v1::Connector::AsyncService& service;
    grpc::ServerCompletionQueue* queue;
    internal::CallQueue& calls;
    ConnectorCalls& handlers;
  };

  MethodCall(const Shared& shared, const Method& method) : shared_(shared), method_(method), responder_(&context_) {
    (shared_.service.*method_.request)(&context_, &request_, &responder_, shared_.queue, shared_.queue, this);
  }

  void Proceed(bool ok) override {
    if (!answered_ && ok) {
      new MethodCall(shared_, method_);
      shared_.calls.Arrived(this);
      return;
    }
    delete this;  // answer sent, or the server is shutting down
  }

  void Run() override {
    const grpc::Status status = (shared_.handlers.*method_.handle)(request_, &response_);
    answered_ = true;
    if (status.ok()) {
      responder_.Finish(response_, status, this);
    } else {
      responder_.FinishWithError(status, this);
    }
  }

 private:
  const Shared shared_;
  const Method method_;
  bool answered_ = false;
  grpc::ServerContext context_;
  Request request_;
  Response response_;
  grpc::ServerAsyncResponseWriter<Response> responder_;
};

// The value of a required environment variable, or nullptr (after *error is set).
const char* RequiredEnv(const char* name, std::string* error) {
  const char* value = std::getenv(name);
  if (value == nullptr || *value == '\0') {
    *error = std::string(name) +
             " is not set; this program is a weir connector and expects to be started by weir "
             "(see proto/weir/v1/connector.proto for the start-up handshake)";
    return nullptr;
  }
  return value;
}

bool ParseReadyFd(std::string_view text, int* fd, std::string* error) {
  auto [ptr, ec] = std::from_chars(text.data(), text.data() + text.size(), *fd);
  if (ec != std::errc() || ptr != text.data() + text.size() || *fd < 0) {
    *error = "WEIR_READY_FD is \"" + std::string(text) + "\", expected a file descriptor number";
    return false;
  }
  if (::fcntl(*fd, F_GETFD) == -1) {
    *error = "WEIR_READY_FD " + std::string(text) + " is not an open file descriptor (" + std::strerror(errno) + ")";
    return false;
  }
  return true;
}

bool IsUnixAddress(std::string_view address) {
  return address.starts_with("unix:") || address.starts_with("unix-abstract:");
}

// "host:port" with the port the OS picked; unix addresses as given.
std::string ListenedAddress(std::string_view requested, int selected_port) {
  if (IsUnixAddress(requested)) return std::string(requested);
  const std::size_t colon = requested.rfind(':');
  std::string_view host = colon == std::string_view::npos ? requested : requested.substr(0, colon);
  return std::string(host) + ":" + std::to_string(selected_port);
}

bool WriteAll(int fd, const std::string& text, std::string* error) {
  std::size_t done = 0;
  while (done < text.size()) {
    const ssize_t n = ::write(fd, text.data() + done, text.size() - done);
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) {
      *error =
          "cannot write the listen address to WEIR_READY_FD " + std::to_string(fd) + " (" + std::strerror(errno) + ")";
      return false;
    }
    done += static_cast<std::size_t>(n);
  }
  return true;
}

}  // namespace

int Serve(Source& source) {
  std::string error;
  const char* broker_address = RequiredEnv("WEIR_BROKER_ADDRESS", &error);
  if (broker_address == nullptr) return StartupError(error);
  const char* listen_address = RequiredEnv("WEIR_LISTEN_ADDRESS", &error);
  if (listen_address == nullptr) return StartupError(error);
  const char* ready_fd_text = RequiredEnv("WEIR_READY_FD", &error);
  if (ready_fd_text == nullptr) return StartupError(error);
  int ready_fd = -1;
  if (!ParseReadyFd(ready_fd_text, &ready_fd, &error)) return StartupError(error);

  // Debian builds Abseil without NDEBUG, so every lock gRPC takes would also
  // feed Abseil's deadlock detector: a few per cent of each call.
  absl::SetMutexDeadlockDetectionMode(absl::OnDeadlockCycle::kIgnore);
  v1::Connector::AsyncService service;
  grpc::ServerBuilder builder;
  int selected_port = 0;
  builder.AddListeningPort(listen_address, grpc::InsecureServerCredentials(), &selected_port);
  // Without this a second server could silently share the port.
  builder.AddChannelArgument(GRPC_ARG_ALLOW_REUSEPORT, 0);
  builder.SetMaxReceiveMessageSize(-1);
  builder.SetMaxSendMessageSize(-1);
  builder.RegisterService(&service);
  std::unique_ptr<grpc::ServerCompletionQueue> queue = builder.AddCompletionQueue();
  std::unique_ptr<grpc::Server> server = builder.BuildAndStart();
  if (server == nullptr || selected_port == 0) {
    return StartupError(std::string("cannot listen on WEIR_LISTEN_ADDRESS \"") + listen_address + "\"");
  }

  // Everything from here on runs on this thread, from one queue; the calls
  // are awaited before the address is announced.
  internal::CallQueue calls(queue.get());
  internal::GrpcBrokerClient broker(broker_address, std::chrono::seconds(kBrokerCallWallTimeoutSeconds), calls);
  ConnectorCalls handlers(source, broker);
  using Svc = v1::Connector::AsyncService;
  new MethodCall<v1::OpenRequest, v1::OpenResponse>({service, queue.get(), calls, handlers},
                                                    {&Svc::RequestOpen, &ConnectorCalls::Open});
  new MethodCall<v1::AdvanceRequest, v1::AdvanceResponse>({service, queue.get(), calls, handlers},
                                                          {&Svc::RequestAdvance, &ConnectorCalls::Advance});
  new MethodCall<v1::CheckpointRequest, v1::CheckpointResponse>({service, queue.get(), calls, handlers},
                                                                {&Svc::RequestCheckpoint, &ConnectorCalls::Checkpoint});
  new MethodCall<v1::CommittedRequest, v1::CommittedResponse>({service, queue.get(), calls, handlers},
                                                              {&Svc::RequestCommitted, &ConnectorCalls::Committed});
  new MethodCall<v1::AssignRequest, v1::AssignResponse>({service, queue.get(), calls, handlers},
                                                        {&Svc::RequestAssign, &ConnectorCalls::Assign});
  new MethodCall<v1::RevokeRequest, v1::RevokeResponse>({service, queue.get(), calls, handlers},
                                                        {&Svc::RequestRevoke, &ConnectorCalls::Revoke});
  new MethodCall<v1::CutRequest, v1::CutResponse>({service, queue.get(), calls, handlers},
                                                  {&Svc::RequestCut, &ConnectorCalls::Cut});

  if (!WriteAll(ready_fd, ListenedAddress(listen_address, selected_port) + "\n", &error)) {
    // gRPC requires the awaited calls back before the queue goes.
    server->Shutdown(std::chrono::system_clock::now() + std::chrono::seconds(1));
    queue->Shutdown();
    calls.Run();
    return StartupError(error);
  }
  ::close(ready_fd);

  // Until weir kills the process.
  calls.Run();
  return 0;
}

}  // namespace weir::adapter
