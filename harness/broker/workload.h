// File: workload.h
//
// The scenario's workload as a sequence of messages to publish: ids 1, 2, 3, …
// with publish times, event times (skewed and out of order within the
// scenario's bound), a "source" attribute, and a payload of deterministic bytes.
// Generated lazily, one message at a time, so a million-message run keeps no
// list of them.
//
// Thread safety: none.
#pragma once

#include <cstdint>
#include <optional>
#include <string>

#include "harness/core/prng.h"
#include "harness/core/virtual_time.h"
#include "weir/v1/scenario.pb.h"

namespace weir {

struct MessageSpec {
  std::uint64_t id = 0;
  VirtualTime publish_time = 0;
  VirtualTime event_time = 0;
  std::string source;  // empty when the scenario names no sources
};

class Workload {
 public:
  Workload(const v1::Workload& config, std::uint64_t seed);

  // The next message to publish, or nullopt once all are out.
  const MessageSpec* Peek() const { return has_next_ ? &next_ : nullptr; }
  void Pop();

  std::uint64_t total() const { return config_.messages(); }
  // Publish time of the last message (computed once, by a dry run).
  VirtualTime last_publish_time() const { return last_publish_time_; }

 private:
  void Generate();

  const v1::Workload config_;
  PrngStream arrivals_;
  PrngStream skew_;
  MessageSpec next_;
  bool has_next_ = false;
  std::uint64_t generated_ = 0;
  VirtualTime clock_ = 0;
  VirtualTime last_publish_time_ = 0;
};

// The payload of message `id` in a run with this seed: `size` deterministic
// bytes. Payloads are a pure function of (seed, id, size).
std::string MessagePayload(std::uint64_t seed, std::uint64_t id, std::uint32_t size);

}  // namespace weir
