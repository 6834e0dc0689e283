// File: verdict.h
//
// What the oracle concludes about one run: for every invariant, held or failed,
// how often, and the first few violations with the trace events that prove
// them. Plain values; no I/O.
#pragma once

#include <array>
#include <cstdint>
#include <map>
#include <string>
#include <vector>

#include "harness/core/virtual_time.h"

namespace weir {

enum class Invariant : int {
  kAckBeforeCommit,
  kLostMessage,
  kDuplicateOutput,
  kWatermarkRegression,
  kWatermarkStall,
  kLateRecord,
  kBadCheckpoint,
  kStepTimeout,
  kUnexpectedExit,
  kProtocolError,
  kThrottleViolation,
  kRetryStorm,
  // Log shape.
  kOffsetGap,
  kPositionBeforeCommit,
  kResumeExact,
  kSilentSkip,
  kNewPartition,
  kConnectorError,
  kWatermarkAhead,
  kLivelock,
  // Many readers (log shape).
  kRecordOutsideSpan,
  kDoubleHolding,
  kCutConservation,
  kCheckpointCoverage,
  kCount,  // not an invariant
};

inline constexpr int kInvariantCount = static_cast<int>(Invariant::kCount);

// "ack-before-commit", …: the name used in reports, flags and files.
const char* InvariantName(Invariant invariant);
// "lost-message, duplicate-output": names joined in the order given; "none"
// for no invariant.
std::string InvariantNames(const std::vector<Invariant>& invariants);
// The rule in one sentence, as the docs state it.
const char* InvariantRule(Invariant invariant);

// One trace event cited as proof.
struct Evidence {
  std::uint64_t seq = 0;
  VirtualTime t = 0;
  std::uint64_t incarnation = 0;
  std::string what;  // with several readers, begins "reader N: "
};

struct Violation {
  Invariant invariant = Invariant::kCount;
  std::string sentence;  // what went wrong in this run, in one sentence
  std::vector<Evidence> evidence;
  // The event that started it (a lost message: the connector's failure, or
  // the step that answered "finished", else the end of the run) and the one
  // at which the oracle saw it. Reports order violations by (cause, detected).
  std::uint64_t cause_seq = 0;
  std::uint64_t detected_seq = 0;
};

struct InvariantResult {
  bool checked = true;  // false when the profile does not claim it
  bool applies = true;  // false when the run's broker shape has no such thing
  // How many distinct causes failed it: a repeat of a cause already counted
  // (a regressed watermark still below its high mark at the next step, the
  // next call during the same throttle misuse) is an echo, not a violation.
  std::uint64_t violations = 0;
  std::uint64_t echoes = 0;
  std::vector<Violation> first;  // the first few, in trace order
  // Coverage: how many situations arose in which this rule could have failed
  // (its "chances", docs/coverage.md), e.g. a throttled call followed by
  // another call of the same method. A judged rule with no chance and no
  // violation was not exercised: "held" would overstate it.
  std::uint64_t chances = 0;

  bool judged() const { return checked && applies; }
  bool exercised() const { return chances > 0 || violations > 0; }
};

struct Verdict {
  std::array<InvariantResult, kInvariantCount> results;
  // Figures that are not pass/fail.
  std::uint64_t duplicate_records = 0;  // committed records beyond the first per message
  // Records whose event time is below the last watermark reported before their
  // step (counted under every profile; failing only under BOUNDED_LATENESS).
  std::uint64_t late_records = 0;
  // Late records beyond the allowed lateness that late-record excused as
  // forced by a crash: their message came back to this incarnation from a
  // dead one after this incarnation's watermark had moved on (oracle.h).
  std::uint64_t forced_late_records = 0;
  std::uint64_t events = 0;
  // Log shape: offsets retention deleted before any read or commit (never a
  // failure), offsets the connector reported as gaps, and rewinds at a
  // resume point counted under at-least-once.
  std::uint64_t deleted_unread = 0;
  std::uint64_t gap_offsets = 0;
  std::uint64_t rewinds = 0;
  // Coverage: fault decisions that took effect, by FaultKey() ("crash at
  // IN_NOTICE", "throttle at PULL", …).
  std::map<std::string, std::uint64_t> faults_applied;

  bool passed() const {
    for (const auto& r : results) {
      if (r.checked && r.violations > 0) return false;
    }
    return true;
  }
  const InvariantResult& at(Invariant i) const { return results[static_cast<int>(i)]; }
  InvariantResult& at(Invariant i) { return results[static_cast<int>(i)]; }
};

// What a rule's chances are, in one phrase ("a throttled call followed by
// another call of the same method"), and which kind of scenario gives it
// some: what a report says of a rule that was not exercised.
const char* InvariantChance(Invariant invariant);
const char* InvariantExercisedBy(Invariant invariant);

// The invariants that failed (checked, violations > 0), the one whose kept
// violation has the earliest cause first (ties: detected earlier, then table
// order): a connector's failure comes before the messages it then lost.
std::vector<Invariant> FailedByCause(const Verdict& verdict);

// Every kept violation, ordered by (cause, detected, table order).
std::vector<const Violation*> ViolationsByCause(const Verdict& verdict);

}  // namespace weir
