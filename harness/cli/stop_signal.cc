#include "harness/cli/stop_signal.h"

#include <signal.h>

#include <mutex>

#include "harness/edge/supervisor.h"

namespace weir {
namespace {

std::atomic<bool> g_stop{false};
std::atomic<int> g_signal{0};

}  // namespace

const std::atomic<bool>* InstallStopSignals() {
  static std::once_flag once;
  std::call_once(once, [] {
    // On the supervisor's loop, which also wakes every wait on a connector
    // process, so a start-up wait ends at once rather than at its bound.
    Supervisor::Shared().OnStopSignals({SIGINT, SIGTERM, SIGHUP}, [](int sig) {
      int none = 0;
      g_signal.compare_exchange_strong(none, sig);
      g_stop.store(true);
    });
  });
  return &g_stop;
}

int StopSignal() { return g_signal.load(); }

}  // namespace weir
