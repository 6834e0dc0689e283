#include "harness/oracle/verdict.h"

#include <algorithm>
#include <tuple>

#include "absl/strings/str_cat.h"

namespace weir {

namespace {

std::tuple<std::uint64_t, std::uint64_t, int> CauseKey(const Violation& v) {
  return {v.cause_seq, v.detected_seq, static_cast<int>(v.invariant)};
}

}  // namespace

std::vector<const Violation*> ViolationsByCause(const Verdict& verdict) {
  std::vector<const Violation*> out;
  for (const InvariantResult& r : verdict.results) {
    if (!r.checked) continue;
    for (const Violation& v : r.first) out.push_back(&v);
  }
  std::stable_sort(out.begin(), out.end(),
                   [](const Violation* a, const Violation* b) { return CauseKey(*a) < CauseKey(*b); });
  return out;
}

std::vector<Invariant> FailedByCause(const Verdict& verdict) {
  std::vector<std::pair<std::tuple<std::uint64_t, std::uint64_t, int>, Invariant>> keyed;
  for (int i = 0; i < kInvariantCount; ++i) {
    const InvariantResult& r = verdict.results[i];
    if (!r.checked || r.violations == 0) continue;
    auto key = std::make_tuple(~std::uint64_t{0}, ~std::uint64_t{0}, i);
    for (const Violation& v : r.first) key = std::min(key, CauseKey(v));
    keyed.emplace_back(key, static_cast<Invariant>(i));
  }
  std::sort(keyed.begin(), keyed.end());
  std::vector<Invariant> out;
  for (const auto& [key, inv] : keyed) out.push_back(inv);
  return out;
}

const char* InvariantName(Invariant invariant) {
  switch (invariant) {
    case Invariant::kAckBeforeCommit: return "ack-before-commit";
    case Invariant::kLostMessage: return "lost-message";
    case Invariant::kDuplicateOutput: return "duplicate-output";
    case Invariant::kWatermarkRegression: return "watermark-regression";
    case Invariant::kWatermarkStall: return "watermark-stall";
    case Invariant::kLateRecord: return "late-record";
    case Invariant::kBadCheckpoint: return "bad-checkpoint";
    case Invariant::kStepTimeout: return "step-timeout";
    case Invariant::kUnexpectedExit: return "unexpected-exit";
    case Invariant::kProtocolError: return "protocol-error";
    case Invariant::kThrottleViolation: return "throttle-violation";
    case Invariant::kRetryStorm: return "retry-storm";
    case Invariant::kOffsetGap: return "offset-gap";
    case Invariant::kPositionBeforeCommit: return "position-before-commit";
    case Invariant::kResumeExact: return "resume-exact";
    case Invariant::kSilentSkip: return "silent-skip";
    case Invariant::kNewPartition: return "new-partition";
    case Invariant::kRecordOutsideSpan: return "record-outside-span";
    case Invariant::kDoubleHolding: return "double-holding";
    case Invariant::kCutConservation: return "cut-conservation";
    case Invariant::kCheckpointCoverage: return "checkpoint-coverage";
    case Invariant::kConnectorError: return "connector-error";
    case Invariant::kWatermarkAhead: return "watermark-ahead";
    case Invariant::kLivelock: return "livelock";
    case Invariant::kCount: break;
  }
  return "unknown";
}

std::string InvariantNames(const std::vector<Invariant>& invariants) {
  std::string out;
  for (Invariant i : invariants) absl::StrAppend(&out, out.empty() ? "" : ", ", InvariantName(i));
  return out.empty() ? "none" : out;
}

const char* InvariantRule(Invariant invariant) {
  switch (invariant) {
    case Invariant::kAckBeforeCommit:
      return "The broker must not receive an ack for a message before some record of it is in a "
             "committed epoch.";
    case Invariant::kLostMessage:
      return "Every published message must have a record in the committed output by the end of "
             "the run.";
    case Invariant::kDuplicateOutput:
      return "Under exactly-once, no message may have more than one record in the committed "
             "output.";
    case Invariant::kWatermarkRegression:
      return "A watermark must never be lower than one reported before it in the same "
             "incarnation, nor than the watermark committed with the checkpoint it was restored "
             "from.";
    case Invariant::kWatermarkStall:
      return "Once the source has been idle (the broker has nothing deliverable and every message "
             "delivered to the incarnation has a record) longer than the profile's idle timeout, "
             "the watermark at the end of each step must be at most the profile's idle lag behind "
             "virtual now.";
    case Invariant::kLateRecord:
      return "Under a bounded-lateness profile, a record's event time must not be further below "
             "the last watermark reported before the step that emitted it than the profile's "
             "allowed lateness (late records are counted under every profile); for a message that "
             "came back from an incarnation that died, only the lateness added after it came back "
             "counts (forced late records are counted, not failed), unless the dead incarnation "
             "itself moved its watermark past the message while holding it.";
    case Invariant::kBadCheckpoint: return "Opening the connector from a committed checkpoint must succeed.";
    case Invariant::kStepTimeout: return "Every connector call must answer within the wall-clock bound.";
    case Invariant::kUnexpectedExit: return "The connector process must not end unless weir kills it at a crash point.";
    case Invariant::kProtocolError:
      return "Every connector answer and broker call must be well-formed and refer only to "
             "messages delivered to the same incarnation, receipts the broker issued, and times "
             "within 100 years of virtual now.";
    case Invariant::kThrottleViolation:
      return "After the broker throttles a call, the connector must not call that same method "
             "again before the retry-after has passed (other methods, such as acks, may keep "
             "flowing).";
    case Invariant::kRetryStorm:
      return "After a transient broker failure of a method, the connector's next call of that "
             "method must come no sooner than the profile's minimum backoff.";
    case Invariant::kOffsetGap:
      return "Log: every offset appended to a partition must have a record in the committed "
             "output by the end of the run, except offsets retention deleted before any read and "
             "before a committed resume point passed them (counted as deleted unread) and, when "
             "the profile allows gaps, offsets the connector reported as a gap.";
    case Invariant::kPositionBeforeCommit:
      return "Log: a bookmark saved at the broker must not be beyond the resume point of its "
             "partition in the last committed checkpoint.";
    case Invariant::kResumeExact:
      return "Log: after Open, the first read of each held partition must start exactly at the "
             "resume point Open gave it (a skip always fails; a rewind fails under exactly-once).";
    case Invariant::kSilentSkip:
      return "Log: a reader that moves past offsets retention deleted must report them as a gap "
             "before it emits the records after them.";
    case Invariant::kNewPartition: return "Log: a partition added during the run must be read.";
    case Invariant::kConnectorError:
      return "The connector must not answer a call with an error status of its own (an exception "
             "in its code, a request it refuses); a failed Open from a committed checkpoint is "
             "bad-checkpoint instead.";
    case Invariant::kWatermarkAhead:
      return "A reported watermark must not be later than virtual now plus the profile's "
             "max_watermark_lead_ms (default 0): every message is published with an event time "
             "at or before its publish time, so a watermark past now declares data that can still "
             "come late.";
    case Invariant::kLivelock:
      return "The connector must let virtual time move: no more than the scenario's "
             "runtime.max_same_time_steps steps in a row (default 1,000) may ask to be called again "
             "at the virtual time they began, nor may such steps go on for more than "
             "runtime.max_same_time_wall_ms of wall time (default 10,000).";
    case Invariant::kRecordOutsideSpan:
      return "Many readers: every record a reader emits lies in a span it holds at that moment "
             "(assigned to it, not revoked, not cut away).";
    case Invariant::kDoubleHolding: return "Many readers: no offset is held by two live readers at the same moment.";
    case Invariant::kCutConservation:
      return "Many readers: a cut's head and tail are disjoint, together are exactly the span that "
             "was cut, and the head holds every offset the reader had already emitted from it.";
    case Invariant::kCheckpointCoverage:
      return "Many readers: a reader's checkpoint names a resume point for every span it holds, "
             "including spans received since its last checkpoint, and for no other partition; "
             "each resume point lies within its span.";
    case Invariant::kCount: break;
  }
  return "";
}

const char* InvariantChance(Invariant invariant) {
  switch (invariant) {
    case Invariant::kAckBeforeCommit:
      return "a crash or a failed commit while records of delivered messages were emitted but not "
             "yet committed";
    case Invariant::kLostMessage:
      return "a crash, a failed commit, a nack or an expired lease while messages were in flight";
    case Invariant::kDuplicateOutput: return "a redelivery, or a restore or span move after some output was committed";
    case Invariant::kWatermarkRegression: return "a restore from a checkpoint, or a reader joining or leaving";
    case Invariant::kWatermarkStall:
      return "a step after the source (or a partition) had been idle longer than the idle timeout";
    case Invariant::kLateRecord:
      return "a message published (or a record appended) with an event time below one published "
             "before it, held back by a visibility delay, handed out out of order, or redelivered";
    case Invariant::kBadCheckpoint: return "an Open from a committed checkpoint";
    case Invariant::kStepTimeout:
    case Invariant::kUnexpectedExit:
    case Invariant::kProtocolError:
    case Invariant::kConnectorError:
    case Invariant::kLivelock: return "a step";
    case Invariant::kThrottleViolation: return "a throttled call followed by another call of the same method";
    case Invariant::kRetryStorm: return "a transient broker failure followed by another call of the same method";
    case Invariant::kOffsetGap: return "a restore, a span moved or cut, or a read below the first retained offset";
    case Invariant::kPositionBeforeCommit: return "a bookmark saved at the broker";
    case Invariant::kResumeExact: return "a restore or a span assigned with a resume point";
    case Invariant::kSilentSkip:
      return "a read below the first retained offset (retention deleted what the reader wanted)";
    case Invariant::kNewPartition: return "a partition added during the run";
    case Invariant::kWatermarkAhead: return "a step that reported a watermark";
    case Invariant::kRecordOutsideSpan: return "a span revoked or cut";
    case Invariant::kDoubleHolding: return "a span assigned, cut, or a reader joining or leaving";
    case Invariant::kCutConservation: return "a cut";
    case Invariant::kCheckpointCoverage: return "a checkpoint after the readers' spans changed";
    case Invariant::kCount: break;
  }
  return "";
}

const char* InvariantExercisedBy(Invariant invariant) {
  switch (invariant) {
    case Invariant::kAckBeforeCommit:
    case Invariant::kLostMessage:
    case Invariant::kWatermarkRegression:
    case Invariant::kBadCheckpoint:
      return "queue scenarios with crashes or commit failures (crash_storm_weather_buoys, "
             "commit_failures_cold_chain)";
    case Invariant::kDuplicateOutput:
      return "scenarios with redelivery or crashes after commits, under exactly-once "
             "(heavy_redelivery_bike_docks, crash_storm_weather_buoys)";
    case Invariant::kWatermarkStall:
      return "idle scenarios under a profile with idle_timeout_ms (idle_watermark_beehive_scales, "
             "idle_delayed_pings_avalanche_beacons, log_idle_partitions_snow_pillows)";
    case Invariant::kLateRecord:
      return "out-of-order or held-back messages under a BOUNDED_LATENESS profile "
             "(idle_delayed_pings_avalanche_beacons, log_hot_partition_rail_axle_counters)";
    case Invariant::kStepTimeout:
    case Invariant::kUnexpectedExit:
    case Invariant::kProtocolError:
    case Invariant::kConnectorError:
    case Invariant::kLivelock:
    case Invariant::kWatermarkAhead:
      return "any scenario whose connector steps and reports a watermark (steady_parcel_scanners)";
    case Invariant::kThrottleViolation: return "scenarios with broker throttling (throttle_storm_toll_gantries)";
    case Invariant::kRetryStorm:
      return "scenarios with transient broker failures under a profile with min_backoff_ms "
             "(flaky_network_vineyard_probes, log_partition_outage_lighthouse_beacons)";
    case Invariant::kOffsetGap:
    case Invariant::kResumeExact: return "log scenarios with crashes (log_bookmark_crash_storm_seismographs)";
    case Invariant::kPositionBeforeCommit:
      return "log scenarios whose connector saves bookmarks (log_steady_river_gauges)";
    case Invariant::kSilentSkip:
      return "log scenarios where retention outruns the reader (log_retention_race_pollen_traps)";
    case Invariant::kNewPartition: return "log scenarios with partition growth (log_partition_growth_wind_turbines)";
    case Invariant::kRecordOutsideSpan:
    case Invariant::kCutConservation: return "many-reader scenarios with cuts (readers_frequent_cuts_seismographs)";
    case Invariant::kDoubleHolding:
    case Invariant::kCheckpointCoverage: return "many-reader scenarios with moves (readers_hot_rebalance_wind_farms)";
    case Invariant::kCount: break;
  }
  return "";
}

}  // namespace weir
