// File: bench_support.h
//
// Small pieces every benchmark needs: a figure of this process's memory from
// /proc/self/status, and a trace observer that does nothing but keep the
// compiler from dropping the events (the cost of generating a trace alone).
#pragma once

#include <cstdint>
#include <cstdlib>
#include <fstream>
#include <string>

#include "harness/trace/trace_log.h"

namespace weir::bench {

// A "Vm…" field of /proc/self/status in kB ("VmHWM": peak resident set,
// "VmRSS": current), or -1 when it cannot be read.
inline long StatusKb(const char* field) {
  std::ifstream in("/proc/self/status");
  std::string line;
  const std::string prefix = std::string(field) + ":";
  while (std::getline(in, line)) {
    if (line.rfind(prefix, 0) == 0) return std::strtol(line.c_str() + prefix.size(), nullptr, 10);
  }
  return -1;
}

class NoOpObserver : public TraceObserver {
 public:
  void OnEvent(const v1::TraceEvent& e) override { sum += e.seq(); }
  std::uint64_t sum = 0;
};

}  // namespace weir::bench
