#include "harness/runtime/commit_store.h"

namespace weir {

void CommitStore::Commit(CommittedCheckpoint checkpoint,
                         const std::vector<std::uint64_t>& epoch_messages) {
  for (std::uint64_t id : epoch_messages) {
    if (id >= committed_.size()) committed_.resize(std::max<std::size_t>(id + 1, committed_.size() * 2));
    if (committed_[id]) {
      ++duplicates_;
    } else {
      committed_[id] = true;
      ++distinct_;
    }
  }
  latest_ = std::move(checkpoint);
}

}  // namespace weir
