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
#include <mutex>
#include <string>
#include <string_view>

#include <grpcpp/grpcpp.h>

#include "absl/synchronization/mutex.h"

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
    return grpc::Status(grpc::StatusCode::INTERNAL,
                        std::string("source threw during ") + call + ": " + e.what());
  } catch (...) {
    return grpc::Status(grpc::StatusCode::INTERNAL,
                        std::string("source threw a non-exception during ") + call);
  }
  if (!ctx.misuse().empty()) return grpc::Status(grpc::StatusCode::FAILED_PRECONDITION, ctx.misuse());
  return grpc::Status::OK;
}

// The Connector service. gRPC's sync server may run handlers on several
// threads; mu_ makes the source see one call at a time.
class ConnectorService final : public v1::Connector::Service {
 public:
  ConnectorService(Source& source, BrokerClient& broker) : source_(source), broker_(broker) {}

  grpc::Status Open(grpc::ServerContext*, const v1::OpenRequest* request,
                    v1::OpenResponse*) override {
    std::lock_guard<std::mutex> lock(mu_);
    Context ctx(CallKind::kOpen, request->now_ns(), broker_);
    OpenInfo info;
    info.incarnation = request->incarnation();
    info.restore = request->restore();
    info.checkpoint_id = request->checkpoint_id();
    info.checkpoint_state = request->checkpoint_state();
    info.redelivery_horizon_ns = request->redelivery_horizon_ns();
    return Guarded("Open", ctx, [&] { return source_.Open(info, ctx); });
  }

  grpc::Status Advance(grpc::ServerContext*, const v1::AdvanceRequest* request,
                       v1::AdvanceResponse* response) override {
    std::lock_guard<std::mutex> lock(mu_);
    Context ctx(CallKind::kAdvance, request->now_ns(), broker_);
    grpc::Status status = Guarded("Advance", ctx, [&] {
      source_.Advance(ctx);
      return grpc::Status::OK;
    });
    if (status.ok()) ctx.WriteStep(response);
    return status;
  }

  grpc::Status Checkpoint(grpc::ServerContext*, const v1::CheckpointRequest* request,
                          v1::CheckpointResponse* response) override {
    std::lock_guard<std::mutex> lock(mu_);
    Context ctx(CallKind::kCheckpoint, request->now_ns(), broker_);
    return Guarded("Checkpoint", ctx, [&] {
      response->set_state(source_.Checkpoint(request->checkpoint_id(), ctx));
      return grpc::Status::OK;
    });
  }

  grpc::Status Committed(grpc::ServerContext*, const v1::CommittedRequest* request,
                         v1::CommittedResponse*) override {
    std::lock_guard<std::mutex> lock(mu_);
    Context ctx(CallKind::kCommitted, request->now_ns(), broker_);
    return Guarded("Committed", ctx, [&] {
      source_.Committed(request->checkpoint_id(), ctx);
      return grpc::Status::OK;
    });
  }

 private:
  std::mutex mu_;
  Source& source_;
  BrokerClient& broker_;
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
    *error = "WEIR_READY_FD " + std::string(text) + " is not an open file descriptor (" +
             std::strerror(errno) + ")";
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
      *error = "cannot write the listen address to WEIR_READY_FD " + std::to_string(fd) + " (" +
               std::strerror(errno) + ")";
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
  internal::GrpcBrokerClient broker(broker_address,
                                    std::chrono::seconds(kBrokerCallWallTimeoutSeconds));
  ConnectorService service(source, broker);

  grpc::ServerBuilder builder;
  int selected_port = 0;
  builder.AddListeningPort(listen_address, grpc::InsecureServerCredentials(), &selected_port);
  // Without this a second server could silently share the port.
  builder.AddChannelArgument(GRPC_ARG_ALLOW_REUSEPORT, 0);
  builder.SetMaxReceiveMessageSize(-1);
  builder.SetMaxSendMessageSize(-1);
  builder.RegisterService(&service);
  std::unique_ptr<grpc::Server> server = builder.BuildAndStart();
  if (server == nullptr || selected_port == 0) {
    return StartupError(std::string("cannot listen on WEIR_LISTEN_ADDRESS \"") + listen_address +
                        "\"");
  }

  if (!WriteAll(ready_fd, ListenedAddress(listen_address, selected_port) + "\n", &error)) {
    return StartupError(error);
  }
  ::close(ready_fd);

  server->Wait();
  return 0;
}

}  // namespace weir::adapter
