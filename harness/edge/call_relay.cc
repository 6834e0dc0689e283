#include "harness/edge/call_relay.h"

namespace weir {

bool CallRelay::Submit(const char* method, Work work, std::chrono::milliseconds bound) {
  auto task = std::make_shared<Task>();
  task->work = std::move(work);
  std::unique_lock<std::mutex> lock(mu_);
  if (broker_ == nullptr) {
    if (stray_.size() < 1000) stray_.emplace_back(method);
    return false;
  }
  queue_.push_back(task);
  sim_cv_.notify_one();
  if (!done_cv_.wait_for(lock, bound, [&] { return task->finished || task->refused; })) {
    if (!task->running) {
      task->refused = true;  // the simulation thread will skip it
      return false;
    }
    // The work holds references into our caller's frame: wait for it to end
    // (or to be refused after it ran, when its answer is held for a crash).
    done_cv_.wait(lock, [&] { return task->finished || task->refused; });
  }
  return task->finished;
}

void CallRelay::Done() {
  std::lock_guard<std::mutex> lock(mu_);
  done_ = true;
  sim_cv_.notify_one();
}

void CallRelay::Open(BrokerEndpoint& broker) {
  std::lock_guard<std::mutex> lock(mu_);
  broker_ = &broker;
  done_ = false;
}

CallRelay::Served CallRelay::ServeUntilDone(std::chrono::steady_clock::time_point deadline) {
  std::unique_lock<std::mutex> lock(mu_);
  for (;;) {
    while (!queue_.empty()) {
      std::shared_ptr<Task> task = std::move(queue_.front());
      queue_.pop_front();
      if (task->refused) continue;
      task->running = true;
      BrokerEndpoint* broker = broker_;
      lock.unlock();
      task->work(*broker);
      lock.lock();
      if (broker->CrashRequested()) {
        // Hold the answer: the caller kills the connector, then Close().
        held_ = std::move(task);
        return Served::kCrashRequested;
      }
      task->finished = true;
      done_cv_.notify_all();
    }
    if (done_) return Served::kDone;
    if (!sim_cv_.wait_until(lock, deadline, [&] { return done_ || !queue_.empty(); })) {
      return Served::kDeadline;
    }
  }
}

void CallRelay::Close() {
  std::lock_guard<std::mutex> lock(mu_);
  broker_ = nullptr;
  for (auto& task : queue_) task->refused = true;
  queue_.clear();
  if (held_ != nullptr) {
    held_->refused = true;
    held_.reset();
  }
  done_cv_.notify_all();
}

std::vector<std::string> CallRelay::TakeStrayCalls() {
  std::lock_guard<std::mutex> lock(mu_);
  std::vector<std::string> out;
  out.swap(stray_);
  return out;
}

}  // namespace weir
