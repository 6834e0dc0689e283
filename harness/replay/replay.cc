#include "harness/replay/replay.h"

#include "absl/strings/ascii.h"
#include "absl/strings/str_cat.h"
#include "harness/edge/connector_identity.h"
#include "harness/edge/private_dir.h"
#include "harness/replay/trace_reader.h"
#include "harness/trace/describe.h"

namespace weir {
namespace {

std::string Chomp(std::string s) {
  if (!s.empty() && s.back() == '\n') s.pop_back();
  return s;
}

}  // namespace

RunSpec SpecFromHeader(const v1::TraceHeader& header) {
  RunSpec spec;
  spec.scenario = header.scenario();
  spec.scenario_path = header.scenario_path();
  spec.seed = header.seed();
  spec.connector_argv.assign(header.connector_argv().begin(), header.connector_argv().end());
  // The faults the saved run applied, given exactly (as with --plan).
  spec.plan = header.plan();
  return spec;
}

std::optional<std::string> StartFailure(const v1::TraceEvent& event) {
  std::string call;
  switch (event.kind_case()) {
    case v1::TraceEvent::kExited: call = event.exited().call(); break;
    case v1::TraceEvent::kCallTimedOut: call = event.call_timed_out().call(); break;
    case v1::TraceEvent::kProtocolError: call = event.protocol_error().call(); break;
    default: return std::nullopt;
  }
  if (call != "Start") return std::nullopt;
  std::string reason = DescribeEvent(event);
  if (event.has_exited()) {
    const absl::string_view tail = absl::StripTrailingAsciiWhitespace(event.exited().stderr_tail());
    if (!tail.empty()) absl::StrAppend(&reason, "; its output ended with: ", tail);
  }
  return reason;
}

void StartFailureWatch::OnEvent(const v1::TraceEvent& event) {
  if (!reason_.empty()) return;
  if (auto why = StartFailure(event)) {
    reason_ = *why;
    incarnation_ = event.incarnation();
  }
}

absl::Status CompareTraceFiles(const std::string& saved_path, const std::string& rerun_path, ReplayResult* result_out) {
  auto saved = TraceReader::Open(saved_path);
  if (!saved.ok()) return saved.status();
  auto rerun = TraceReader::Open(rerun_path);
  if (!rerun.ok()) return rerun.status();
  bool differs = false;
  while (true) {
    auto a = (*saved)->Next();
    if (!a.ok()) return a.status();
    auto b = (*rerun)->Next();
    if (!b.ok()) return b.status();
    if (!*a && !*b) break;
    if (!differs && (*a != *b || (*saved)->line() != (*rerun)->line())) {
      differs = true;
      result_out->diverged_at = *a ? (*saved)->event().seq() : (*rerun)->event().seq();
      result_out->expected_line = *a ? Chomp((*saved)->line()) : "";
      result_out->got_line = *b ? Chomp((*rerun)->line()) : "";
      result_out->expected_what = *a ? DescribeEvent((*saved)->event()) : "the end of the run";
      result_out->got_what = *b ? DescribeEvent((*rerun)->event()) : "the end of the run";
      // The saved run's connector came up here and the rerun's did not.
      if (*b) {
        if (auto why = StartFailure((*rerun)->event())) result_out->start_failure = *why;
      }
    }
    // Drain whichever side goes on, so both footers are checked and counted.
    if (!*a) {
      while (true) {
        auto more = (*rerun)->Next();
        if (!more.ok()) return more.status();
        if (!*more) break;
      }
      break;
    }
    if (!*b) {
      while (true) {
        auto more = (*saved)->Next();
        if (!more.ok()) return more.status();
        if (!*more) break;
      }
      break;
    }
  }
  result_out->saved_digest = (*saved)->footer().digest();
  result_out->saved_events = (*saved)->footer().events();
  result_out->rerun_digest = (*rerun)->footer().digest();
  result_out->rerun_events = (*rerun)->footer().events();
  result_out->identical = !differs && result_out->saved_digest == result_out->rerun_digest;
  return absl::OkStatus();
}

absl::StatusOr<ReplayResult> ReplayTrace(const std::string& path, const ReplayOptions& options) {
  if (absl::Status st = CheckTraceFile(path); !st.ok()) return st;
  auto saved = TraceReader::Open(path);
  if (!saved.ok()) return saved.status();

  ReplayResult result;
  result.weir_version = (*saved)->header().weir_version();
  RunSpec spec = SpecFromHeader((*saved)->header());
  if (spec.connector_argv.empty() && options.connector_argv.empty()) {
    return absl::InvalidArgumentError(absl::StrCat(path, ":1: the header names no connector command"));
  }
  auto connector = ResolveRecordedConnector((*saved)->header(), options.connector_argv);
  if (!connector.ok()) return connector.status();
  spec.connector_argv = connector->argv;
  result.changes = connector->changes;
  result.connector_argv = spec.connector_argv;
  spec.transport = options.transport;
  spec.stop = options.stop;
  spec.wall_bounds = options.wall_bounds && options.stop_before == 0;
  spec.wrapper_argv = options.wrapper_argv;
  spec.echo_output = options.echo_output;
  std::string next_what, next_line;
  if (options.stop_before > 0) {
    // The saved event the hold comes before, found by streaming the file once.
    auto scan = TraceReader::Open(path);
    if (!scan.ok()) return scan.status();
    while (true) {
      auto more = (*scan)->Next();
      if (!more.ok()) return more.status();
      if (!*more) break;
      if (next_line.empty() && (*scan)->event().seq() == options.stop_before) {
        next_what = DescribeEvent((*scan)->event());
        next_line = Chomp((*scan)->line());
      }
    }
    const std::uint64_t events = (*scan)->footer().events();
    if (next_line.empty()) {
      return absl::InvalidArgumentError(
          absl::StrCat("--stop-before ", options.stop_before, ": ", path, " has no event #", options.stop_before,
                       "; expected an event number from 1 to ", events > 0 ? events - 1 : 0, " (its events are #0 to #",
                       events > 0 ? events - 1 : 0, ")"));
    }
    spec.hold_before = options.stop_before;
    if (options.on_hold) {
      spec.on_hold = [&](const HoldPoint& at) { options.on_hold(at, next_what, next_line); };
    }
  }

  auto dir = PrivateDir::Create();
  if (!dir.ok()) return dir.status();
  spec.trace_path = (*dir)->path() + "/rerun.jsonl";
  auto out = RunOverGrpc(spec);
  if (!out.ok()) return out.status();

  if (absl::Status st = CompareTraceFiles(path, spec.trace_path, &result); !st.ok()) return st;
  return result;
}

}  // namespace weir
