// File: fault_validation.h
//
// Checks the meaning of a scenario's `faults { … }` block, recording every
// problem on the TextFile at the offending field (file:line:column):
//   - every rate and probability is in [0, 1];
//   - every duration is non-negative; latency min_ms <= max_ms;
//   - a visibility delay rate needs max_visibility_delay_ms >= 1;
//   - a token bucket has rate_per_s > 0 and burst >= 1;
//   - a throttle window has 0 <= start_ms < end_ms;
//   - a scripted decision names a site, a position >= 1 and a fault, at a site
//     where that fault can apply (a step crash point at STEP, a checkpoint
//     crash point at CHECKPOINT, lost_ack at ACK, … as in plan files).
// The scenario loader calls it after parsing; errors are values on the file.
#pragma once

#include "harness/scenario/text_file.h"
#include "weir/v1/faults.pb.h"

namespace weir {

void ValidateFaults(TextFile& f, const v1::FaultConfig& c);

// True for the sites that are broker calls (queue or log).
bool IsBrokerCallSite(v1::Site s);
// nullptr when d's fault can apply at d's site; otherwise the site(s) it
// needs, for a message. The one rule for scenario files and plan files: step
// crash points fire only at STEP, checkpoint crash points only at
// CHECKPOINT, per-call faults at broker call sites, the others at their own.
const char* ExpectedSite(const v1::FaultDecision& d);

}  // namespace weir
