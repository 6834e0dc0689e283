// File: event_queue.h
//
// The discrete-event queue of a run: events ordered by virtual time, then by
// rank (lower first; 0 unless given), then in the order they were pushed
// (FIFO), so a run never depends on heap layout.
//
// Example:
//   EventQueue<Kind> q;
//   q.Push(Millis(5), Kind::kStep);
//   auto [t, kind] = q.Pop();
//
// Thread safety: none; one simulation thread owns a queue.
#pragma once

#include <cstdint>
#include <queue>
#include <utility>
#include <vector>

#include "harness/core/virtual_time.h"

namespace weir {

template <typename Payload>
class EventQueue {
 public:
  struct Entry {
    VirtualTime time;
    Payload payload;
  };

  void Push(VirtualTime time, Payload payload, std::uint64_t rank = 0) {
    heap_.push(Item{time, rank, next_seq_++, std::move(payload)});
  }
  bool empty() const { return heap_.empty(); }
  std::size_t size() const { return heap_.size(); }
  // REQUIRES: !empty().
  VirtualTime NextTime() const { return heap_.top().time; }
  // REQUIRES: !empty(). Removes and returns the earliest event.
  Entry Pop() {
    Item top = heap_.top();
    heap_.pop();
    return Entry{top.time, std::move(top.payload)};
  }
  void Clear() { heap_ = {}; }

 private:
  struct Item {
    VirtualTime time;
    std::uint64_t rank;
    std::uint64_t seq;
    Payload payload;
  };
  struct Later {
    bool operator()(const Item& a, const Item& b) const {
      if (a.time != b.time) return a.time > b.time;
      if (a.rank != b.rank) return a.rank > b.rank;
      return a.seq > b.seq;
    }
  };
  std::priority_queue<Item, std::vector<Item>, Later> heap_;
  std::uint64_t next_seq_ = 0;
};

}  // namespace weir
