#include "harness/cli/stop_signal.h"

#include <signal.h>

namespace weir {
namespace {

std::atomic<bool> g_stop{false};
std::atomic<int> g_signal{0};

extern "C" void OnStopSignal(int sig) {
  int none = 0;
  g_signal.compare_exchange_strong(none, sig);
  g_stop.store(true);
}

}  // namespace

const std::atomic<bool>* InstallStopSignals() {
  struct sigaction sa {};
  sa.sa_handler = OnStopSignal;
  sigemptyset(&sa.sa_mask);
  for (int sig : {SIGINT, SIGTERM, SIGHUP}) sigaction(sig, &sa, nullptr);
  return &g_stop;
}

int StopSignal() { return g_signal.load(); }

}  // namespace weir
