#include "harness/scenario/fault_validation.h"

#include <string>

#include "absl/strings/str_cat.h"
#include "google/protobuf/descriptor.h"

namespace weir {
namespace {

// "faults.latency.rate" for ("rate", "latency"). (std::string: this abseil's
// StrCat does not take std::string_view.)
std::string Name(const std::string& field, const std::string& parent) {
  return parent.empty() ? "faults." + field : "faults." + parent + "." + field;
}

void At(TextFile& f, bool ok, const std::string& field, const std::string& parent, const std::string& message) {
  if (parent.empty()) {
    f.Require(ok, {"faults", field}, message);
  } else {
    f.Require(ok, {"faults", parent, field}, message);
  }
}

void Rate(TextFile& f, double v, const std::string& field, const std::string& parent = "") {
  const bool ok = v >= 0 && v <= 1;  // also false for NaN
  At(f, ok, field, parent, absl::StrCat(Name(field, parent), " is ", v, "; expected a probability in [0, 1]"));
}

void Duration(TextFile& f, std::int64_t v, const std::string& field, const std::string& parent = "") {
  At(f, v >= 0, field, parent, absl::StrCat(Name(field, parent), " is ", v, "; expected a duration >= 0"));
}

// What the fault of d is called in a message: "crash at BEFORE_STEP", "lost_ack"…
std::string FaultName(const v1::FaultDecision& d) {
  if (d.fault_case() == v1::FaultDecision::kCrash) {
    return absl::StrCat("crash at ", v1::CrashPoint_Name(d.crash().point()));
  }
  const auto* field = v1::FaultDecision::descriptor()->FindFieldByNumber(d.fault_case());
  return field == nullptr ? "this fault" : field->name();
}

}  // namespace

bool IsBrokerCallSite(v1::Site s) {
  switch (s) {
    case v1::PULL:
    case v1::ACK:
    case v1::NACK:
    case v1::EXTEND_LEASE:
    case v1::LIST_PARTITIONS:
    case v1::READ:
    case v1::SAVE_BOOKMARKS:
    case v1::LOAD_BOOKMARKS: return true;
    default: return false;
  }
}

const char* ExpectedSite(const v1::FaultDecision& d) {
  const v1::Site s = d.site();
  switch (d.fault_case()) {
    case v1::FaultDecision::kLatencyMs:
    case v1::FaultDecision::kThrottleRetryAfterMs:
    case v1::FaultDecision::kTransient:
      return IsBrokerCallSite(s) ? nullptr
                                 : "PULL, ACK, NACK or EXTEND_LEASE (queue), or LIST_PARTITIONS, "
                                   "READ, SAVE_BOOKMARKS or LOAD_BOOKMARKS (log)";
    case v1::FaultDecision::kDuplicate:
    case v1::FaultDecision::kReorder: return s == v1::PULL ? nullptr : "PULL";
    case v1::FaultDecision::kBrokerRestart:
      return s == v1::PULL || s == v1::READ ? nullptr : "PULL (queue) or READ (log)";
    case v1::FaultDecision::kLostAck: return s == v1::ACK ? nullptr : "ACK";
    case v1::FaultDecision::kVisibilityDelayMs:
      return s == v1::PUBLISH || s == v1::APPEND ? nullptr : "PUBLISH (queue) or APPEND (log)";
    case v1::FaultDecision::kPartitionOutageMs:
    case v1::FaultDecision::kEmptyRead: return s == v1::READ ? nullptr : "READ";
    case v1::FaultDecision::kLostBookmark: return s == v1::SAVE_BOOKMARKS ? nullptr : "SAVE_BOOKMARKS";
    case v1::FaultDecision::kCommitFailure:
    case v1::FaultDecision::kMove:
    case v1::FaultDecision::kMembership: return s == v1::CHECKPOINT ? nullptr : "CHECKPOINT";
    case v1::FaultDecision::kCut: return s == v1::STEP ? nullptr : "STEP";
    case v1::FaultDecision::kCrash:
      switch (d.crash().point()) {
        case v1::BEFORE_STEP:
        case v1::IN_STEP_AFTER_BROKER_CALL: return s == v1::STEP ? nullptr : "STEP (a step crash point)";
        case v1::AFTER_CHECKPOINT_BEFORE_COMMIT:
        case v1::AFTER_COMMIT_BEFORE_NOTICE:
        case v1::IN_NOTICE_AFTER_ACK:
        case v1::IN_NOTICE_AFTER_BOOKMARK_SAVE:
          return s == v1::CHECKPOINT ? nullptr : "CHECKPOINT (a checkpoint crash point)";
        case v1::IN_CUT:
        case v1::AFTER_CUT:
        case v1::IN_REVOKE: return "a Cut (IN_CUT, AFTER_CUT) or a Move (IN_REVOKE) decision, not a crash of its own";
        default: return nullptr;  // no crash point: reported at the crash field instead
      }
    case v1::FaultDecision::FAULT_NOT_SET: return nullptr;
  }
  return nullptr;
}

void ValidateFaults(TextFile& f, const v1::FaultConfig& c) {
  const auto& l = c.latency();
  Rate(f, l.rate(), "rate", "latency");
  Rate(f, l.tail_probability(), "tail_probability", "latency");
  Duration(f, l.fixed_ms(), "fixed_ms", "latency");
  Duration(f, l.min_ms(), "min_ms", "latency");
  Duration(f, l.max_ms(), "max_ms", "latency");
  Duration(f, l.mean_ms(), "mean_ms", "latency");
  Duration(f, l.tail_ms(), "tail_ms", "latency");
  f.Require(l.min_ms() <= l.max_ms() || l.distribution() != v1::FaultConfig::UNIFORM, {"faults", "latency", "max_ms"},
            absl::StrCat("faults.latency.min_ms is ", l.min_ms(), " and max_ms is ", l.max_ms(),
                         "; expected min_ms <= max_ms"));

  Rate(f, c.visibility_delay_rate(), "visibility_delay_rate");
  Duration(f, c.max_visibility_delay_ms(), "max_visibility_delay_ms");
  f.Require(c.visibility_delay_rate() <= 0 || c.max_visibility_delay_ms() >= 1, {"faults", "max_visibility_delay_ms"},
            absl::StrCat("faults.max_visibility_delay_ms is ", c.max_visibility_delay_ms(),
                         "; expected at least 1 when visibility_delay_rate is set"));
  Rate(f, c.reorder_rate(), "reorder_rate");
  Rate(f, c.duplicate_rate(), "duplicate_rate");
  Rate(f, c.lost_ack_rate(), "lost_ack_rate");
  Rate(f, c.unavailable_rate(), "unavailable_rate");
  Rate(f, c.deadline_exceeded_rate(), "deadline_exceeded_rate");
  Rate(f, c.broker_restart_rate(), "broker_restart_rate");
  Rate(f, c.commit_failure_rate(), "commit_failure_rate");
  Rate(f, c.crash_rate(), "crash_rate");
  Rate(f, c.checkpoint_crash_rate(), "checkpoint_crash_rate");
  Rate(f, c.partition_outage_rate(), "partition_outage_rate");
  Duration(f, c.max_partition_outage_ms(), "max_partition_outage_ms");
  f.Require(c.partition_outage_rate() <= 0 || c.max_partition_outage_ms() >= 1, {"faults", "max_partition_outage_ms"},
            absl::StrCat("faults.max_partition_outage_ms is ", c.max_partition_outage_ms(),
                         "; expected at least 1 when partition_outage_rate is set"));
  Rate(f, c.empty_read_rate(), "empty_read_rate");
  Rate(f, c.lost_bookmark_rate(), "lost_bookmark_rate");

  if (c.has_token_bucket()) {
    const auto& b = c.token_bucket();
    f.Require(
        b.rate_per_s() > 0, {"faults", "token_bucket", "rate_per_s"},
        absl::StrCat("faults.token_bucket.rate_per_s is ", b.rate_per_s(), "; expected more than 0 tokens per second"));
    f.Require(b.burst() >= 1, {"faults", "token_bucket", "burst"},
              absl::StrCat("faults.token_bucket.burst is ", b.burst(), "; expected at least 1"));
  }

  for (int i = 0; i < c.throttle_windows_size(); ++i) {
    const auto& w = c.throttle_windows(i);
    const std::string at = absl::StrCat("throttle_windows[", i, "]");
    f.Require(w.start_ms() >= 0, {"faults", at},
              absl::StrCat("faults.", at, ".start_ms is ", w.start_ms(), "; expected >= 0"));
    f.Require(w.start_ms() < w.end_ms(), {"faults", at},
              absl::StrCat("faults.", at, " is [", w.start_ms(), ", ", w.end_ms(), ") ms; expected start_ms < end_ms"));
  }

  for (int i = 0; i < c.scripted_size(); ++i) {
    const auto& d = c.scripted(i);
    const std::string at = absl::StrCat("scripted[", i, "]");
    f.Require(d.site() != v1::SITE_UNSPECIFIED, {"faults", at},
              absl::StrCat("faults.", at,
                           ".site is unset; expected PULL, ACK, NACK, EXTEND_LEASE, "
                           "PUBLISH, STEP, CHECKPOINT or a log site (READ…)"));
    f.Require(d.position() >= 1, {"faults", at},
              absl::StrCat("faults.", at, ".position is ", d.position(), "; expected at least 1"));
    f.Require(d.fault_case() != v1::FaultDecision::FAULT_NOT_SET, {"faults", at},
              absl::StrCat("faults.", at, " names no fault; expected one, e.g. latency_ms: 50"));
    f.Require(d.latency_ms() >= 0 && d.throttle_retry_after_ms() >= 0 && d.visibility_delay_ms() >= 0 &&
                  d.partition_outage_ms() >= 0,
              {"faults", at}, absl::StrCat("faults.", at, " has a negative duration; expected >= 0"));
    // A decision at a site its fault cannot apply at would never fire: the
    // run would quietly test less than the file says, so lint rejects it.
    if (d.has_crash()) {
      f.Require(d.crash().point() != v1::CRASH_POINT_UNSPECIFIED, {"faults", at, "crash"},
                absl::StrCat("faults.", at,
                             ".crash names no crash point; expected e.g. "
                             "crash { point: BEFORE_STEP }"));
    }
    if (d.site() != v1::SITE_UNSPECIFIED && d.fault_case() != v1::FaultDecision::FAULT_NOT_SET) {
      const char* expected = ExpectedSite(d);
      f.Require(expected == nullptr, {"faults", at, "site"},
                absl::StrCat("faults.", at, ".site is ", v1::Site_Name(d.site()), " for ", FaultName(d),
                             "; expected site ", expected == nullptr ? "" : expected));
    }
  }
}

}  // namespace weir
