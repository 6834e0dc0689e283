// File: reorder_buffer.h
//
// Puts back in order what finishes out of order. Items are numbered by
// position 0, 1, 2, …; Put(position, item, emit) holds the item until every
// lower position has been put, then hands it, and every waiting item that
// follows it without a gap, to `emit` in position order. A position that has
// nothing to hand on (a run abandoned on a signal) is put as std::nullopt: it
// closes its gap and emits nothing.
//
// Invariants: each position is put exactly once; emit sees present items in
// strictly increasing position order, each once; waiting() is the number of
// items put above the first gap. With N workers taking positions in order,
// that is what finished while the oldest unfinished item was still in work:
// bounded by that window, not by the number of items.
//
// Example (certify, under its lock):
//   ReorderBuffer<v1::RunRecord> order;
//   order.Put(slot, std::move(record), [&](v1::RunRecord r) { log.Append(r); });
//
// Thread safety: none; the caller serializes Put().
#pragma once

#include <cstdint>
#include <map>
#include <optional>
#include <utility>

namespace weir {

template <typename T>
class ReorderBuffer {
 public:
  // REQUIRES: `position` was not put before. `emit(T)` is called on this
  // thread, before Put returns, zero or more times.
  template <typename Emit>
  void Put(std::uint64_t position, std::optional<T> item, Emit&& emit) {
    if (position != next_) {
      waiting_.emplace(position, std::move(item));
      return;
    }
    if (item.has_value()) emit(std::move(*item));
    ++next_;
    for (auto it = waiting_.begin(); it != waiting_.end() && it->first == next_; it = waiting_.erase(it)) {
      if (it->second.has_value()) emit(std::move(*it->second));
      ++next_;
    }
  }

  // The lowest position not yet handed on (every position below it was).
  std::uint64_t next() const { return next_; }
  // Items (and empty positions) waiting for a lower position.
  std::size_t waiting() const { return waiting_.size(); }

 private:
  std::uint64_t next_ = 0;
  std::map<std::uint64_t, std::optional<T>> waiting_;
};

}  // namespace weir
