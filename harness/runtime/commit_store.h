// File: commit_store.h
//
// The runtime's durable side: the last committed checkpoint (id, connector
// state, the watermark committed with it) and which messages have a record in
// the committed output. Memory: one bit per message id, nothing per record.
//
// Thread safety: none.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "harness/core/virtual_time.h"

namespace weir {

struct CommittedCheckpoint {
  std::uint64_t id = 0;
  std::string state;
  std::optional<VirtualTime> watermark;
};

class CommitStore {
 public:
  // Commits an epoch's records (by message id) together with its checkpoint.
  void Commit(CommittedCheckpoint checkpoint, const std::vector<std::uint64_t>& epoch_messages);

  const std::optional<CommittedCheckpoint>& latest() const { return latest_; }
  bool IsCommitted(std::uint64_t message_id) const {
    return message_id < committed_.size() && committed_[message_id];
  }
  // Distinct messages with at least one committed record.
  std::uint64_t committed_messages() const { return distinct_; }
  // Committed records beyond the first for their message.
  std::uint64_t duplicate_records() const { return duplicates_; }

 private:
  std::optional<CommittedCheckpoint> latest_;
  std::vector<bool> committed_;
  std::uint64_t distinct_ = 0;
  std::uint64_t duplicates_ = 0;
};

}  // namespace weir
