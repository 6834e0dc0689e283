#include "harness/trace/describe.h"

#include "absl/strings/str_cat.h"
#include "harness/core/virtual_time.h"

namespace weir {
namespace {

std::string Watermark(bool has, std::int64_t value) { return has ? FormatTime(value) : std::string("none"); }

// "partition 3 [120, 200)" or "partition 3 [120, open)".
std::string Span(const v1::SpanHeld& s) {
  return absl::StrCat("partition ", s.partition(), " [", s.start_offset(), ", ",
                      s.has_end_offset() ? absl::StrCat(s.end_offset()) : std::string("open"), ")");
}

std::string Spans(const google::protobuf::RepeatedPtrField<v1::SpanHeld>& spans) {
  std::string out;
  for (const auto& s : spans) absl::StrAppend(&out, out.empty() ? "" : ", ", Span(s));
  return out.empty() ? std::string("no spans") : out;
}

}  // namespace

std::string DescribeEvent(const v1::TraceEvent& e) {
  using v1::TraceEvent;
  switch (e.kind_case()) {
    case TraceEvent::kPublished:
      return absl::StrCat("published message ", e.published().message_id(), " (event time ",
                          FormatTime(e.published().event_time_ns()), ")");
    case TraceEvent::kDelivered:
      return absl::StrCat("delivered message ", e.delivered().message_id(), " (receipt ", e.delivered().receipt(),
                          ", attempt ", e.delivered().attempt(), ", lease until ",
                          FormatTime(e.delivered().lease_deadline_ns()), ")");
    case TraceEvent::kEmitted:
      if (e.emitted().has_offset()) {
        return absl::StrCat("emitted a record of partition ", e.emitted().partition(), " offset ", e.emitted().offset(),
                            " in step ", e.emitted().step(), " (event time ", FormatTime(e.emitted().event_time_ns()),
                            ")");
      }
      return absl::StrCat("emitted a record of message ", e.emitted().message_id(), " in step ", e.emitted().step(),
                          " (event time ", FormatTime(e.emitted().event_time_ns()), ")");
    case TraceEvent::kStepped:
      return absl::StrCat("step ", e.stepped().step(), " ended: ", e.stepped().records(), " records, watermark ",
                          Watermark(e.stepped().has_watermark_ns(), e.stepped().watermark_ns()),
                          e.stepped().finished() ? std::string(", finished")
                                                 : absl::StrCat(", resume at ", FormatTime(e.stepped().resume_at_ns())),
                          e.stepped().broker_idle() ? ", broker idle" : "");
    case TraceEvent::kCheckpoint:
      return absl::StrCat("took checkpoint ", e.checkpoint().checkpoint_id(), " (", e.checkpoint().records(),
                          " records in the epoch, watermark ",
                          Watermark(e.checkpoint().has_watermark_ns(), e.checkpoint().watermark_ns()), ")");
    case TraceEvent::kCommitted: return absl::StrCat("committed checkpoint ", e.committed().checkpoint_id());
    case TraceEvent::kCommitFailed:
      return absl::StrCat("commit of checkpoint ", e.commit_failed().checkpoint_id(), " failed");
    case TraceEvent::kCommitNotice:
      return absl::StrCat("sent the commit notice for checkpoint ", e.commit_notice().checkpoint_id());
    case TraceEvent::kAcked:
      return absl::StrCat("broker received an ack for message ", e.acked().message_id(), " (receipt ",
                          e.acked().receipt(), ")");
    case TraceEvent::kNacked:
      return absl::StrCat("broker received a nack for message ", e.nacked().message_id(), " (receipt ",
                          e.nacked().receipt(), ")");
    case TraceEvent::kLeaseExtended:
      return absl::StrCat("extended the lease of message ", e.lease_extended().message_id(), " to ",
                          FormatTime(e.lease_extended().lease_deadline_ns()));
    case TraceEvent::kLeaseExpired:
      return absl::StrCat("lease of message ", e.lease_expired().message_id(), " (receipt ",
                          e.lease_expired().receipt(), ") expired");
    case TraceEvent::kOpened:
      return e.opened().restored()
                 ? absl::StrCat("opened incarnation ", e.incarnation(), " from checkpoint ", e.opened().checkpoint_id(),
                                " (committed watermark ",
                                Watermark(e.opened().has_watermark_ns(), e.opened().watermark_ns()), ")")
                 : absl::StrCat("opened incarnation ", e.incarnation(), " fresh");
    case TraceEvent::kCrashed: return absl::StrCat("crashed the connector at ", e.crashed().point());
    case TraceEvent::kExited: return absl::StrCat("connector exited: ", e.exited().status());
    case TraceEvent::kProtocolError:
      return absl::StrCat("protocol error in ", e.protocol_error().call(), ": ", e.protocol_error().detail());
    case TraceEvent::kLivelock:
      return absl::StrCat("stopped the connector: ", e.livelock().steps(), " steps in a row at the same virtual time",
                          e.livelock().by_wall_time()
                              ? absl::StrCat(" for ", e.livelock().wall_ms(), " ms of wall time")
                              : std::string(),
                          " (livelock)");
    case TraceEvent::kConnectorError:
      return absl::StrCat("connector reported an error in ", e.connector_error().call(), ": ",
                          e.connector_error().detail());
    case TraceEvent::kAckIgnored:
      return absl::StrCat("broker ignored receipt ", e.ack_ignored().receipt(), " (", e.ack_ignored().reason(), ")");
    case TraceEvent::kRunEnded: return absl::StrCat("run ended: ", e.run_ended().reason());
    case TraceEvent::kCallTimedOut:
      if (e.call_timed_out().call() == "Start") {
        return absl::StrCat("the connector reported no address within ", e.call_timed_out().bound_wall_ms(),
                            " ms of wall time");
      }
      return absl::StrCat(e.call_timed_out().call(), " did not answer within ", e.call_timed_out().bound_wall_ms(),
                          " ms of wall time");
    case TraceEvent::kBrokerCallFailed: {
      const auto& x = e.broker_call_failed();
      const char* what = x.code() == 8    ? "RESOURCE_EXHAUSTED (throttled)"
                         : x.code() == 14 ? "UNAVAILABLE"
                         : x.code() == 4  ? "DEADLINE_EXCEEDED"
                         : x.code() == 11 ? "OUT_OF_RANGE"
                         : x.code() == 3  ? "INVALID_ARGUMENT"
                                          : "an error";
      return absl::StrCat(
          "broker answered ", x.method(), x.has_partition() ? absl::StrCat(" of partition ", x.partition()) : "",
          " with ", what,
          x.retry_after_ns() > 0 ? absl::StrCat(", retry after ", FormatTime(x.retry_after_ns())) : std::string());
    }
    case TraceEvent::kFaultApplied: {
      std::string text = e.fault_applied().decision().ShortDebugString();
      return absl::StrCat("fault applied: ", text);
    }
    case TraceEvent::kBrokerCall:
      return absl::StrCat(
          "connector called ", e.broker_call().method(), " #", e.broker_call().position(),
          e.broker_call().has_partition() ? absl::StrCat(" (partition ", e.broker_call().partition(), ")") : "");
    case TraceEvent::kAppended:
      return absl::StrCat("appended partition ", e.appended().partition(), " offset ", e.appended().offset(),
                          " (event time ", FormatTime(e.appended().event_time_ns()),
                          e.appended().visible_at_ns() > 0
                              ? absl::StrCat(", readable from ", FormatTime(e.appended().visible_at_ns()))
                              : "",
                          ")");
    case TraceEvent::kLogRead: {
      const auto& x = e.log_read();
      if (x.out_of_range()) {
        return absl::StrCat("read of partition ", x.partition(), " at offset ", x.offset(),
                            " out of range (first retained offset ", x.first_retained_offset(), ")");
      }
      return absl::StrCat("read partition ", x.partition(), " from offset ", x.offset(), ": ", x.records(),
                          " records, next offset ", x.next_offset(), x.emptied() ? " (emptied by a fault)" : "");
    }
    case TraceEvent::kRetentionDeleted:
      return absl::StrCat("retention deleted partition ", e.retention_deleted().partition(), " below offset ",
                          e.retention_deleted().first_retained_offset());
    case TraceEvent::kPartitionAdded: return absl::StrCat("partition ", e.partition_added().partition(), " was added");
    case TraceEvent::kBookmarkSaved:
      return absl::StrCat("broker received a bookmark for partition ", e.bookmark_saved().partition(), " at offset ",
                          e.bookmark_saved().next_offset(), e.bookmark_saved().lost() ? " (lost by a fault)" : "");
    case TraceEvent::kAssigned:
      return absl::StrCat("reader ", e.reader(), " was assigned ", Spans(e.assigned().spans()), " (",
                          e.assigned().why(), ")");
    case TraceEvent::kRevoked:
      return absl::StrCat("reader ", e.reader(), " gave up ", Spans(e.revoked().spans()), " (", e.revoked().why(), ")");
    case TraceEvent::kCut:
      return absl::StrCat("reader ", e.reader(), " cut ", Span(e.cut().held()), " (asked at offset ",
                          e.cut().at_offset(), "): keeps ", Span(e.cut().head()),
                          e.cut().has_tail()
                              ? absl::StrCat(", gives ", Span(e.cut().tail()), " to reader ", e.cut().to_reader())
                              : std::string(", declined"));
    case TraceEvent::kReaderLeft: return absl::StrCat("reader ", e.reader(), " left");
    case TraceEvent::kReaderJoined: return absl::StrCat("reader ", e.reader(), " joined");
    case TraceEvent::kGapReported:
      return absl::StrCat("step ", e.gap_reported().step(), " reported a gap in partition ",
                          e.gap_reported().partition(), ": offsets [", e.gap_reported().from_offset(), ", ",
                          e.gap_reported().to_offset(), ")");
    case TraceEvent::KIND_NOT_SET: break;
  }
  return "unknown event";
}

}  // namespace weir
