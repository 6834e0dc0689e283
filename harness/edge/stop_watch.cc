#include "harness/edge/stop_watch.h"

#include <chrono>
#include <map>
#include <mutex>
#include <thread>
#include <utility>

namespace weir {
namespace {

struct Watched {
  const std::atomic<bool>* stop;
  std::function<void()> on_stop;
  bool ran = false;
};

struct Registry {
  std::mutex mu;
  std::map<std::uint64_t, Watched> watched;
  std::uint64_t next_id = 0;
  bool started = false;
};

Registry& TheRegistry() {
  static auto* registry = new Registry();  // never destroyed: the watcher may outlive main
  return *registry;
}

void WatchLoop() {
  Registry& r = TheRegistry();
  for (;;) {
    std::this_thread::sleep_for(std::chrono::milliseconds(50));
    std::lock_guard<std::mutex> lock(r.mu);
    for (auto& [id, w] : r.watched) {
      if (w.ran || !w.stop->load()) continue;
      w.ran = true;
      w.on_stop();
    }
  }
}

}  // namespace

StopWatch::Guard::Guard(const std::atomic<bool>* stop, std::function<void()> on_stop) {
  Registry& r = TheRegistry();
  std::lock_guard<std::mutex> lock(r.mu);
  id_ = r.next_id++;
  r.watched.emplace(id_, Watched{stop, std::move(on_stop)});
  if (!r.started) {
    r.started = true;
    std::thread(WatchLoop).detach();
  }
}

StopWatch::Guard::~Guard() {
  Registry& r = TheRegistry();
  std::lock_guard<std::mutex> lock(r.mu);
  r.watched.erase(id_);
}

}  // namespace weir
