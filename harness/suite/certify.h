// File: certify.h
//
// Runs a suite: every (scenario, seed) pair of this shard, several at a time,
// each with its own broker server, connector process and sockets. Produces a
// SuiteResult: the report's head with the per-invariant summary, the tally,
// and the runs in pair order (whatever order they finished in) in a RunLog on
// disk. Stops launching new runs after `max_failures` failed runs, or when
// `stop` becomes true (a signal); the report then says why and is marked
// incomplete. On `stop` the runs in progress are abandoned too (connectors
// killed and reaped) and left out of the report.
//
// Memory: a finished run's record waits in memory only until every run before
// it in pair order has finished (with --jobs N, what finished while the oldest
// unfinished run was still going); then it goes to the RunLog and into the
// tally. So memory stays flat however many runs the suite has.
//
// Sharding: pair i (scenario-major, then seed) belongs to shard i % count.
//
// Determinism recheck (recheck.h): a run in the sample, and with any rule
// but none every run that failed an invariant, is run a second time right
// after the first, with the same spec; when the two trace digests differ the
// run fails as "nondeterministic" (kNondeterministicOutcome, added to its
// failed_invariants), its record naming both digests and, when both traces
// were written (first_failures or scratch_dir), the first differing event as
// `weir replay` finds it. A run that had passed gets that as its first
// violation; one that failed an invariant keeps its own.
//
// Thread safety: Certify() blocks; `progress` is called from worker threads
// under an internal lock.
#pragma once

#include <atomic>
#include <cstdint>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "harness/edge/grpc_run.h"
#include "harness/edge/replay_line.h"
#include "harness/suite/first_failures.h"
#include "harness/suite/recheck.h"
#include "harness/suite/run_log.h"
#include "harness/suite/suite_file.h"
#include "harness/suite/suite_tally.h"
#include "weir/v1/suite.pb.h"

namespace weir {

struct ShardSpec {
  std::uint32_t index = 0;
  std::uint32_t count = 1;
};

struct CertifyOptions {
  std::vector<std::string> connector_argv;
  std::string connector_sha256;  // of the binary argv[0] resolves to
  unsigned jobs = 1;
  std::uint64_t max_failures = 0;  // 0: no limit
  ShardSpec shard;
  Transport transport = Transport::kTcp;
  // Overrides every scenario's profile, and the suite's. Unset: the suite's
  // profile when it names one (LoadedSuite::profile), else each scenario's.
  std::optional<v1::Profile> profile;
  std::string profile_path;  // for replay lines and the report
  const std::atomic<bool>* stop = nullptr;
  // Runs one pair; default RunOverGrpc. An in-process host passes its own.
  std::function<absl::StatusOr<RunOutput>(const RunSpec&)> runner;
  // Given: every run writes its trace there, and the first failing run of
  // each invariant keeps it (for the HTML report). Not owned.
  FirstFailureTraces* first_failures = nullptr;
  struct Progress {
    std::uint64_t done = 0;
    std::uint64_t total = 0;
    std::uint64_t failed = 0;
  };
  std::function<void(const Progress&, const v1::RunRecord&)> progress;
  // Unset: no recheck, and the report's `recheck` stays empty.
  std::optional<RecheckSample> recheck;
  // A directory (owned by the caller) where runs write their traces for the
  // recheck to compare when first_failures is not given; empty: the
  // recheck compares digests only.
  std::string scratch_dir;
  // SHA-256 of the weir binary, for the report and the certificate.
  std::string weir_sha256;
};

// The name a diverged recheck adds to a run's failed_invariants.
inline constexpr char kNondeterministicOutcome[] = "nondeterministic";

// A finished suite: the parts of its report (see suite_reports.h).
struct SuiteResult {
  // Every SuiteReport field but `runs`; `invariants` summarized from the tally.
  v1::SuiteReport head;
  SuiteTally tally;
  // The runs in pair order; finished (readable). Never null.
  std::unique_ptr<RunLog> runs;
};

// Errors are harness faults that leave no usable report: the run log could
// not be created or written (then the runs in progress are finished, no new
// one is started). Per-run harness faults are recorded in the run's
// harness_error.
[[nodiscard]] absl::StatusOr<SuiteResult> Certify(const LoadedSuite& suite, const CertifyOptions& options);

// The whole report in memory: the head plus every run, read back from the
// log. For small suites and tests; a large suite's reports are written from
// the log (suite_reports.h). Error: the log could not be read.
[[nodiscard]] absl::StatusOr<v1::SuiteReport> LoadReport(const SuiteResult& result);

}  // namespace weir
