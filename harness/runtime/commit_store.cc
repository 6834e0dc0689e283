#include "harness/runtime/commit_store.h"

#include <algorithm>

namespace weir {

void CommitStore::Commit(CommittedCheckpoint checkpoint, const std::vector<RecordKey>& epoch) {
  for (RecordKey key : epoch) {
    bool fresh = false;
    if (IsLogKey(key)) {
      fresh = partitions_[KeyPartition(key)].Insert(KeyOffset(key));
    } else {
      if (key >= committed_.size()) {
        committed_.resize(std::max<std::size_t>(key + 1, committed_.size() * 2));
      }
      fresh = !committed_[key];
      committed_[key] = true;
    }
    if (fresh) {
      ++distinct_;
    } else {
      ++duplicates_;
    }
  }
  latest_ = std::move(checkpoint);
}

bool CommitStore::IsCommitted(RecordKey key) const {
  if (IsLogKey(key)) {
    auto it = partitions_.find(KeyPartition(key));
    return it != partitions_.end() && it->second.Contains(KeyOffset(key));
  }
  return key < committed_.size() && committed_[key];
}

bool CommitStore::Covers(RecordKey from, RecordKey to) const {
  if (from >= to) return true;
  if (IsLogKey(from)) {
    auto it = partitions_.find(KeyPartition(from));
    if (it == partitions_.end()) return false;
    return it->second.Covers(KeyOffset(from), KeyOffset(to - 1) + 1);
  }
  for (RecordKey k = from; k < to; ++k) {
    if (!IsCommitted(k)) return false;
  }
  return true;
}

}  // namespace weir
