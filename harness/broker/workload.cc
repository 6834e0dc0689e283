#include "harness/broker/workload.h"

#include <cstring>

namespace weir {

Workload::Workload(const v1::Workload& config, std::uint64_t seed)
    : config_(config),
      arrivals_(PrngStream::Derive(seed, "workload.arrivals")),
      skew_(PrngStream::Derive(seed, "workload.skew")) {
  Workload dry = *this;
  dry.clock_ = Millis(config_.start_ms());
  dry.Generate();
  while (dry.has_next_) {
    last_publish_time_ = dry.next_.publish_time;
    dry.Pop();
  }
  clock_ = Millis(config_.start_ms());
  Generate();
}

void Workload::Pop() { Generate(); }

void Workload::Generate() {
  if (generated_ >= config_.messages()) {
    has_next_ = false;
    return;
  }
  const VirtualDuration mean = Millis(config_.publish_interval_ms());
  if (generated_ > 0) {
    clock_ += config_.arrival() == v1::Workload::POISSON ? arrivals_.Exponential(static_cast<double>(mean)) : mean;
    if (config_.idle_gap_every() > 0 && generated_ % config_.idle_gap_every() == 0) {
      clock_ += Millis(config_.idle_gap_ms());
    }
  }
  ++generated_;
  next_.id = generated_;
  next_.publish_time = clock_;
  const VirtualDuration max_skew = Millis(config_.max_event_time_skew_ms());
  next_.event_time = clock_ - (max_skew > 0 ? skew_.UniformInt(0, max_skew) : 0);
  if (config_.sources_size() > 0) {
    next_.source =
        config_.sources(static_cast<int>((generated_ - 1) % static_cast<std::uint64_t>(config_.sources_size())));
  }
  has_next_ = true;
}

std::string MessagePayload(std::uint64_t seed, std::uint64_t id, std::uint32_t size) {
  std::string out(size, '\0');
  SplitMix64 gen(Mix64(seed ^ Mix64(id ^ Fnv1a64("workload.payload"))));
  for (std::uint32_t i = 0; i < size; i += 8) {
    const std::uint64_t word = gen.Next();
    std::memcpy(out.data() + i, &word, std::min<std::uint32_t>(8, size - i));
  }
  return out;
}

}  // namespace weir
