// File: call_queue.h  (internal to the adapter)
//
// The connector's one event loop. The Connector service is asynchronous; its
// calls, and the broker calls a source makes inside them, complete on one
// completion queue that only the serving thread polls. A source's broker call
// waits by polling that queue itself (WaitFor), so no thread hands a call to
// another: each round trip costs the two process switches it must cost.
//
// weir sends one connector call at a time, but a call it gave up on (its
// deadline passed) can be followed by the next while the source is still
// busy: a connector call that arrives while another runs waits in a list and
// runs after it, in arrival order, so the source sees one call at a time.
//
// Thread safety: one thread (the one in Run) for everything.
#pragma once

#include <grpcpp/grpcpp.h>

#include <deque>

namespace weir::adapter::internal {

// Something waiting on the queue; Proceed runs on the polling thread.
class QueueTag {
 public:
  virtual ~QueueTag() = default;
  virtual void Proceed(bool ok) = 0;
};

// A tag that only records that it fired (a broker call's Finish).
class DoneTag final : public QueueTag {
 public:
  void Proceed(bool succeeded) override {
    fired = true;
    ok = succeeded;
  }
  bool fired = false;
  bool ok = false;
};

// A connector call that has arrived and is ready to run.
class ArrivedCall {
 public:
  virtual ~ArrivedCall() = default;
  // Runs the source and sends the answer.
  virtual void Run() = 0;
};

class CallQueue {
 public:
  explicit CallQueue(grpc::CompletionQueue* queue) : queue_(queue) {}

  grpc::CompletionQueue* queue() { return queue_; }

  // Polls until `tag` has fired (the caller's call carries a deadline, so it
  // does) or the queue is shut down.
  void WaitFor(const DoneTag& tag);
  // A connector call arrived: runs it now, or after the one that is running.
  void Arrived(ArrivedCall* call);
  // Polls until the queue is shut down.
  void Run();

 private:
  bool PollOnce();

  grpc::CompletionQueue* queue_;
  bool running_call_ = false;
  std::deque<ArrivedCall*> waiting_;
};

}  // namespace weir::adapter::internal
