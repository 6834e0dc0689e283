// File: buoy_source.h
//
// A source connector for a fleet of weather buoys: each buoy reports wave
// height and water temperature through a queue, and the pipeline wants every
// report exactly once, with an event-time watermark. It is the example of a
// connector kept in its own repository that uses weir only as installed
// (find_package(weir CONFIG)); see README.md beside it.
//
// Correctness, in weir's terms:
//   - a report's message is acked only after the commit notice of the epoch
//     holding its record (never ack-before-commit);
//   - the ids of messages with a record go into the checkpoint, so a message
//     redelivered after a restart or a lost ack gets no second record;
//   - the watermark follows the largest event time seen, is restored from the
//     checkpoint, and moves to now - kIdleLagNs once nothing has arrived for
//     kIdleTimeoutNs;
//   - a throttled or failed pull or ack waits (retry-after, then backoff with
//     jitter seeded from the incarnation) before the same call again.
//
// BuoyBugs switches one classic mistake on, so the tests can show that weir
// catches it.
#pragma once

#include <cstdint>
#include <map>
#include <optional>
#include <set>
#include <string>
#include <vector>

#include "weir/adapter/backoff.h"
#include "weir/adapter/source.h"

namespace buoys {

struct BuoyBugs {
  bool ack_on_pull = false;  // acks as soon as a report arrives: ack-before-commit
};

class BuoySource : public weir::adapter::Source {
 public:
  static constexpr std::int64_t kSecondNs = 1'000'000'000;
  static constexpr std::int64_t kIdlePollNs = kSecondNs / 2;
  static constexpr std::int64_t kIdleTimeoutNs = 10 * kSecondNs;
  static constexpr std::int64_t kIdleLagNs = 5 * kSecondNs;

  explicit BuoySource(BuoyBugs bugs = {}) : bugs_(bugs) {}

  grpc::Status Open(const weir::adapter::OpenInfo& info, weir::adapter::Context& ctx) override;
  void Advance(weir::adapter::Context& ctx) override;
  std::string Checkpoint(std::uint64_t checkpoint_id, weir::adapter::Context& ctx) override;
  void Committed(std::uint64_t checkpoint_id, weir::adapter::Context& ctx) override;

 private:
  void FlushAcks(weir::adapter::Context& ctx);

  BuoyBugs bugs_;
  std::optional<std::int64_t> watermark_;
  std::int64_t last_input_ns_ = 0;
  std::optional<weir::adapter::RetryGate> pull_gate_;
  std::optional<weir::adapter::RetryGate> ack_gate_;
  std::set<std::uint64_t> emitted_;                              // message ids with a record
  std::vector<std::uint64_t> epoch_;                             // receipts of the open epoch
  std::map<std::uint64_t, std::vector<std::uint64_t>> pending_;  // checkpoint -> receipts
  std::vector<std::uint64_t> to_ack_;                            // receipts whose records are committed
};

}  // namespace buoys
