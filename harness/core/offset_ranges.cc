#include "harness/core/offset_ranges.h"

#include <algorithm>

namespace weir {

std::uint64_t OffsetRanges::CountIn(std::uint64_t from, std::uint64_t to) const {
  if (from >= to) return 0;
  std::uint64_t n = 0;
  auto it = ranges_.upper_bound(from);
  if (it != ranges_.begin()) --it;
  for (; it != ranges_.end() && it->first < to; ++it) {
    const std::uint64_t a = std::max(it->first, from);
    const std::uint64_t b = std::min(it->second, to);
    if (a < b) n += b - a;
  }
  return n;
}

std::uint64_t OffsetRanges::Insert(std::uint64_t from, std::uint64_t to) {
  if (from >= to) return 0;
  // The common case, a reader going in order: extend the last range in place.
  if (!ranges_.empty()) {
    auto last = std::prev(ranges_.end());
    if (last->second == from) {
      last->second = to;
      size_ += to - from;
      return 0;
    }
  }
  const std::uint64_t already = CountIn(from, to);
  // Merge every range that overlaps or touches [from, to).
  auto it = ranges_.upper_bound(from);
  if (it != ranges_.begin()) {
    auto prev = std::prev(it);
    if (prev->second >= from) it = prev;
  }
  std::uint64_t start = from;
  std::uint64_t end = to;
  while (it != ranges_.end() && it->first <= end) {
    start = std::min(start, it->first);
    end = std::max(end, it->second);
    it = ranges_.erase(it);
  }
  ranges_.emplace(start, end);
  size_ += (to - from) - already;
  return already;
}

bool OffsetRanges::Contains(std::uint64_t offset) const {
  auto it = ranges_.upper_bound(offset);
  if (it == ranges_.begin()) return false;
  --it;
  return offset < it->second;
}

bool OffsetRanges::Covers(std::uint64_t from, std::uint64_t to) const {
  if (from >= to) return true;
  auto it = ranges_.upper_bound(from);
  if (it == ranges_.begin()) return false;
  --it;
  return it->first <= from && to <= it->second;
}

std::uint64_t OffsetRanges::FirstMissing(std::uint64_t from) const {
  auto it = ranges_.upper_bound(from);
  if (it == ranges_.begin()) return from;
  --it;
  return from < it->second ? it->second : from;
}

std::vector<std::pair<std::uint64_t, std::uint64_t>> OffsetRanges::Missing(std::uint64_t from, std::uint64_t to) const {
  std::vector<std::pair<std::uint64_t, std::uint64_t>> out;
  std::uint64_t at = from;
  while (at < to) {
    at = FirstMissing(at);
    if (at >= to) break;
    auto next = ranges_.upper_bound(at);
    const std::uint64_t end = next == ranges_.end() ? to : std::min(to, next->first);
    out.emplace_back(at, end);
    at = end;
  }
  return out;
}

}  // namespace weir
