#include "harness/scenario/plan_file.h"

#include <google/protobuf/text_format.h>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_split.h"
#include "harness/scenario/fault_validation.h"
#include "harness/scenario/text_file.h"

namespace weir {
namespace {

void Validate(TextFile& f, const v1::FaultPlan& plan) {
  for (int i = 0; i < plan.decisions_size(); ++i) {
    const auto& d = plan.decisions(i);
    const std::string at = absl::StrCat("decisions[", i, "]");
    const std::string name = absl::StrCat("decisions #", i + 1);
    f.Require(d.site() != v1::SITE_UNSPECIFIED, {at, "site"},
              name +
                  ": expected a site (PULL, ACK, NACK, EXTEND_LEASE, PUBLISH, STEP, CHECKPOINT, "
                  "or a log site: LIST_PARTITIONS, READ, SAVE_BOOKMARKS, LOAD_BOOKMARKS, APPEND)");
    f.Require(d.position() >= 1, {at, "position"},
              name + ": expected a position of at least 1 (positions count from 1)");
    f.Require(d.fault_case() != v1::FaultDecision::FAULT_NOT_SET, {at},
              name +
                  ": expected one fault (latency_ms, throttle_retry_after_ms, transient, duplicate, "
                  "lost_ack, visibility_delay_ms, reorder, broker_restart, commit_failure, crash, "
                  "partition_outage_ms, empty_read, lost_bookmark)");
    f.Require(d.latency_ms() >= 0, {at, "latency_ms"}, name + ": latency_ms must be >= 0");
    f.Require(d.throttle_retry_after_ms() >= 0, {at, "throttle_retry_after_ms"},
              name + ": throttle_retry_after_ms must be >= 0");
    f.Require(d.visibility_delay_ms() >= 0, {at, "visibility_delay_ms"}, name + ": visibility_delay_ms must be >= 0");
    f.Require(d.partition_outage_ms() >= 0, {at, "partition_outage_ms"}, name + ": partition_outage_ms must be >= 0");
    if (d.has_transient()) {
      f.Require(d.transient().code() != v1::TRANSIENT_CODE_UNSPECIFIED, {at, "transient"},
                name + ": expected transient { code: UNAVAILABLE } or DEADLINE_EXCEEDED");
    }
    if (d.has_crash()) {
      f.Require(d.crash().point() != v1::CRASH_POINT_UNSPECIFIED, {at, "crash"},
                name + ": expected crash { point: … }");
    }
    if (d.site() != v1::SITE_UNSPECIFIED && d.fault_case() != v1::FaultDecision::FAULT_NOT_SET) {
      const char* expected = ExpectedSite(d);
      f.Require(expected == nullptr, {at, "site"},
                absl::StrCat(name, ": site ", v1::Site_Name(d.site()), " for this fault; expected site ",
                             expected == nullptr ? "" : expected));
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
