// Helpers shared by weir's unit tests: source and build directories, a trace
// recorder and scenario builders.
#pragma once

#include <cstdlib>
#include <string>
#include <vector>

#include "harness/oracle/verdict.h"
#include "harness/trace/trace_log.h"
#include "weir/v1/scenario.pb.h"
#include "weir/v1/trace.pb.h"

namespace weir::testing {

// The source and build trees, as CTest passes them (weir_add_test); the
// defaults fit a run from the source root.
inline std::string SourceDir() {
  const char* dir = std::getenv("WEIR_SOURCE_DIR");
  return dir != nullptr ? dir : ".";
}
inline std::string BinaryDir() {
  const char* dir = std::getenv("WEIR_BINARY_DIR");
  return dir != nullptr ? dir : "build";
}

// Every failed invariant of a verdict with its first sentence, one per line,
// for a failing expectation's message.
inline std::string Failed(const Verdict& v) {
  std::string out;
  for (int i = 0; i < kInvariantCount; ++i) {
    const auto& r = v.results[i];
    if (r.checked && r.violations > 0) {
      out += std::string(InvariantName(static_cast<Invariant>(i))) + ": " +
             (r.first.empty() ? "" : r.first.front().sentence) + "\n";
    }
  }
  return out;
}

// Keeps every event of a trace, for tests only.
class TraceRecorder : public TraceObserver {
 public:
  void OnEvent(const v1::TraceEvent& e) override { events.push_back(e); }
  std::vector<v1::TraceEvent> Of(v1::TraceEvent::KindCase kind) const {
    std::vector<v1::TraceEvent> out;
    for (const auto& e : events) {
      if (e.kind_case() == kind) out.push_back(e);
    }
    return out;
  }
  std::vector<v1::TraceEvent> events;
};

// A small valid scenario: n messages 10 ms apart, lease 1 s.
inline v1::Scenario SmallScenario(std::uint64_t n) {
  v1::Scenario s;
  s.set_name("test");
  auto* w = s.mutable_workload();
  w->set_messages(n);
  w->set_publish_interval_ms(10);
  w->set_payload_bytes(16);
  w->add_sources("buoy-7");
  s.mutable_broker()->set_lease_ms(1000);
  s.mutable_broker()->set_max_pull(100);
  s.mutable_broker()->set_redelivery_horizon_ms(5000);
  s.mutable_runtime()->set_checkpoint_every_records(5);
  s.mutable_runtime()->set_checkpoint_interval_ms(500);
  s.mutable_runtime()->set_drain_bound_ms(10000);
  s.mutable_profile()->set_guarantee(v1::Profile::EXACTLY_ONCE);
  return s;
}

}  // namespace weir::testing
