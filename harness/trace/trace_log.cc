#include "harness/trace/trace_log.h"

namespace weir {

v1::TraceEvent& TraceLog::Append(VirtualTime t) {
  current_.Clear();
  current_.set_seq(next_seq_);
  current_.set_t_ns(t);
  current_.set_incarnation(incarnation_);
  current_.set_reader(reader_);
  return current_;
}

void TraceLog::Commit() {
  ++next_seq_;
  for (TraceObserver* o : observers_) o->OnEvent(current_);
}

}  // namespace weir
