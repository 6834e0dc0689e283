#include "harness/scenario/plan_file.h"

#include <google/protobuf/text_format.h>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_split.h"
#include "harness/scenario/text_file.h"

namespace weir {
namespace {

bool IsBrokerCallSite(v1::Site s) {
  return s == v1::PULL || s == v1::ACK || s == v1::NACK || s == v1::EXTEND_LEASE;
}

void Validate(TextFile& f, const v1::FaultPlan& plan) {
  for (int i = 0; i < plan.decisions_size(); ++i) {
    const auto& d = plan.decisions(i);
    const std::string at = absl::StrCat("decisions[", i, "]");
    const std::string name = absl::StrCat("decisions #", i + 1);
    f.Require(d.site() != v1::SITE_UNSPECIFIED, {at, "site"},
              name + ": expected a site (PULL, ACK, NACK, EXTEND_LEASE, PUBLISH, STEP, CHECKPOINT)");
    f.Require(d.position() >= 1, {at, "position"},
              name + ": expected a position of at least 1 (positions count from 1)");
    f.Require(d.fault_case() != v1::FaultDecision::FAULT_NOT_SET, {at},
              name + ": expected one fault (latency_ms, throttle_retry_after_ms, transient, duplicate, "
                     "lost_ack, visibility_delay_ms, reorder, broker_restart, commit_failure, crash)");
    switch (d.fault_case()) {
      case v1::FaultDecision::kLatencyMs:
        f.Require(d.latency_ms() >= 0, {at, "latency_ms"}, name + ": latency_ms must be >= 0");
        f.Require(IsBrokerCallSite(d.site()), {at, "site"}, name + ": latency applies to broker call sites");
        break;
      case v1::FaultDecision::kThrottleRetryAfterMs:
        f.Require(d.throttle_retry_after_ms() >= 0, {at, "throttle_retry_after_ms"},
                  name + ": throttle_retry_after_ms must be >= 0");
        f.Require(IsBrokerCallSite(d.site()), {at, "site"}, name + ": throttling applies to broker call sites");
        break;
      case v1::FaultDecision::kTransient:
        f.Require(d.transient().code() != v1::TRANSIENT_CODE_UNSPECIFIED, {at, "transient"},
                  name + ": expected transient { code: UNAVAILABLE } or DEADLINE_EXCEEDED");
        f.Require(IsBrokerCallSite(d.site()), {at, "site"}, name + ": transient errors apply to broker call sites");
        break;
      case v1::FaultDecision::kDuplicate:
      case v1::FaultDecision::kReorder:
      case v1::FaultDecision::kBrokerRestart:
        f.Require(d.site() == v1::PULL, {at, "site"}, name + ": expected site PULL for this fault");
        break;
      case v1::FaultDecision::kLostAck:
        f.Require(d.site() == v1::ACK, {at, "site"}, name + ": expected site ACK for lost_ack");
        break;
      case v1::FaultDecision::kVisibilityDelayMs:
        f.Require(d.site() == v1::PUBLISH, {at, "site"}, name + ": expected site PUBLISH for visibility_delay_ms");
        f.Require(d.visibility_delay_ms() >= 0, {at, "visibility_delay_ms"},
                  name + ": visibility_delay_ms must be >= 0");
        break;
      case v1::FaultDecision::kCommitFailure:
        f.Require(d.site() == v1::CHECKPOINT, {at, "site"}, name + ": expected site CHECKPOINT for commit_failure");
        break;
      case v1::FaultDecision::kCrash: {
        const auto p = d.crash().point();
        const bool step_point = p == v1::BEFORE_STEP || p == v1::IN_STEP_AFTER_BROKER_CALL;
        f.Require(p != v1::CRASH_POINT_UNSPECIFIED, {at, "crash"}, name + ": expected crash { point: … }");
        f.Require(p == v1::CRASH_POINT_UNSPECIFIED || (step_point ? d.site() == v1::STEP : d.site() == v1::CHECKPOINT),
                  {at, "site"},
                  name + (step_point ? ": expected site STEP for this crash point"
                                     : ": expected site CHECKPOINT for this crash point"));
        break;
      }
      case v1::FaultDecision::FAULT_NOT_SET:
        break;
    }
  }
}

}  // namespace

absl::StatusOr<v1::FaultPlan> LoadFaultPlan(const std::string& path) {
  TextFile f(path);
  v1::FaultPlan plan;
  if (absl::Status st = f.Parse(&plan); !st.ok()) return st;
  Validate(f, plan);
  if (absl::Status st = f.status(); !st.ok()) return st;
  return plan;
}

absl::StatusOr<v1::FaultPlan> ParseFaultPlan(const std::string& path, std::string_view text) {
  TextFile f(path);
  v1::FaultPlan plan;
  if (absl::Status st = f.ParseText(text, &plan); !st.ok()) return st;
  Validate(f, plan);
  if (absl::Status st = f.status(); !st.ok()) return st;
  return plan;
}

std::string FormatFaultPlan(const v1::FaultPlan& plan, const std::string& comment) {
  std::string out;
  for (absl::string_view line : absl::StrSplit(comment, '\n')) absl::StrAppend(&out, "# ", line, "\n");
  absl::StrAppend(&out, "# ", plan.decisions_size(), " decisions. Run it with: weir run --plan FILE …\n");
  std::string body;
  google::protobuf::TextFormat::PrintToString(plan, &body);
  return out + body;
}

}  // namespace weir
