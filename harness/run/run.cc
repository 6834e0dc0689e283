#include "harness/run/run.h"

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <memory>

#include "absl/strings/str_cat.h"
#include "harness/broker/log/log_model.h"
#include "harness/broker/queue/queue_model.h"
#include "harness/broker/broker_session.h"
#include "harness/faults/fault_source.h"
#include "harness/oracle/oracle.h"
#include "harness/run/version.h"
#include "harness/trace/trace_format.h"

namespace weir {
namespace {

// Writes event lines to "<path>.events.partial" as the run goes. Finish()
// writes "<path>.partial" as header + events + footer (the header carries the
// fault plan, known only at the end) and renames it into place. Until then no
// file exists under the requested name; on any failure both temporaries go.
class TraceFile : public TraceEncoder::LineSink {
 public:
  static absl::StatusOr<std::unique_ptr<TraceFile>> Create(const std::string& path) {
    std::unique_ptr<TraceFile> f(new TraceFile(path));
    f->events_ = std::fopen(f->events_path_.c_str(), "w+b");
    if (f->events_ == nullptr) {
      return absl::UnavailableError(absl::StrCat(path, ": cannot write trace file"));
    }
    return f;
  }
  ~TraceFile() override {
    if (events_ != nullptr) std::fclose(events_);
    std::remove(events_path_.c_str());
    std::remove(partial_.c_str());
  }
  void WriteLine(const std::string& line) override {
    if (std::fwrite(line.data(), 1, line.size(), events_) != line.size()) failed_ = true;
  }
  absl::Status Finish(const std::string& header, const std::string& footer) {
    std::FILE* out = std::fopen(partial_.c_str(), "wb");
    bool ok = out != nullptr && !failed_ && std::fflush(events_) == 0 && std::fseek(events_, 0, SEEK_SET) == 0;
    if (ok) ok = std::fwrite(header.data(), 1, header.size(), out) == header.size();
    char buf[1 << 16];
    while (ok) {
      const std::size_t n = std::fread(buf, 1, sizeof buf, events_);
      if (n == 0) break;
      ok = std::fwrite(buf, 1, n, out) == n;
    }
    if (ok) ok = std::ferror(events_) == 0;
    if (ok) ok = std::fwrite(footer.data(), 1, footer.size(), out) == footer.size();
    if (out != nullptr && std::fclose(out) != 0) ok = false;
    if (ok) ok = std::rename(partial_.c_str(), path_.c_str()) == 0;
    if (!ok) return absl::UnavailableError(absl::StrCat(path_, ": writing the trace failed"));
    return absl::OkStatus();
  }

 private:
  explicit TraceFile(std::string path)
      : path_(path), partial_(path + ".partial"), events_path_(path + ".events.partial") {}
  std::string path_;
  std::string partial_;
  std::string events_path_;
  std::FILE* events_ = nullptr;
  bool failed_ = false;
};

}  // namespace

const char* WeirVersion() { return WEIR_VERSION; }

std::uint32_t ReaderCount(const v1::Scenario& scenario) {
  return std::max<std::uint32_t>(1, scenario.readers().count());
}

absl::StatusOr<RunOutput> RunWithPort(const RunSpec& spec, ConnectorPort& port) { return RunWithPorts(spec, {&port}); }

absl::StatusOr<RunOutput> RunWithPorts(const RunSpec& spec, const std::vector<ConnectorPort*>& ports) {
  if (ports.size() != ReaderCount(spec.scenario)) {
    return absl::InvalidArgumentError(absl::StrCat("the scenario has ", ReaderCount(spec.scenario), " readers, but ",
                                                   ports.size(), " connector ports were given"));
  }
  std::unique_ptr<TraceFile> file;
  if (!spec.trace_path.empty()) {
    auto f = TraceFile::Create(spec.trace_path);
    if (!f.ok()) return f.status();
    file = std::move(*f);
  }

  TraceLog trace;
  Oracle oracle(spec.scenario.profile(), spec.scenario.has_log() ? v1::LOG : v1::QUEUE, ReaderCount(spec.scenario));
  TraceEncoder encoder(file.get());
  trace.AddObserver(&encoder);
  trace.AddObserver(&oracle);
  for (TraceObserver* observer : spec.observers) trace.AddObserver(observer);

  FaultSource faults = spec.plan.has_value() ? FaultSource(*spec.plan, spec.seed, trace)
                                             : FaultSource(spec.scenario.faults(), spec.seed, trace);
  // The scenario's shape picks the model; everything else is the same.
  std::unique_ptr<QueueModel> queue;
  std::unique_ptr<LogModel> log;
  std::unique_ptr<BrokerSession> session;
  BrokerModel* broker = nullptr;
  if (spec.scenario.has_log()) {
    log = std::make_unique<LogModel>(spec.scenario, spec.seed, trace, faults);
    session = std::make_unique<BrokerSession>(*log, trace, faults);
    broker = log.get();
  } else {
    queue = std::make_unique<QueueModel>(spec.scenario, spec.seed, trace, faults);
    session = std::make_unique<BrokerSession>(*queue, trace, faults);
    broker = queue.get();
  }
  RuntimeModel runtime(spec.scenario, *broker, *session, ports, trace, faults);
  if (spec.wall_bounds) {
    runtime.set_wall_clock([] {  // the livelock bound in wall time
      return std::chrono::duration_cast<std::chrono::milliseconds>(std::chrono::steady_clock::now().time_since_epoch())
          .count();
    });
  }  // else only the step count bounds a livelock (runtime_model.h)

  RunOutput out;
  out.summary = runtime.Run();
  for (ConnectorPort* port : ports) port->Kill();
  out.verdict = oracle.Finish();
  out.digest = encoder.FinishDigest();
  out.events = encoder.events();
  out.plan = faults.plan();
  if (spec.stop != nullptr && spec.stop->load()) {
    return absl::CancelledError("interrupted by a signal; the run was abandoned");
  }
  if (file != nullptr) {
    v1::TraceLine header;
    auto* h = header.mutable_header();
    h->set_weir_version(WeirVersion());
    h->set_seed(spec.seed);
    h->set_scenario_path(spec.scenario_path);
    *h->mutable_scenario() = spec.scenario;
    for (const auto& a : spec.connector_argv) h->add_connector_argv(a);
    if (spec.connector_identity.has_value()) *h->mutable_connector() = *spec.connector_identity;
    *h->mutable_plan() = out.plan;
    h->set_plan_given(faults.plan_given());
    v1::TraceLine footer;
    footer.mutable_footer()->set_events(out.events);
    footer.mutable_footer()->set_digest(out.digest);
    if (absl::Status st = file->Finish(EncodeTraceLine(header), EncodeTraceLine(footer)); !st.ok()) {
      return st;
    }
  }
  return out;
}

}  // namespace weir
