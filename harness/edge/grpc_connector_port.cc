#include "harness/edge/grpc_connector_port.h"

#include <signal.h>

#include "absl/status/status.h"
#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"

namespace weir {

namespace {

// The canonical name of a gRPC status code (grpc/status.h).
std::string CodeName(grpc::StatusCode code) {
  static constexpr const char* kNames[] = {
      "OK",        "CANCELLED",      "UNKNOWN",           "INVALID_ARGUMENT",   "DEADLINE_EXCEEDED",
      "NOT_FOUND", "ALREADY_EXISTS", "PERMISSION_DENIED", "RESOURCE_EXHAUSTED", "FAILED_PRECONDITION",
      "ABORTED",   "OUT_OF_RANGE",   "UNIMPLEMENTED",     "INTERNAL",           "UNAVAILABLE",
      "DATA_LOSS", "UNAUTHENTICATED"};
  const int i = static_cast<int>(code);
  return i >= 0 && i < 17 ? kNames[i] : absl::StrCat("code ", i);
}

}  // namespace

bool IsLocalAddress(const std::string& address) {
  if (absl::StartsWith(address, "unix:")) return address.size() > 5;
  const auto colon = address.rfind(':');
  if (colon == std::string::npos) return false;
  std::string host = address.substr(0, colon);
  if (absl::StartsWith(host, "ipv4:")) host = host.substr(5);
  if (host == "localhost" || host == "[::1]") return true;
  return absl::StartsWith(host, "127.");
}

GrpcConnectorPort::GrpcConnectorPort(Options options, BrokerServer& broker)
    : options_(std::move(options)), server_(broker) {}

GrpcConnectorPort::~GrpcConnectorPort() { Kill(); }

namespace {
// The wait that stands for "no bound" (--no-wall-bounds): a stop flag ends it.
constexpr std::chrono::milliseconds kUnbounded = std::chrono::hours(24 * 365 * 10);
}  // namespace

std::int64_t GrpcConnectorPort::pid() const { return child_ != nullptr ? child_->pid() : 0; }

void GrpcConnectorPort::Kill() {
  address_.clear();
  stub_.reset();
  channel_.reset();
  if (child_ != nullptr) child_->Kill();
  child_.reset();
}

ConnectorFailure GrpcConnectorPort::ExitedOr(ConnectorFailure::Kind kind, std::string detail) {
  ConnectorFailure f;
  f.kind = kind;
  f.detail = std::move(detail);
  if (child_ != nullptr) {
    // What reaches the trace (exited or not, how, the last words) must not
    // depend on how busy the machine is: a connector that broke its call is
    // almost always exiting, so give it ample time (reaping returns at once
    // when it has ended; only one that lives on with a broken call pays it).
    // Once weir is asked to stop, nothing waits: the run is abandoned anyway.
    const auto wait = Stopping() ? std::chrono::milliseconds(0) : std::chrono::milliseconds(2000);
    if (auto how = child_->TryReap(wait); how.has_value()) {
      f.kind = ConnectorFailure::Kind::kExited;
      f.exit_status = *how;
    }
    f.stderr_tail = child_->OutputTail(wait);
  }
  return f;
}

bool GrpcConnectorPort::Stopping() const { return options_.stop != nullptr && options_.stop->load(); }

ConnectorFailure GrpcConnectorPort::Interrupted() {
  Kill();
  return ConnectorFailure{ConnectorFailure::Kind::kInterrupted, "weir was interrupted", "", ""};
}

ConnectorFailure GrpcConnectorPort::Start(std::uint64_t incarnation) {
  using Clock = std::chrono::steady_clock;
  phases_ = {};
  auto mark = Clock::now();
  const auto phase = [&mark](std::chrono::nanoseconds& into) {
    const auto now = Clock::now();
    into = now - mark;
    mark = now;
  };
  Kill();
  phase(phases_.kill);
  ChildProcess::Options spawn;
  spawn.argv = options_.wrapper_argv;
  spawn.argv.insert(spawn.argv.end(), options_.argv.begin(), options_.argv.end());
  if (options_.echo_output) spawn.echo_fd = 2;
  spawn.env["WEIR_BROKER_ADDRESS"] = options_.broker_address;
  spawn.env["WEIR_LISTEN_ADDRESS"] = options_.listen_address;
  spawn.env["WEIR_READY_FD"] = "3";
  spawn.env["WEIR_INCARNATION"] = std::to_string(incarnation);
  auto child = ChildProcess::Spawn(spawn);
  phase(phases_.spawn);
  if (!child.ok()) {
    return ConnectorFailure{ConnectorFailure::Kind::kStartFailed, std::string(child.status().message()), "", ""};
  }
  child_ = std::move(*child);
  const std::chrono::milliseconds start_timeout = options_.wall_bounds ? options_.start_timeout : kUnbounded;
  auto line = child_->ReadReadyLine(start_timeout, options_.stop);
  phase(phases_.handshake);
  if (absl::IsCancelled(line.status())) return Interrupted();
  if (!line.ok()) {
    // Alive but silent: it hangs in start-up. Gone: it exited.
    const bool silent = absl::IsDeadlineExceeded(line.status());
    return ExitedOr(silent ? ConnectorFailure::Kind::kTimeout : ConnectorFailure::Kind::kCallFailed,
                    absl::StrCat("the connector never reported its address: ", line.status().message()));
  }
  std::string address = *line;
  while (!address.empty() && (address.back() == '\r' || address.back() == ' ')) address.pop_back();
  if (!IsLocalAddress(address)) {
    return ExitedOr(ConnectorFailure::Kind::kCallFailed,
                    absl::StrCat("the connector reported address '", address.substr(0, 200),
                                 "', which is neither loopback nor a Unix socket"));
  }
  grpc::ChannelArguments args;
  args.SetMaxReceiveMessageSize(static_cast<int>(options_.max_message_bytes));
  args.SetInt(GRPC_ARG_ENABLE_RETRIES, 0);
  channel_ = grpc::CreateCustomChannel(address, grpc::InsecureChannelCredentials(), args);
  const auto connect_by = std::chrono::steady_clock::now() + start_timeout;
  bool connected = false;
  while (!connected && std::chrono::steady_clock::now() < connect_by) {
    if (Stopping()) return Interrupted();
    connected = channel_->WaitForConnected(std::chrono::system_clock::now() + std::chrono::milliseconds(100));
  }
  if (!connected) {
    return ExitedOr(
        ConnectorFailure::Kind::kCallFailed,
        absl::StrCat("the connector reported address ", address, ", but nothing accepted a connection there within ",
                     options_.start_timeout.count(), " ms"));
  }
  phase(phases_.connect);
  stub_ = std::make_unique<grpc::GenericStub>(channel_);
  address_ = address;
  return {};
}

ConnectorFailure GrpcConnectorPort::Invoke(const char* name, const google::protobuf::Message& request,
                                           google::protobuf::Message* response, BrokerEndpoint& broker) {
  if (stub_ == nullptr) {
    return ConnectorFailure{ConnectorFailure::Kind::kExited, "no live incarnation", "", ""};
  }
  // Broker calls made between two connector calls are refused as stray.
  server_.RefuseQueued();
  for (const std::string& method_name : server_.TakeStrayCalls()) broker.OnStrayCall(method_name);
  if (Stopping()) return Interrupted();

  // The call goes out on the broker server's queue; this thread then serves
  // the connector's broker calls from that queue until the answer is there.
  grpc::ClientContext context;
  // Without wall bounds the call has no deadline: Serve's `done` below still
  // ends it when weir is asked to stop.
  if (options_.wall_bounds) context.set_deadline(std::chrono::system_clock::now() + options_.call_timeout);
  const pid_t group = child_->pid();
  auto kill_and_cancel = [group, &context] {
    ::kill(-group, SIGKILL);
    context.TryCancel();
  };
  grpc::ByteBuffer request_bytes;
  {
    bool own_buffer = false;
    const grpc::Status st = grpc::GenericSerialize<grpc::ProtoBufferWriter, google::protobuf::Message>(
        request, &request_bytes, &own_buffer);
    if (!st.ok()) {
      return ConnectorFailure{ConnectorFailure::Kind::kCallFailed,
                              absl::StrCat("cannot encode the ", name, " request: ", st.error_message()), "", ""};
    }
  }
  grpc::Status status;
  grpc::ByteBuffer answer;
  DoneTag answered;
  auto rpc =
      stub_->PrepareUnaryCall(&context, absl::StrCat("/weir.v1.Connector/", name), request_bytes, server_.queue());
  rpc->StartCall();
  rpc->Finish(&answer, &status, &answered);
  // A crash point kills the process group while that broker call's answer is
  // held back; a signal ends the call at once rather than at its deadline.
  BrokerServer::Window window{broker, kill_and_cancel};
  bool stop_seen = false;
  server_.Serve(window, [&] {
    if (!stop_seen && Stopping()) {
      stop_seen = true;
      kill_and_cancel();
    }
    return answered.fired;
  });
  if (window.crashed) {
    Kill();  // reap the killed group and drop the channel: no incarnation is alive
    return ConnectorFailure{ConnectorFailure::Kind::kCrashed, absl::StrCat("killed during ", name, " at a crash point"),
                            "", ""};
  }
  if (Stopping()) return Interrupted();
  if (status.error_code() == grpc::StatusCode::DEADLINE_EXCEEDED) {
    if (auto how = child_->TryReap(std::chrono::milliseconds(0)); how.has_value()) {
      return ExitedOr(ConnectorFailure::Kind::kExited, absl::StrCat("died during ", name));
    }
    ConnectorFailure f{ConnectorFailure::Kind::kTimeout,
                       absl::StrCat(name, " did not answer within ", options_.call_timeout.count(), " ms"), "",
                       child_->OutputTail()};
    return f;
  }
  if (!status.ok()) {
    if (status.error_code() == grpc::StatusCode::UNAVAILABLE || status.error_code() == grpc::StatusCode::CANCELLED) {
      ConnectorFailure f =
          ExitedOr(ConnectorFailure::Kind::kCallFailed, absl::StrCat(name, " failed: ", status.error_message()));
      if (f.kind == ConnectorFailure::Kind::kExited) f.detail = absl::StrCat("died during ", name);
      return f;
    }
    // An answer above weir's receive limit (gRPC's own RESOURCE_EXHAUSTED) or
    // a method the connector does not serve breaks the wire contract.
    if (status.error_code() == grpc::StatusCode::RESOURCE_EXHAUSTED ||
        status.error_code() == grpc::StatusCode::UNIMPLEMENTED) {
      return ConnectorFailure{
          ConnectorFailure::Kind::kCallFailed,
          absl::StrCat(name, " answered ", CodeName(status.error_code()), ": ", status.error_message()), "", ""};
    }
    // Any other status is the connector's own word that the call failed (an
    // exception in the source, a checkpoint it cannot read): connector-error.
    return ConnectorFailure{
        ConnectorFailure::Kind::kConnectorError,
        absl::StrCat(name, " answered ", CodeName(status.error_code()), ": ", status.error_message()), "", "",
        static_cast<int>(status.error_code())};
  }
  // The answer must be exactly one message of the response type (an empty
  // message is one); a missing answer or bytes that do not parse are not.
  if (!answer.Valid() ||
      !grpc::GenericDeserialize<grpc::ProtoBufferReader, google::protobuf::Message>(&answer, response).ok()) {
    return ConnectorFailure{ConnectorFailure::Kind::kCallFailed,
                            absl::StrCat(name, " answered no message, or bytes that are not a ",
                                         response->GetDescriptor()->full_name(), " message"),
                            "", ""};
  }
  return {};
}

ConnectorFailure GrpcConnectorPort::Open(const v1::OpenRequest& request, v1::OpenResponse* response,
                                         BrokerEndpoint& broker) {
  return Invoke("Open", request, response, broker);
}

ConnectorFailure GrpcConnectorPort::Advance(const v1::AdvanceRequest& request, v1::AdvanceResponse* response,
                                            BrokerEndpoint& broker) {
  return Invoke("Advance", request, response, broker);
}

ConnectorFailure GrpcConnectorPort::Checkpoint(const v1::CheckpointRequest& request, v1::CheckpointResponse* response,
                                               BrokerEndpoint& broker) {
  return Invoke("Checkpoint", request, response, broker);
}

ConnectorFailure GrpcConnectorPort::Committed(const v1::CommittedRequest& request, v1::CommittedResponse* response,
                                              BrokerEndpoint& broker) {
  return Invoke("Committed", request, response, broker);
}

ConnectorFailure GrpcConnectorPort::Assign(const v1::AssignRequest& request, v1::AssignResponse* response,
                                           BrokerEndpoint& broker) {
  return Invoke("Assign", request, response, broker);
}

ConnectorFailure GrpcConnectorPort::Revoke(const v1::RevokeRequest& request, v1::RevokeResponse* response,
                                           BrokerEndpoint& broker) {
  return Invoke("Revoke", request, response, broker);
}

ConnectorFailure GrpcConnectorPort::Cut(const v1::CutRequest& request, v1::CutResponse* response,
                                        BrokerEndpoint& broker) {
  return Invoke("Cut", request, response, broker);
}

}  // namespace weir
