// File: stop_watch.h
//
// Ends blocking waits when weir is asked to stop (a signal sets a flag, see
// harness/cli/stop_signal.h). A connector call blocks the simulation thread
// in gRPC; while it does, a StopWatch::Guard keeps an action registered
// (kill the connector's process group, cancel the call) that one watcher
// thread per process runs, at most once, within ~50 ms of the flag turning
// true. Registering costs one uncontended mutex; the thread starts on first use.
//
// Thread safety: guards may be made and destroyed on any thread; an action
// runs on the watcher thread, never after its guard is destroyed.
//
// Example:
//   StopWatch::Guard watch(stop, [&] { ::kill(-group, SIGKILL); context.TryCancel(); });
//   status = stub->Advance(&context, request, &response);
#pragma once

#include <atomic>
#include <cstdint>
#include <functional>

namespace weir {

class StopWatch {
 public:
  class Guard {
   public:
    // REQUIRES: stop != nullptr and outlives the guard.
    Guard(const std::atomic<bool>* stop, std::function<void()> on_stop);
    ~Guard();
    Guard(const Guard&) = delete;
    Guard& operator=(const Guard&) = delete;

   private:
    std::uint64_t id_;
  };
};

}  // namespace weir
