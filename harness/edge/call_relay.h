// File: call_relay.h
//
// Moves broker calls from gRPC's server threads onto the simulation thread, so
// the broker model is only ever touched by one thread and the order of events
// is the order in which the connector made its calls.
//
// The simulation thread opens a window around each connector call and serves
// submitted broker calls until the connector call completes (Done) or a wall
// deadline passes. A broker call submitted while no window is open is refused
// at once and remembered as a stray call, to be written to the trace later.
//
// Thread safety: Submit and Done from any thread; the rest from the
// simulation thread only.
#pragma once

#include <chrono>
#include <condition_variable>
#include <deque>
#include <functional>
#include <memory>
#include <mutex>
#include <string>
#include <vector>

#include "harness/broker/broker_endpoint.h"

namespace weir {

class CallRelay {
 public:
  using Work = std::function<void(BrokerEndpoint&)>;

  // gRPC thread: runs `work` on the simulation thread and waits for it, at
  // most `bound`. Returns false when refused (no window, or it timed out).
  bool Submit(const char* method, Work work, std::chrono::milliseconds bound);

  // Any thread: the connector call of the open window has completed.
  void Done();

  // Simulation thread: opens a window dispatching to `broker`.
  void Open(BrokerEndpoint& broker);
  enum class Served { kDone, kDeadline, kCrashRequested };
  // Simulation thread: serves submitted work until Done() or the deadline, or
  // until, right after a piece of work, the endpoint's CrashRequested() is set.
  // In that last case the work's submitter is *not* released: its answer is
  // held until Close(), so the caller can kill the connector first and the
  // connector never sees that answer.
  Served ServeUntilDone(std::chrono::steady_clock::time_point deadline);
  // Simulation thread: closes the window; pending and held work is refused.
  void Close();
  // Simulation thread: names of broker methods called outside any window since
  // the last call; clears the list.
  std::vector<std::string> TakeStrayCalls();

 private:
  struct Task {
    Work work;
    bool running = false;  // taken by the simulation thread
    bool finished = false;
    bool refused = false;
  };

  std::mutex mu_;
  std::condition_variable sim_cv_;   // wakes the simulation thread
  std::condition_variable done_cv_;  // wakes submitters
  std::deque<std::shared_ptr<Task>> queue_;
  std::shared_ptr<Task> held_;  // ran, answer held back for a crash point
  BrokerEndpoint* broker_ = nullptr;
  bool done_ = false;
  std::vector<std::string> stray_;
};

}  // namespace weir
