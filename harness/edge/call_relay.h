// File: call_relay.h
//
// Lets the connector's broker calls, which arrive on gRPC's server threads,
// touch the simulation's models only while the simulation thread is parked in
// a connector call, and one at a time. The order of events is the order in
// which the connector's calls took the relay's lock.
//
// The simulation thread opens a window (Open) before it sends a connector call
// and closes it (Close) after the answer, the deadline or a crash. While the
// window is open the simulation thread does nothing but wait for its gRPC call,
// so a broker call runs right on the gRPC thread that received it, under the
// relay's mutex: exactly one logical actor touches the models at any time, and
// no thread hop is paid per broker call. The mutex also orders memory between
// the simulation thread and the gRPC threads.
//
// A broker call submitted while no window is open is refused at once and
// remembered as a stray call, to be written to the trace later.
//
// Crash points: when, right after a piece of work, the endpoint's
// CrashRequested() is set, the relay runs the window's crash action (the port
// kills the connector's process group and cancels its own call) on that same
// gRPC thread, and holds the work's answer back until Close(): the connector
// never sees it. Every later call of that window is refused.
//
// Thread safety: Submit from any thread; the rest from the simulation thread.
//
// Example (simulation thread):
//   relay.Open(broker, [&] { KillProcessGroupAndCancel(); });
//   status = stub->Advance(&context, request, &response);  // broker calls run meanwhile
//   const bool crashed = relay.Close();
#pragma once

#include <chrono>
#include <condition_variable>
#include <cstdint>
#include <functional>
#include <mutex>
#include <string>
#include <vector>

#include "absl/functional/function_ref.h"
#include "harness/broker/broker_endpoint.h"

namespace weir {

class CallRelay {
 public:
  using Work = absl::FunctionRef<void(BrokerEndpoint&)>;

  // Any thread: runs `work` on the calling thread against the open window's
  // endpoint. Returns false when refused: no window is open (a stray call), a
  // crash was already requested in this window, or `work` itself triggered
  // the crash (then the caller is held until Close(), at most `hold_bound`).
  bool Submit(const char* method, Work work, std::chrono::milliseconds hold_bound);

  // Simulation thread: opens a window dispatching to `broker`. `on_crash` runs
  // on a gRPC thread, under the relay's lock, when a piece of work leaves
  // `broker.CrashRequested()` set; it must not call back into the relay.
  void Open(BrokerEndpoint& broker, std::function<void()> on_crash);
  // Simulation thread: true once a crash was requested in the open window.
  bool crash_requested();
  // Simulation thread: closes the window after any running work has ended;
  // releases held callers (their answers are refused). Returns whether a crash
  // was requested in the window.
  bool Close();
  // Simulation thread: names of broker methods called outside any window since
  // the last call; clears the list.
  std::vector<std::string> TakeStrayCalls();

 private:
  std::mutex mu_;
  std::condition_variable closed_cv_;  // wakes callers held after a crash
  BrokerEndpoint* broker_ = nullptr;
  std::function<void()> on_crash_;
  std::uint64_t window_ = 0;  // counts Close()s
  bool crashed_ = false;
  std::vector<std::string> stray_;
};

}  // namespace weir
