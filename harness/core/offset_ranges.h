// File: offset_ranges.h
//
// A set of offsets (unsigned 64-bit) kept as disjoint, non-adjacent half-open
// ranges [start, end). A reader that commits a partition in order keeps one
// range however many offsets it holds, so memory grows with the holes, never
// with the offsets.
//
// Invariants: ranges are disjoint and never touch (adjacent ones are merged);
// size() is the number of offsets held.
//
// Thread safety: none.
//
// Example:
//   OffsetRanges r;
//   r.Insert(0, 10);      // [0, 10)
//   r.Insert(12);         // [0, 10) [12, 13)
//   r.Covers(0, 10);      // true
//   r.FirstMissing(0);    // 10
#pragma once

#include <cstdint>
#include <iterator>
#include <map>
#include <utility>
#include <vector>

namespace weir {

class OffsetRanges {
 public:
  // Adds [from, to). Returns how many of those offsets were held already.
  std::uint64_t Insert(std::uint64_t from, std::uint64_t to);
  // Adds one offset; false when it was held already.
  bool Insert(std::uint64_t offset) { return Insert(offset, offset + 1) == 0; }

  bool Contains(std::uint64_t offset) const;
  // True when every offset of [from, to) is held (from >= to: true).
  bool Covers(std::uint64_t from, std::uint64_t to) const;
  // The least offset >= from that is not held.
  std::uint64_t FirstMissing(std::uint64_t from) const;
  // The ranges of [from, to) that are not held, in order.
  std::vector<std::pair<std::uint64_t, std::uint64_t>> Missing(std::uint64_t from, std::uint64_t to) const;
  // Offsets held in [from, to).
  std::uint64_t CountIn(std::uint64_t from, std::uint64_t to) const;

  // The ranges held, as start -> end (exclusive), in order.
  const std::map<std::uint64_t, std::uint64_t>& by_start() const { return ranges_; }

  // One past the largest offset held (0 when empty).
  std::uint64_t end() const { return ranges_.empty() ? 0 : std::prev(ranges_.end())->second; }

  std::uint64_t size() const { return size_; }
  std::size_t ranges() const { return ranges_.size(); }
  bool empty() const { return size_ == 0; }

 private:
  std::map<std::uint64_t, std::uint64_t> ranges_;  // start -> end
  std::uint64_t size_ = 0;
};

}  // namespace weir
