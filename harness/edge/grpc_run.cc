#include "harness/edge/grpc_run.h"

#include <cstdio>
#include <memory>

#include "absl/strings/str_cat.h"
#include "harness/broker/broker_model.h"
#include "harness/broker/broker_session.h"
#include "harness/edge/broker_server.h"
#include "harness/edge/call_relay.h"
#include "harness/edge/grpc_connector_port.h"
#include "harness/edge/private_dir.h"
#include "harness/faults/fault_source.h"
#include "harness/oracle/oracle.h"
#include "harness/trace/trace_format.h"

namespace weir {
namespace {

// Writes trace lines to "<path>.partial"; Finish() renames it into place.
class TraceFile : public TraceEncoder::LineSink {
 public:
  static absl::StatusOr<std::unique_ptr<TraceFile>> Create(const std::string& path) {
    std::unique_ptr<TraceFile> f(new TraceFile(path));
    f->file_ = std::fopen(f->partial_.c_str(), "wb");
    if (f->file_ == nullptr) {
      return absl::UnavailableError(absl::StrCat(path, ": cannot write trace file"));
    }
    return f;
  }
  ~TraceFile() override {
    if (file_ != nullptr) {
      std::fclose(file_);
      std::remove(partial_.c_str());
    }
  }
  void WriteLine(const std::string& line) override {
    if (std::fwrite(line.data(), 1, line.size(), file_) != line.size()) failed_ = true;
  }
  absl::Status Finish() {
    const bool close_failed = std::fclose(file_) != 0;
    file_ = nullptr;
    if (failed_ || close_failed || std::rename(partial_.c_str(), path_.c_str()) != 0) {
      std::remove(partial_.c_str());
      return absl::UnavailableError(absl::StrCat(path_, ": writing the trace failed"));
    }
    return absl::OkStatus();
  }

 private:
  explicit TraceFile(std::string path) : path_(path), partial_(path + ".partial") {}
  std::string path_;
  std::string partial_;
  std::FILE* file_ = nullptr;
  bool failed_ = false;
};

}  // namespace

const char* WeirVersion() { return "0.1.0"; }

absl::StatusOr<RunOutput> RunOverGrpc(const RunSpec& spec) {
  std::unique_ptr<TraceFile> file;
  if (!spec.trace_path.empty()) {
    auto f = TraceFile::Create(spec.trace_path);
    if (!f.ok()) return f.status();
    file = std::move(*f);
    v1::TraceLine header;
    auto* h = header.mutable_header();
    h->set_weir_version(WeirVersion());
    h->set_seed(spec.seed);
    h->set_scenario_path(spec.scenario_path);
    *h->mutable_scenario() = spec.scenario;
    for (const auto& a : spec.connector_argv) h->add_connector_argv(a);
    file->WriteLine(EncodeTraceLine(header));
  }

  TraceLog trace;
  Oracle oracle(spec.scenario.profile());
  TraceEncoder encoder(file.get());
  trace.AddObserver(&encoder);
  trace.AddObserver(&oracle);

  std::unique_ptr<PrivateDir> dir;
  std::string broker_listen = "127.0.0.1:0";
  std::string connector_listen = "127.0.0.1:0";
  if (spec.transport == Transport::kUnix) {
    auto d = PrivateDir::Create();
    if (!d.ok()) return d.status();
    dir = std::move(*d);
    broker_listen = "unix:" + dir->path() + "/broker.sock";
    connector_listen = "unix:" + dir->path() + "/connector.sock";
  }

  const auto call_timeout = std::chrono::milliseconds(spec.scenario.runtime().call_timeout_wall_ms());
  CallRelay relay;
  auto server = BrokerServer::Start(broker_listen, relay, call_timeout);
  if (!server.ok()) return server.status();

  FaultSource faults = spec.plan.has_value()
                           ? FaultSource(*spec.plan, spec.seed, trace)
                           : FaultSource(spec.scenario.faults(), spec.seed, trace);
  BrokerModel broker(spec.scenario, spec.seed, trace, faults);
  BrokerSession session(broker, trace, faults);
  GrpcConnectorPort::Options port_options;
  port_options.argv = spec.connector_argv;
  port_options.broker_address = (*server)->address();
  port_options.listen_address = connector_listen;
  port_options.call_timeout = call_timeout;
  port_options.start_timeout =
      std::chrono::milliseconds(spec.scenario.runtime().start_timeout_wall_ms());
  GrpcConnectorPort port(port_options, relay);
  RuntimeModel runtime(spec.scenario, broker, session, port, trace, faults);

  RunOutput out;
  out.summary = runtime.Run();
  port.Kill();
  out.verdict = oracle.Finish();
  out.digest = encoder.FinishDigest();
  out.events = encoder.events();
  if (file != nullptr) {
    v1::TraceLine footer;
    footer.mutable_footer()->set_events(out.events);
    footer.mutable_footer()->set_digest(out.digest);
    file->WriteLine(EncodeTraceLine(footer));
    if (absl::Status st = file->Finish(); !st.ok()) return st;
  }
  return out;
}

}  // namespace weir
