// File: commit_store.h
//
// The runtime's durable side: the last committed checkpoint (id, connector
// state, the watermark committed with it and, in the log shape, the resume
// points the connector returned with it) and which records are in the
// committed output, by RecordKey (harness/core/record_key.h).
//
// Memory: one bit per message id (queue keys); per log partition, the
// committed offsets as ranges (one range for a partition committed in order).
//
// Thread safety: none.
#pragma once

#include <cstdint>
#include <map>
#include <optional>
#include <string>
#include <vector>

#include "harness/broker/broker_model.h"
#include "harness/core/offset_ranges.h"
#include "harness/core/record_key.h"
#include "harness/core/virtual_time.h"

namespace weir {

struct ResumePoint {
  std::uint32_t partition = 0;
  std::uint64_t next_offset = 0;
};

struct CommittedCheckpoint {
  std::uint64_t id = 0;
  std::string state;
  std::optional<VirtualTime> watermark;
  std::vector<ResumePoint> resume_points;  // log shape; sorted by partition
};

class CommitStore final : public CommittedView {
 public:
  // Commits an epoch's records (by key) together with its checkpoint.
  void Commit(CommittedCheckpoint checkpoint, const std::vector<RecordKey>& epoch);

  const std::optional<CommittedCheckpoint>& latest() const { return latest_; }
  bool IsCommitted(RecordKey key) const;
  // Distinct keys with at least one committed record.
  std::uint64_t committed_messages() const { return distinct_; }
  // Committed records beyond the first for their key.
  std::uint64_t duplicate_records() const { return duplicates_; }

  std::uint64_t distinct() const override { return distinct_; }
  // For log keys of one partition; queue keys are checked one by one.
  bool Covers(RecordKey from, RecordKey to) const override;

 private:
  std::optional<CommittedCheckpoint> latest_;
  std::vector<bool> committed_;                       // queue: by message id
  std::map<std::uint32_t, OffsetRanges> partitions_;  // log: by partition
  std::uint64_t distinct_ = 0;
  std::uint64_t duplicates_ = 0;
};

}  // namespace weir
