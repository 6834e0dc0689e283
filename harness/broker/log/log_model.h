// File: log_model.h
//
// The fake broker in the log shape (a BrokerModel, broker_model.h): the
// scenario's workload is appended to partitions, each an append-only sequence
// of records at offsets 0, 1, 2, …; a reader reads from a position; retention
// deletes the oldest records; partitions can be added while the run goes on;
// a reader may store its position per partition (a bookmark). Every change is
// an event in the trace.
//
// Placement (stated in proto/weir/v1/scenario.proto, LogConfig): record k of
// the workload gets key "key-<n>" (n drawn from the seed) or "hot"; it lands in
// partition FNV-1a-32(key) mod (partitions at append time), passing over idle
// partitions, at that partition's next offset. Its event time is the append
// time minus the partition's lag minus the workload's skew draw.
//
// Time: lazy, like the queue model. AdvanceTo(now) applies appends, new
// partitions and retention due at or before now, in time order. Deletions by
// age that happen between two other changes are traced together, one
// retention_deleted per partition touched.
//
// Faults (through FaultSource, keyed by position):
//   - APPEND k: visibility delay: record k, and so every later record of its
//     partition, becomes readable only visibility_delay_ms after its append;
//   - READ k: broker restart (every partition unavailable for the log's
//     broker_restart_ms), partition outage (the partition read unavailable
//     for partition_outage_ms), empty read (nothing answered although records
//     are readable);
//   - SAVE_BOOKMARKS k: lost bookmark (answered OK, nothing stored).
// Latency, throttling and transient errors belong to the BrokerSession.
//
// Read outcomes: kInvalidArgument for a partition that does not exist,
// kUnavailable while the partition is out, kOutOfRange below the first
// retained offset (with it in CallStatus::first_retained_offset) or beyond the
// end, else up to max_records consecutive records. A read at the readable end
// with max_wait_ns waits (moves *now) until a record of the partition becomes
// readable or the wait is over.
//
// Invariants:
//   - per partition, first_retained <= readable_end <= next; the records held
//     are exactly offsets [first_retained, next);
//   - offsets are never reused; retention only moves first_retained up;
//   - memory: the retained records (a few dozen bytes each, payloads are
//     regenerated from the seed) plus O(partitions).
//
// Thread safety: none; the simulation thread owns the model.
#pragma once

#include <cstdint>
#include <deque>
#include <map>
#include <optional>
#include <string>
#include <vector>

#include "harness/broker/broker_endpoint.h"
#include "harness/broker/broker_model.h"
#include "harness/broker/workload.h"
#include "harness/core/virtual_time.h"
#include "harness/faults/fault_source.h"
#include "harness/trace/trace_log.h"
#include "weir/v1/broker.pb.h"
#include "weir/v1/scenario.pb.h"

namespace weir {

// FNV-1a, 32 bits (offset basis 2166136261, prime 16777619): the stated
// placement hash.
std::uint32_t Fnv1a32(std::string_view bytes);

class LogModel final : public BrokerModel {
 public:
  // REQUIRES: scenario.has_log(); scenario, trace and faults outlive the model.
  LogModel(const v1::Scenario& scenario, std::uint64_t seed, TraceLog& trace, FaultSource& faults);

  v1::SourceShape shape() const override { return v1::LOG; }
  void AdvanceTo(VirtualTime now) override;
  bool IdleAt(VirtualTime now) const override;
  std::uint64_t total_messages() const override { return workload_.total(); }
  std::uint64_t published() const override { return appended_; }
  bool all_published() const override;
  VirtualTime last_publish_time() const override { return last_change_time_; }
  // A record must name an existing partition and an offset already appended.
  std::optional<RecordKey> Identify(const v1::Record& record, std::string* why) const override;
  // Every record appended, and every retained one committed.
  bool Drained(const CommittedView& committed) const override;
  void OnIncarnationStart() override;

  // The broker calls. Each REQUIRES: now is not earlier than any earlier call's.
  // `position`: the call's 1-based position among calls of its method.
  void ListPartitions(VirtualTime now, v1::ListPartitionsResponse* response);
  // May move *now forward (a read that waits at the readable end).
  CallStatus Read(const v1::ReadRequest& request, VirtualTime* now, v1::ReadResponse* response, std::uint64_t position);
  CallStatus SaveBookmarks(const v1::SaveBookmarksRequest& request, VirtualTime now, std::uint64_t position);
  void LoadBookmarks(VirtualTime now, v1::LoadBookmarksResponse* response);

  std::uint32_t partition_count() const override { return static_cast<std::uint32_t>(partitions_.size()); }
  std::uint64_t first_retained(std::uint32_t p) const { return partitions_[p].first_retained; }
  std::uint64_t next_offset(std::uint32_t p) const { return partitions_[p].next; }
  std::uint64_t partition_end(std::uint32_t p) const override {
    return p < partitions_.size() ? partitions_[p].next : 0;
  }
  // Records held in every partition (for tests and memory figures).
  std::size_t retained_records() const;

 private:
  struct Rec {
    VirtualTime append_time = 0;
    VirtualTime event_time = 0;
    std::uint64_t seq = 0;  // k: the workload item, for the payload
    std::uint32_t key = 0;  // key index; kHotKey for "hot"
    std::uint32_t crc = 0;  // CRC-32C of the payload
  };
  struct Hidden {
    std::uint64_t offset;
    VirtualTime visible_at;
  };
  struct Partition {
    std::deque<Rec> records;  // offsets [first_retained, next)
    std::uint64_t first_retained = 0;
    std::uint64_t next = 0;
    VirtualDuration lag = 0;  // event-time lag, drawn once
    VirtualTime unavailable_until = 0;
    std::deque<Hidden> hidden;    // delayed records, by offset
    std::uint64_t read_next = 0;  // where the live incarnation's reads got to
    bool idle = false;            // never receives a record
  };
  struct Expiry {
    VirtualTime at;
    std::uint32_t partition;
    std::uint64_t offset;
  };
  static constexpr std::uint32_t kHotKey = 0xffffffffu;

  void AddPartitions(std::uint32_t count, VirtualTime at);
  void Append(const MessageSpec& spec);
  // Deletes the oldest record of p (retention); returns false if none held.
  bool DeleteOldest(std::uint32_t p);
  void TraceRetention(std::uint32_t p, VirtualTime at);
  std::uint64_t ReadableEnd(const Partition& p, VirtualTime now) const;
  // The next time anything can change for partition p (an append, a record of
  // p becoming readable, a new partition), or kNever.
  VirtualTime NextChange(const Partition& p) const;
  std::string KeyBytes(std::uint32_t key) const;
  std::uint32_t Place(std::uint32_t key) const;

  const v1::Scenario& scenario_;
  const v1::LogConfig& config_;
  const std::uint64_t seed_;
  TraceLog& trace_;
  FaultSource& faults_;
  Workload workload_;
  std::vector<Partition> partitions_;
  std::vector<v1::LogConfig::Growth> growth_;  // sorted by time; consumed from the front
  std::size_t next_growth_ = 0;
  std::deque<Expiry> expiries_;  // by age, in append order (= time order)
  std::map<std::uint32_t, std::uint64_t> bookmarks_;
  std::uint64_t appended_ = 0;
  VirtualTime last_change_time_ = 0;
  VirtualTime now_ = 0;  // the latest AdvanceTo
};

}  // namespace weir
