// File: broker_server.h
//
// The gRPC edge of the broker, served on the simulation thread itself. The
// Broker service is asynchronous, on one completion queue that the
// connector's calls use too; nothing polls that queue except the simulation
// thread, and only while it waits for a connector call (Serve). So a broker
// call runs on the simulation thread between the connector call's start and
// its answer, exactly one actor touches the models at any time, and no
// thread hand-off is paid: each round trip costs the two process switches it
// must cost and no more.
//
// The window of a connector call: broker calls that arrive while Serve runs
// are answered by the window's endpoint. Calls that were already queued when
// the window opened (the connector called between two connector calls) are
// refused with FAILED_PRECONDITION and remembered as stray calls.
//
// Crash points: when a broker call leaves the endpoint's CrashRequested() set,
// Serve runs the window's crash action (the port kills the connector's process
// group and cancels its call) and holds that call's answer, and refuses every
// later call of the window; held answers go out (refused) only when the window
// ends, after the crash action's SIGKILL (no user code of the connector runs
// once kill() has returned, reaped or not). The connector never sees them.
//
// Answers carry the virtual now; a failed call carries it in trailing metadata
// "weir-now-ns", a throttled one also "retry-after-ms" and an out-of-range
// Read "weir-first-retained-offset". Those two also carry status details (the
// "grpc-status-details-bin" trailer): a whole google.rpc.Status (weir's
// v1::StatusDetails is that message on the wire) with the call's code and
// message and one Any
// packing a weir.v1.RetryAfter or a weir.v1.OffsetOutOfRange (the partition
// read and the first retained offset), as every gRPC implementation expects.
// The details are not part of the trace.
//
// Resource bounds: at most 16 concurrent streams per connection; calls are
// handled one at a time, each method awaiting its next call as soon as one
// arrives; gRPC queues the rest.
//
// Thread safety: one thread (the simulation thread) for everything.
//
// Example (simulation thread, in a connector call):
//   BrokerServer::Window window{broker, [&] { KillGroupAndCancel(); }};
//   server.RefuseQueued();
//   rpc->Finish(&response, &status, &done_tag);        // on server.queue()
//   server.Serve(window, [&] { return done_tag.fired; });
#pragma once

#include <grpcpp/grpcpp.h>

#include <chrono>
#include <functional>
#include <memory>
#include <string>
#include <vector>

#include "absl/functional/function_ref.h"
#include "absl/status/statusor.h"
#include "harness/broker/broker_endpoint.h"

namespace weir {

// Something waiting on the completion queue. Proceed runs on the thread that
// polls the queue; `ok` is the completion's success bit.
class QueueTag {
 public:
  virtual ~QueueTag() = default;
  virtual void Proceed(bool ok) = 0;
};

// A tag that only records that it fired (e.g. a client call's Finish).
class DoneTag final : public QueueTag {
 public:
  void Proceed(bool succeeded) override {
    fired = true;
    ok = succeeded;
  }
  bool fired = false;
  bool ok = false;
};

class BrokerServer {
 public:
  // The endpoint broker calls go to while a connector call is in flight.
  struct Window {
    BrokerEndpoint& broker;
    // Runs (once) right after a broker call set CrashRequested(); must end
    // the connector call (kill and cancel) so that Serve's `done` comes true.
    std::function<void()> on_crash;
    bool crashed = false;
  };

  // listen: "127.0.0.1:0" (or another loopback host:port) or "unix:/path".
  [[nodiscard]] static absl::StatusOr<std::unique_ptr<BrokerServer>> Start(const std::string& listen);
  // Shuts the server down (pending calls are cancelled) and drains the queue.
  // REQUIRES: no client call on queue() is outstanding.
  ~BrokerServer();
  BrokerServer(const BrokerServer&) = delete;
  BrokerServer& operator=(const BrokerServer&) = delete;

  // The address a client should dial ("127.0.0.1:40123" or "unix:/path").
  const std::string& address() const { return address_; }
  // Where the connector's calls are started, so that Serve sees them end.
  grpc::CompletionQueue* queue();

  // Handles everything already on the queue without waiting; broker calls
  // among it are stray (refused, remembered).
  void RefuseQueued();
  // Handles queue events (broker calls against `window`, other tags) until
  // `done()` returns true. `done` is asked after every event and at least
  // every `tick` of wall time, so it can also enforce stop flags and bounds;
  // Serve itself never ends otherwise. After a crash, releases the held
  // answers before returning.
  void Serve(Window& window, absl::FunctionRef<bool()> done,
             std::chrono::milliseconds tick = std::chrono::milliseconds(50));
  // Names of broker methods called outside any window since the last call;
  // clears the list.
  std::vector<std::string> TakeStrayCalls();

  // Implementation details, public for the call objects in broker_server.cc.
  class Call;
  void Handle(Call& call);

 private:
  BrokerServer() = default;
  // One queue event; false when the queue is shut down.
  bool PollOnce(std::chrono::system_clock::time_point deadline, bool* timed_out);

  struct Impl;
  std::unique_ptr<Impl> impl_;
  std::string address_;
  Window* window_ = nullptr;  // set while Serve runs
  std::vector<Call*> held_;   // answers held back by a crash point
  std::vector<std::string> stray_;
};

}  // namespace weir
