#include "harness/trace/event_ref.h"

#include <cctype>

#include "harness/core/record_key.h"
#include "weir/v1/faults.pb.h"

namespace weir {
namespace {

std::int64_t S(std::uint64_t v) { return static_cast<std::int64_t>(v); }
std::uint64_t U(std::int64_t v) { return static_cast<std::uint64_t>(v); }

// Broker methods are kept as small codes: an EventRef holds no strings.
constexpr const char* kMethods[] = {"",     "Pull",          "Ack",          "Nack", "ExtendLease", "ListPartitions",
                                    "Read", "SaveBookmarks", "LoadBookmarks"};
constexpr std::int64_t kMethodCount = sizeof kMethods / sizeof kMethods[0];
std::int64_t MethodCode(const std::string& m) {
  for (std::int64_t i = 1; i < kMethodCount; ++i) {
    if (m == kMethods[i]) return i;
  }
  return 0;
}
const char* MethodName(std::int64_t code) { return code > 0 && code < kMethodCount ? kMethods[code] : "?"; }

// A crash point as the trace words it ("in-notice-after-ack": CrashPoint's
// name in lower case with dashes), kept as the enum's number.
std::string CrashPointWords(std::int64_t code) {
  if (code <= 0 || !v1::CrashPoint_IsValid(static_cast<int>(code))) return "";
  std::string words = v1::CrashPoint_Name(static_cast<v1::CrashPoint>(code));
  for (char& c : words) c = c == '_' ? '-' : static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  return words;
}
std::int64_t CrashPointCode(const std::string& words) {
  for (int v = v1::CrashPoint_MIN; v <= v1::CrashPoint_MAX; ++v) {
    if (v1::CrashPoint_IsValid(v) && v > 0 && CrashPointWords(v) == words) return v;
  }
  return 0;
}

}  // namespace

EventRef MakeRef(const v1::TraceEvent& e) {
  using v1::TraceEvent;
  EventRef r;
  r.seq = e.seq();
  r.t = e.t_ns();
  r.incarnation = e.incarnation();
  r.reader = e.reader();
  r.kind = e.kind_case();
  switch (r.kind) {
    case TraceEvent::kPublished:
      r.f[0] = S(e.published().message_id());
      r.f[1] = e.published().event_time_ns();
      r.f[2] = e.published().payload_crc32c();
      break;
    case TraceEvent::kDelivered:
      r.f[0] = S(e.delivered().message_id());
      r.f[1] = S(e.delivered().receipt());
      r.f[2] = e.delivered().attempt();
      r.f[3] = e.delivered().lease_deadline_ns();
      break;
    case TraceEvent::kEmitted:
      r.f[0] = S(e.emitted().message_id());
      r.f[1] = e.emitted().event_time_ns();
      r.f[2] = S(e.emitted().step());
      if (e.emitted().has_offset()) {
        r.f[3] = S(LogRecordKey(e.emitted().partition(), e.emitted().offset()));
      }
      break;
    case TraceEvent::kStepped:
      r.f[0] = S(e.stepped().step());
      r.f[1] = e.stepped().records();
      r.f[2] = e.stepped().watermark_ns();
      r.f[3] = e.stepped().resume_at_ns();
      r.has_watermark = static_cast<std::uint8_t>(e.stepped().has_watermark_ns() | (e.stepped().finished() ? 2 : 0) |
                                                  (e.stepped().broker_idle() ? 4 : 0));
      break;
    case TraceEvent::kCheckpoint:
      r.f[0] = S(e.checkpoint().checkpoint_id());
      r.f[1] = e.checkpoint().records();
      r.f[2] = e.checkpoint().watermark_ns();
      r.f[3] = S(e.checkpoint().state_bytes());
      r.has_watermark = e.checkpoint().has_watermark_ns();
      break;
    case TraceEvent::kCommitted: r.f[0] = S(e.committed().checkpoint_id()); break;
    case TraceEvent::kCommitFailed: r.f[0] = S(e.commit_failed().checkpoint_id()); break;
    case TraceEvent::kCommitNotice: r.f[0] = S(e.commit_notice().checkpoint_id()); break;
    case TraceEvent::kAcked:
      r.f[0] = S(e.acked().message_id());
      r.f[1] = S(e.acked().receipt());
      break;
    case TraceEvent::kNacked:
      r.f[0] = S(e.nacked().message_id());
      r.f[1] = S(e.nacked().receipt());
      break;
    case TraceEvent::kLeaseExtended:
      r.f[0] = S(e.lease_extended().message_id());
      r.f[1] = S(e.lease_extended().receipt());
      r.f[2] = e.lease_extended().lease_deadline_ns();
      break;
    case TraceEvent::kLeaseExpired:
      r.f[0] = S(e.lease_expired().message_id());
      r.f[1] = S(e.lease_expired().receipt());
      break;
    case TraceEvent::kOpened:
      r.f[0] = e.opened().restored();
      r.f[1] = S(e.opened().checkpoint_id());
      r.f[2] = e.opened().watermark_ns();
      r.has_watermark = e.opened().has_watermark_ns();
      break;
    case TraceEvent::kAckIgnored:
      r.f[0] = S(e.ack_ignored().receipt());
      r.f[1] = S(e.ack_ignored().message_id());
      break;
    case TraceEvent::kBrokerCall:
      r.f[0] = MethodCode(e.broker_call().method());
      r.f[1] = S(e.broker_call().position());
      if (e.broker_call().has_partition()) r.f[2] = S(e.broker_call().partition()) + 1;
      break;
    case TraceEvent::kBrokerCallFailed:
      r.f[0] = MethodCode(e.broker_call_failed().method());
      r.f[1] = e.broker_call_failed().code();
      r.f[2] = e.broker_call_failed().retry_after_ns();
      if (e.broker_call_failed().has_partition()) {
        r.f[3] = S(e.broker_call_failed().partition()) + 1;
      }
      break;
    case TraceEvent::kAppended:
      r.f[0] = e.appended().partition();
      r.f[1] = S(e.appended().offset());
      r.f[2] = e.appended().event_time_ns();
      r.f[3] = e.appended().visible_at_ns();
      break;
    case TraceEvent::kLogRead: {
      const auto& x = e.log_read();
      r.f[0] = x.partition();
      r.f[1] = S(x.offset());
      r.f[2] = S(x.records()) | (x.out_of_range() ? S(1) << 32 : 0) | (x.emptied() ? S(1) << 33 : 0);
      r.f[3] = S(x.out_of_range() ? x.first_retained_offset() : x.next_offset());
      break;
    }
    case TraceEvent::kRetentionDeleted:
      r.f[0] = e.retention_deleted().partition();
      r.f[1] = S(e.retention_deleted().first_retained_offset());
      break;
    case TraceEvent::kPartitionAdded: r.f[0] = e.partition_added().partition(); break;
    case TraceEvent::kBookmarkSaved:
      r.f[0] = e.bookmark_saved().partition();
      r.f[1] = S(e.bookmark_saved().next_offset());
      r.f[2] = e.bookmark_saved().lost();
      break;
    case TraceEvent::kGapReported:
      r.f[0] = e.gap_reported().partition();
      r.f[1] = S(e.gap_reported().from_offset());
      r.f[2] = S(e.gap_reported().to_offset());
      r.f[3] = S(e.gap_reported().step());
      break;
    case TraceEvent::kAssigned:
    case TraceEvent::kRevoked: {
      const auto& spans = r.kind == TraceEvent::kAssigned ? e.assigned().spans() : e.revoked().spans();
      if (!spans.empty()) {
        r.f[0] = spans[0].partition();
        r.f[1] = S(spans[0].start_offset());
        r.f[2] = spans[0].has_end_offset() ? S(spans[0].end_offset()) : -1;
      }
      r.f[3] = spans.size();
      break;
    }
    case TraceEvent::kCut:
      r.f[0] = e.cut().held().partition();
      r.f[1] = S(e.cut().head().end_offset());
      r.f[2] = e.cut().has_tail() ? S(e.cut().tail().start_offset()) : -1;
      r.f[3] = e.cut().to_reader();
      break;
    case TraceEvent::kCrashed: r.f[0] = CrashPointCode(e.crashed().point()); break;
    case TraceEvent::kConnectorError: r.f[0] = e.connector_error().code(); break;
    case TraceEvent::kCallTimedOut: r.f[0] = e.call_timed_out().bound_wall_ms(); break;
    case TraceEvent::kRunEnded:
      r.f[0] = S(e.run_ended().published());
      r.f[1] = S(e.run_ended().committed_messages());
      break;
    case TraceEvent::kLivelock:
      r.f[0] = S(e.livelock().steps());
      r.f[1] = e.livelock().wall_ms();
      r.f[2] = e.livelock().by_wall_time() ? 1 : 0;
      r.f[3] = S(e.livelock().max_steps());
      break;
    default: break;
  }
  return r;
}

v1::TraceEvent Rebuild(const EventRef& r) {
  using v1::TraceEvent;
  TraceEvent e;
  e.set_seq(r.seq);
  e.set_t_ns(r.t);
  e.set_incarnation(r.incarnation);
  e.set_reader(r.reader);
  switch (r.kind) {
    case TraceEvent::kAssigned:
    case TraceEvent::kRevoked: {
      auto* spans = r.kind == TraceEvent::kAssigned ? e.mutable_assigned()->mutable_spans()
                                                    : e.mutable_revoked()->mutable_spans();
      if (r.f[3] > 0) {
        auto* s = spans->Add();
        s->set_partition(static_cast<std::uint32_t>(r.f[0]));
        s->set_start_offset(U(r.f[1]));
        if (r.f[2] >= 0) s->set_end_offset(U(r.f[2]));
      }
      break;
    }
    case TraceEvent::kCut: {
      auto* x = e.mutable_cut();
      x->mutable_held()->set_partition(static_cast<std::uint32_t>(r.f[0]));
      x->mutable_head()->set_partition(static_cast<std::uint32_t>(r.f[0]));
      x->mutable_head()->set_end_offset(U(r.f[1]));
      if (r.f[2] >= 0) {
        x->mutable_tail()->set_partition(static_cast<std::uint32_t>(r.f[0]));
        x->mutable_tail()->set_start_offset(U(r.f[2]));
      }
      x->set_to_reader(static_cast<std::uint32_t>(r.f[3]));
      break;
    }
    case TraceEvent::kReaderLeft: e.mutable_reader_left(); break;
    case TraceEvent::kReaderJoined: e.mutable_reader_joined(); break;
    case TraceEvent::kPublished: {
      auto* x = e.mutable_published();
      x->set_message_id(U(r.f[0]));
      x->set_event_time_ns(r.f[1]);
      x->set_payload_crc32c(static_cast<std::uint32_t>(r.f[2]));
      break;
    }
    case TraceEvent::kDelivered: {
      auto* x = e.mutable_delivered();
      x->set_message_id(U(r.f[0]));
      x->set_receipt(U(r.f[1]));
      x->set_attempt(static_cast<std::uint32_t>(r.f[2]));
      x->set_lease_deadline_ns(r.f[3]);
      break;
    }
    case TraceEvent::kEmitted: {
      auto* x = e.mutable_emitted();
      x->set_message_id(U(r.f[0]));
      x->set_event_time_ns(r.f[1]);
      x->set_step(U(r.f[2]));
      if (r.f[3] != 0) {
        x->set_partition(KeyPartition(U(r.f[3])));
        x->set_offset(KeyOffset(U(r.f[3])));
      }
      break;
    }
    case TraceEvent::kStepped: {
      auto* x = e.mutable_stepped();
      x->set_step(U(r.f[0]));
      x->set_records(static_cast<std::uint32_t>(r.f[1]));
      if (r.has_watermark & 1) x->set_watermark_ns(r.f[2]);
      x->set_resume_at_ns(r.f[3]);
      x->set_finished((r.has_watermark & 2) != 0);
      x->set_broker_idle((r.has_watermark & 4) != 0);
      break;
    }
    case TraceEvent::kCheckpoint: {
      auto* x = e.mutable_checkpoint();
      x->set_checkpoint_id(U(r.f[0]));
      x->set_records(static_cast<std::uint32_t>(r.f[1]));
      if (r.has_watermark) x->set_watermark_ns(r.f[2]);
      x->set_state_bytes(U(r.f[3]));
      break;
    }
    case TraceEvent::kCommitted: e.mutable_committed()->set_checkpoint_id(U(r.f[0])); break;
    case TraceEvent::kCommitFailed: e.mutable_commit_failed()->set_checkpoint_id(U(r.f[0])); break;
    case TraceEvent::kCommitNotice: e.mutable_commit_notice()->set_checkpoint_id(U(r.f[0])); break;
    case TraceEvent::kAcked: {
      auto* x = e.mutable_acked();
      x->set_message_id(U(r.f[0]));
      x->set_receipt(U(r.f[1]));
      break;
    }
    case TraceEvent::kNacked: {
      auto* x = e.mutable_nacked();
      x->set_message_id(U(r.f[0]));
      x->set_receipt(U(r.f[1]));
      break;
    }
    case TraceEvent::kLeaseExtended: {
      auto* x = e.mutable_lease_extended();
      x->set_message_id(U(r.f[0]));
      x->set_receipt(U(r.f[1]));
      x->set_lease_deadline_ns(r.f[2]);
      break;
    }
    case TraceEvent::kLeaseExpired: {
      auto* x = e.mutable_lease_expired();
      x->set_message_id(U(r.f[0]));
      x->set_receipt(U(r.f[1]));
      break;
    }
    case TraceEvent::kOpened: {
      auto* x = e.mutable_opened();
      x->set_restored(r.f[0] != 0);
      x->set_checkpoint_id(U(r.f[1]));
      if (r.has_watermark) x->set_watermark_ns(r.f[2]);
      break;
    }
    case TraceEvent::kAckIgnored: {
      auto* x = e.mutable_ack_ignored();
      x->set_receipt(U(r.f[0]));
      x->set_message_id(U(r.f[1]));
      break;
    }
    case TraceEvent::kBrokerCall: {
      auto* x = e.mutable_broker_call();
      x->set_method(MethodName(r.f[0]));
      x->set_position(U(r.f[1]));
      if (r.f[2] != 0) x->set_partition(static_cast<std::uint32_t>(r.f[2] - 1));
      break;
    }
    case TraceEvent::kBrokerCallFailed: {
      auto* x = e.mutable_broker_call_failed();
      x->set_method(MethodName(r.f[0]));
      x->set_code(static_cast<std::int32_t>(r.f[1]));
      x->set_retry_after_ns(r.f[2]);
      if (r.f[3] != 0) x->set_partition(static_cast<std::uint32_t>(r.f[3] - 1));
      break;
    }
    case TraceEvent::kAppended: {
      auto* x = e.mutable_appended();
      x->set_partition(static_cast<std::uint32_t>(r.f[0]));
      x->set_offset(U(r.f[1]));
      x->set_event_time_ns(r.f[2]);
      x->set_visible_at_ns(r.f[3]);
      break;
    }
    case TraceEvent::kLogRead: {
      auto* x = e.mutable_log_read();
      x->set_partition(static_cast<std::uint32_t>(r.f[0]));
      x->set_offset(U(r.f[1]));
      x->set_records(static_cast<std::uint32_t>(r.f[2] & 0xffffffff));
      x->set_out_of_range(((r.f[2] >> 32) & 1) != 0);
      x->set_emptied(((r.f[2] >> 33) & 1) != 0);
      if (x->out_of_range()) {
        x->set_first_retained_offset(U(r.f[3]));
      } else {
        x->set_next_offset(U(r.f[3]));
      }
      break;
    }
    case TraceEvent::kRetentionDeleted: {
      auto* x = e.mutable_retention_deleted();
      x->set_partition(static_cast<std::uint32_t>(r.f[0]));
      x->set_first_retained_offset(U(r.f[1]));
      break;
    }
    case TraceEvent::kPartitionAdded:
      e.mutable_partition_added()->set_partition(static_cast<std::uint32_t>(r.f[0]));
      break;
    case TraceEvent::kBookmarkSaved: {
      auto* x = e.mutable_bookmark_saved();
      x->set_partition(static_cast<std::uint32_t>(r.f[0]));
      x->set_next_offset(U(r.f[1]));
      x->set_lost(r.f[2] != 0);
      break;
    }
    case TraceEvent::kGapReported: {
      auto* x = e.mutable_gap_reported();
      x->set_partition(static_cast<std::uint32_t>(r.f[0]));
      x->set_from_offset(U(r.f[1]));
      x->set_to_offset(U(r.f[2]));
      x->set_step(U(r.f[3]));
      break;
    }
    // Events whose meaning lives in strings keep their kind and numbers; the
    // strings are gone (the oracle describes the failing one when it happens).
    case TraceEvent::kCrashed: e.mutable_crashed()->set_point(CrashPointWords(r.f[0])); break;
    case TraceEvent::kExited: e.mutable_exited(); break;
    case TraceEvent::kProtocolError: e.mutable_protocol_error(); break;
    case TraceEvent::kFaultApplied: e.mutable_fault_applied(); break;
    case TraceEvent::kConnectorError: e.mutable_connector_error()->set_code(static_cast<std::int32_t>(r.f[0])); break;
    case TraceEvent::kCallTimedOut: e.mutable_call_timed_out()->set_bound_wall_ms(r.f[0]); break;
    case TraceEvent::kRunEnded:
      e.mutable_run_ended()->set_published(U(r.f[0]));
      e.mutable_run_ended()->set_committed_messages(U(r.f[1]));
      break;
    case TraceEvent::kLivelock: {
      auto* x = e.mutable_livelock();
      x->set_steps(U(r.f[0]));
      x->set_wall_ms(r.f[1]);
      x->set_by_wall_time(r.f[2] != 0);
      x->set_max_steps(U(r.f[3]));
      break;
    }
    default: break;
  }
  return e;
}

}  // namespace weir
