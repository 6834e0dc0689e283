#include "call_queue.h"

namespace weir::adapter::internal {

bool CallQueue::PollOnce() {
  void* tag = nullptr;
  bool ok = false;
  if (!queue_->Next(&tag, &ok)) return false;
  static_cast<QueueTag*>(tag)->Proceed(ok);
  return true;
}

void CallQueue::WaitFor(const DoneTag& tag) {
  while (!tag.fired && PollOnce()) {
  }
}

void CallQueue::Arrived(ArrivedCall* call) {
  waiting_.push_back(call);
  if (running_call_) return;  // runs when the current one is done
  running_call_ = true;
  while (!waiting_.empty()) {
    ArrivedCall* next = waiting_.front();
    waiting_.pop_front();
    next->Run();
  }
  running_call_ = false;
}

void CallQueue::Run() {
  while (PollOnce()) {
  }
}

}  // namespace weir::adapter::internal
