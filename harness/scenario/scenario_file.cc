#include "harness/scenario/scenario_file.h"

#include <google/protobuf/text_format.h>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_split.h"
#include "harness/runtime/runtime_model.h"
#include "harness/scenario/fault_validation.h"
#include "harness/scenario/profile_file.h"
#include "harness/scenario/text_file.h"

namespace weir {
namespace {

// Reader processes a scenario may ask for.
constexpr std::uint32_t kMaxReaders = 16;

// One year of virtual time: larger durations are surely typos.
constexpr std::int64_t kMaxMillis = 365LL * 24 * 3600 * 1000;

void CheckMillis(TextFile& f, std::int64_t value, const char* message_field, const char* field, bool positive) {
  const std::string name = absl::StrCat(message_field, ".", field);
  if (positive) {
    f.Require(value >= 1 && value <= kMaxMillis, {message_field, field},
              absl::StrCat(name, " is ", value, "; expected 1 ..", kMaxMillis, " (milliseconds)"));
  } else {
    f.Require(value >= 0 && value <= kMaxMillis, {message_field, field},
              absl::StrCat(name, " is ", value, "; expected 0 ..", kMaxMillis, " (milliseconds)"));
  }
}

// Partitions in one run, at the start and after growth.
constexpr std::uint64_t kMaxPartitions = 1000;

void ValidateLog(TextFile& f, const v1::LogConfig& l) {
  f.Require(l.partitions() >= 1 && l.partitions() <= kMaxPartitions, {"log", "partitions"},
            absl::StrCat("log.partitions is ", l.partitions(), "; expected 1 ..", kMaxPartitions));
  f.Require(l.hot_key_share() >= 0 && l.hot_key_share() <= 1, {"log", "hot_key_share"},
            absl::StrCat("log.hot_key_share is ", l.hot_key_share(), "; expected a share in [0, 1]"));
  std::uint64_t total = l.partitions();
  for (int i = 0; i < l.growth_size(); ++i) {
    const auto& g = l.growth(i);
    const std::string at = absl::StrCat("growth[", i, "]");
    f.Require(g.count() >= 1, {"log", at}, absl::StrCat("log.", at, ".count is ", g.count(), "; expected at least 1"));
    CheckMillis(f, g.at_ms(), "log", "growth", false);
    total += g.count();
  }
  f.Require(total <= kMaxPartitions, {"log", "growth"},
            absl::StrCat("log has ", total, " partitions after growth; expected at most ", kMaxPartitions));
  std::uint64_t idle = 0;
  for (int i = 0; i < l.idle_partitions_size(); ++i) {
    const std::uint32_t p = l.idle_partitions(i);
    f.Require(p < l.partitions(), {"log", "idle_partitions"},
              absl::StrCat("log.idle_partitions names partition ", p, "; expected one of 0 ..",
                           l.partitions() == 0 ? 0 : l.partitions() - 1));
    ++idle;
  }
  f.Require(idle < l.partitions() || l.partitions() == 0, {"log", "idle_partitions"},
            "log.idle_partitions names every partition; expected at least one to receive records");
  CheckMillis(f, l.max_partition_lag_ms(), "log", "max_partition_lag_ms", false);
  CheckMillis(f, l.retention_ms(), "log", "retention_ms", false);
  CheckMillis(f, l.max_wait_ms(), "log", "max_wait_ms", false);
  CheckMillis(f, l.broker_restart_ms(), "log", "broker_restart_ms", false);
}

void ValidateReaders(TextFile& f, const v1::Scenario& s) {
  const auto& r = s.readers();
  f.Require(r.count() >= 1 && r.count() <= kMaxReaders, {"readers", "count"},
            absl::StrCat("readers.count is ", r.count(), "; expected 1 ..", kMaxReaders));
  f.Require(r.initial() <= r.count(), {"readers", "initial"},
            absl::StrCat("readers.initial is ", r.initial(), "; expected 0 (all) .. readers.count (", r.count(), ")"));
  const std::pair<double, const char*> rates[] = {{r.cut_rate(), "cut_rate"},
                                                  {r.move_rate(), "move_rate"},
                                                  {r.membership_rate(), "membership_rate"},
                                                  {r.cut_crash_rate(), "cut_crash_rate"},
                                                  {r.move_crash_rate(), "move_crash_rate"}};
  for (const auto& [v, field] : rates) {
    f.Require(v >= 0 && v <= 1, {"readers", field},
              absl::StrCat("readers.", field, " is ", v, "; expected a probability in [0, 1]"));
  }
  if (!s.has_log()) {
    f.Require(r.cut_rate() == 0 && r.move_rate() == 0, {"readers", r.cut_rate() != 0 ? "cut_rate" : "move_rate"},
              "cuts and moves need spans: expected them only with a log { … } broker");
  }
}

void Validate(TextFile& f, const v1::Scenario& s) {
  const auto& w = s.workload();
  f.Require(s.has_workload(), {"workload"}, "expected a workload { … } block");
  f.Require(w.messages() >= 1 && w.messages() <= 100000000, {"workload", "messages"},
            absl::StrCat("workload.messages is ", w.messages(), "; expected 1 ..100000000"));
  CheckMillis(f, w.start_ms(), "workload", "start_ms", false);
  CheckMillis(f, w.publish_interval_ms(), "workload", "publish_interval_ms", true);
  CheckMillis(f, w.max_event_time_skew_ms(), "workload", "max_event_time_skew_ms", false);
  CheckMillis(f, w.idle_gap_ms(), "workload", "idle_gap_ms", false);
  f.Require(w.payload_bytes() <= (1u << 20), {"workload", "payload_bytes"},
            absl::StrCat("workload.payload_bytes is ", w.payload_bytes(), "; expected at most 1048576"));
  if (w.messages() >= 1 && w.publish_interval_ms() >= 1) {
    const double span = static_cast<double>(w.messages()) * static_cast<double>(w.publish_interval_ms());
    f.Require(span <= 1e15, {"workload", "messages"},
              "workload spans more than 1e15 ms of virtual time; expected fewer messages or a "
              "shorter publish_interval_ms");
  }
  if (s.has_log()) {
    ValidateLog(f, s.log());
  } else {
    const auto& b = s.broker();
    CheckMillis(f, b.lease_ms(), "broker", "lease_ms", false);
    CheckMillis(f, b.redelivery_horizon_ms(), "broker", "redelivery_horizon_ms", false);
  }
  ValidateFaults(f, s.faults());
  ValidateProfile(f, s.profile(), /*in_scenario=*/true);
  if (s.has_readers()) ValidateReaders(f, s);
  const auto& r = s.runtime();
  CheckMillis(f, r.checkpoint_interval_ms(), "runtime", "checkpoint_interval_ms", false);
  CheckMillis(f, r.drain_bound_ms(), "runtime", "drain_bound_ms", false);
  CheckMillis(f, r.call_timeout_wall_ms(), "runtime", "call_timeout_wall_ms", false);
  CheckMillis(f, r.start_timeout_wall_ms(), "runtime", "start_timeout_wall_ms", false);
  CheckMillis(f, r.max_same_time_wall_ms(), "runtime", "max_same_time_wall_ms", false);
  f.Require(r.max_same_time_steps() <= 100000000, {"runtime", "max_same_time_steps"},
            absl::StrCat("runtime.max_same_time_steps is ", r.max_same_time_steps(), "; expected 1 ..100000000"));
}

void FillDefaults(v1::Scenario& s) {
  if (s.has_log()) {
    auto* l = s.mutable_log();
    if (l->keys() == 0) l->set_keys(64);
    if (l->max_read() == 0) l->set_max_read(64);
    if (l->max_wait_ms() == 0) l->set_max_wait_ms(1000);
    if (l->broker_restart_ms() == 0) l->set_broker_restart_ms(500);
  } else {
    auto* b = s.mutable_broker();
    if (b->lease_ms() == 0) b->set_lease_ms(30000);
    if (b->max_pull() == 0) b->set_max_pull(1000);
    if (b->redelivery_horizon_ms() == 0) b->set_redelivery_horizon_ms(60000);
  }
  auto* r = s.mutable_runtime();
  if (r->checkpoint_interval_ms() == 0) r->set_checkpoint_interval_ms(1000);
  if (r->drain_bound_ms() == 0) r->set_drain_bound_ms(600000);
  if (r->call_timeout_wall_ms() == 0) r->set_call_timeout_wall_ms(10000);
  if (r->start_timeout_wall_ms() == 0) r->set_start_timeout_wall_ms(10000);
  if (r->max_same_time_steps() == 0) r->set_max_same_time_steps(kDefaultMaxSameTimeSteps);
  if (r->max_same_time_wall_ms() == 0) r->set_max_same_time_wall_ms(kDefaultMaxSameTimeWallMs);
  auto* w = s.mutable_workload();
  if (w->payload_bytes() == 0) w->set_payload_bytes(32);
}

absl::StatusOr<v1::Scenario> Finish(TextFile& f, v1::Scenario s) {
  Validate(f, s);
  if (absl::Status st = f.status(); !st.ok()) return st;
  FillDefaults(s);
  return s;
}

}  // namespace

absl::StatusOr<v1::Scenario> LoadScenario(const std::string& path) {
  TextFile f(path);
  v1::Scenario s;
  if (absl::Status st = f.Parse(&s); !st.ok()) return st;
  return Finish(f, std::move(s));
}

absl::StatusOr<v1::Scenario> ParseScenario(const std::string& path, std::string_view text) {
  TextFile f(path);
  v1::Scenario s;
  if (absl::Status st = f.ParseText(text, &s); !st.ok()) return st;
  return Finish(f, std::move(s));
}

std::string FormatScenario(const v1::Scenario& scenario, const std::string& comment) {
  std::string out;
  for (absl::string_view line : absl::StrSplit(comment, '\n')) absl::StrAppend(&out, "# ", line, "\n");
  std::string body;
  google::protobuf::TextFormat::PrintToString(scenario, &body);
  return out + body;
}

}  // namespace weir
