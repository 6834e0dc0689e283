// File: event_ref.h
//
// A compact, copyable reference to a trace event: its position, time,
// incarnation, reader, kind and up to four numeric fields (for span events,
// the first span only). Enough to describe the
// event later (as a proving event in a report) without keeping the event.
// String fields are not kept; events whose meaning lives in a string (exits,
// protocol errors) are described when they happen.
#pragma once

#include <cstdint>
#include <string>

#include "weir/v1/trace.pb.h"

namespace weir {

struct EventRef {
  std::uint64_t seq = 0;
  std::int64_t t = 0;
  std::uint64_t incarnation = 0;
  std::uint32_t reader = 0;
  v1::TraceEvent::KindCase kind = v1::TraceEvent::KIND_NOT_SET;
  std::int64_t f[4] = {0, 0, 0, 0};
  // Bit 0: has a watermark; for stepped also bit 1 finished, bit 2 broker idle.
  std::uint8_t has_watermark = 0;

  bool valid() const { return kind != v1::TraceEvent::KIND_NOT_SET; }
};

EventRef MakeRef(const v1::TraceEvent& event);
// Rebuilds the event (numeric fields only) from a reference.
v1::TraceEvent Rebuild(const EventRef& ref);

}  // namespace weir
