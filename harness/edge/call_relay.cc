#include "harness/edge/call_relay.h"

namespace weir {

bool CallRelay::Submit(const char* method, Work work, std::chrono::milliseconds hold_bound) {
  std::unique_lock<std::mutex> lock(mu_);
  if (broker_ == nullptr) {
    if (stray_.size() < 1000) stray_.emplace_back(method);
    return false;
  }
  if (crashed_) return false;  // the connector is being killed
  work(*broker_);
  if (!broker_->CrashRequested()) return true;
  crashed_ = true;
  if (on_crash_) on_crash_();
  // Hold the answer until the simulation thread has killed the connector and
  // closed the window.
  const std::uint64_t window = window_;
  closed_cv_.wait_for(lock, hold_bound, [&] { return window_ != window; });
  return false;
}

void CallRelay::Open(BrokerEndpoint& broker, std::function<void()> on_crash) {
  std::lock_guard<std::mutex> lock(mu_);
  broker_ = &broker;
  on_crash_ = std::move(on_crash);
  crashed_ = false;
}

bool CallRelay::crash_requested() {
  std::lock_guard<std::mutex> lock(mu_);
  return crashed_;
}

bool CallRelay::Close() {
  std::lock_guard<std::mutex> lock(mu_);
  broker_ = nullptr;
  on_crash_ = nullptr;
  ++window_;
  closed_cv_.notify_all();
  return crashed_;
}

std::vector<std::string> CallRelay::TakeStrayCalls() {
  std::lock_guard<std::mutex> lock(mu_);
  std::vector<std::string> out;
  out.swap(stray_);
  return out;
}

}  // namespace weir
