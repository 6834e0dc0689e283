// File: record_key.h
//
// One 64-bit identity for what a committed record was produced from, in both
// broker shapes:
//   queue  the message id (1 .. 2^40 - 1);
//   log    (partition + 1) << 40 | offset, for partitions 0 .. 2^23 - 2 and
//          offsets 0 .. 2^40 - 1.
// So a key below 2^40 is a message, and a key at or above it a log record.
// The packing is internal to a run (traces name partition and offset).
#pragma once

#include <cstdint>

namespace weir {

using RecordKey = std::uint64_t;

inline constexpr int kOffsetBits = 40;
inline constexpr std::uint64_t kMaxOffset = (std::uint64_t{1} << kOffsetBits) - 1;

inline constexpr RecordKey LogRecordKey(std::uint32_t partition, std::uint64_t offset) {
  return (std::uint64_t{partition} + 1) << kOffsetBits | offset;
}
inline constexpr bool IsLogKey(RecordKey key) { return (key >> kOffsetBits) != 0; }
inline constexpr std::uint32_t KeyPartition(RecordKey key) {
  return static_cast<std::uint32_t>((key >> kOffsetBits) - 1);
}
inline constexpr std::uint64_t KeyOffset(RecordKey key) { return key & kMaxOffset; }

}  // namespace weir
