// File: virtual_time.h
//
// Virtual time: signed 64-bit nanoseconds since the start of a run. weir's
// simulation never reads a wall clock; every duration it reasons about is one of
// these. kNever is the largest value and orders after every real time.
#pragma once

#include <cstdint>
#include <limits>
#include <string>

namespace weir {

using VirtualTime = std::int64_t;      // nanoseconds since the run started
using VirtualDuration = std::int64_t;  // nanoseconds

inline constexpr VirtualTime kNever = std::numeric_limits<std::int64_t>::max();

constexpr VirtualDuration Nanos(std::int64_t n) { return n; }
constexpr VirtualDuration Micros(std::int64_t n) { return n * 1000; }
constexpr VirtualDuration Millis(std::int64_t n) { return n * 1000 * 1000; }
constexpr VirtualDuration Seconds(std::int64_t n) { return n * 1000 * 1000 * 1000; }

// Adds without overflowing: saturates at kNever (and at the lowest value).
constexpr VirtualTime SaturatingAdd(VirtualTime t, VirtualDuration d) {
  if (d > 0 && t > kNever - d) return kNever;
  if (d < 0 && t < std::numeric_limits<std::int64_t>::min() - d) {
    return std::numeric_limits<std::int64_t>::min();
  }
  return t + d;
}

// "12.345678901s", or "never" for kNever. For reports; stable across platforms.
std::string FormatTime(VirtualTime t);

}  // namespace weir
