// File: trace_log.h
//
// The trace of a run as it happens: every event the broker and runtime models
// produce goes through one TraceLog, which numbers it (seq), stamps the current
// incarnation, and hands it to each observer in order (the oracle, the digest,
// a file writer). Nothing is kept: memory does not grow with run length.
//
// Example:
//   TraceLog log;
//   log.AddObserver(&oracle);
//   log.Append(now).mutable_acked()->set_message_id(7);
//   log.Commit();
//
// Thread safety: none; the simulation thread owns the log.
#pragma once

#include <cstdint>
#include <vector>

#include "harness/core/virtual_time.h"
#include "weir/v1/trace.pb.h"

namespace weir {

class TraceObserver {
 public:
  virtual ~TraceObserver() = default;
  // Called once per event, in seq order. The event is valid only for the call.
  virtual void OnEvent(const v1::TraceEvent& event) = 0;
};

class TraceLog {
 public:
  // REQUIRES: observer outlives the log.
  void AddObserver(TraceObserver* observer) { observers_.push_back(observer); }

  void set_incarnation(std::uint64_t incarnation) { incarnation_ = incarnation; }
  std::uint64_t incarnation() const { return incarnation_; }
  // Many readers: the reader the following events speak for (0 with one).
  void set_reader(std::uint32_t reader) { reader_ = reader; }

  // Starts the next event at virtual time t; fill its kind, then call Commit().
  // REQUIRES: the previous event was committed.
  v1::TraceEvent& Append(VirtualTime t);
  // Hands the event started by Append to every observer.
  void Commit();

  std::uint64_t events() const { return next_seq_; }

 private:
  std::vector<TraceObserver*> observers_;
  v1::TraceEvent current_;
  std::uint64_t next_seq_ = 0;
  std::uint64_t incarnation_ = 0;
  std::uint32_t reader_ = 0;
};

}  // namespace weir
