// File: source.h
//
// The connector side of weir, for C++: a source connector implements Source; a
// host drives it one call at a time and hands each call a Context. The host is
// either Serve() (serve.h: the Connector gRPC service in its own process, what
// weir launches) or weir's in-process harness. The source cannot tell which.
//
// Protocol (lock-step, see proto/weir/v1/connector.proto):
//   Open        starts an incarnation, fresh or restored from a committed checkpoint;
//   Advance     one step: pull, emit records, report a watermark, say when to be
//               called again;
//   Checkpoint  closes the current epoch and returns state that, restored by Open,
//               resumes after every record emitted so far;
//   Committed   commit notice: checkpoint N and every epoch before it are durable.
//               The only moment from which acks for those records are allowed.
//               Sent at most once and never retried.
//
// Two shapes of broker (Source::shape(), fixed by the scenario):
//   queue  (the default) Pull hands out messages with receipts; a record names
//          its message (Context::Emit); Ack after the commit notice removes it.
//   log    partitions, each an append-only sequence of records at offsets
//          0, 1, 2, ...; retention deletes the oldest. The log protocol:
//     Open        OpenInfo::spans are the partitions this reader holds, each from
//                 its resume point (the restored checkpoint's, or the span's first
//                 offset); with new_partitions_held, partitions that appear later
//                 (BrokerClient::ListPartitions) are held too, from offset 0.
//     Advance     Read each held partition from its next offset; emit one record
//                 per log record (Context::EmitLogRecord: partition and offset);
//                 a Read below the first retained offset fails OUT_OF_RANGE with
//                 BrokerStatus::first_retained_offset: the skipped offsets must be
//                 reported (Context::ReportGap) before reading on from there.
//     Checkpoint  also returns, through Source::ResumePoints(), the resume point of
//                 every held partition: the next offset to read after every record
//                 emitted so far. Open hands them back as the spans' start offsets.
//     Committed   the only moment from which SaveBookmarks may store checkpoint N's
//                 resume points at the broker (never anything newer): a bookmark
//                 ahead of the committed resume point is the log twin of an ack
//                 before the commit.
//
// Many readers (log shape; a scenario's readers.count > 1): several connector
// processes read one log, each holding its own spans (at most one per
// partition). OpenInfo::reader/readers say which reader this is; a restored
// reader gets its own last committed state, but OpenInfo::spans are what it
// holds now, which need not be what that state remembers. Three more calls,
// each with the broker usable and none of the step-shaping Context methods:
//     Assign      more spans, each from its resume point;
//     Revoke      spans taken away (whole), right after a commit notice: stop
//                 reading and emitting them at once and forget them;
//     Cut         give up the unread tail of one held span: answer the head kept
//                 and the tail given up (CutAnswer), or decline. A single reader
//                 never sees these calls.
//
// Time: Context::now() is the virtual now. It starts at the call's now and moves
// forward as broker answers arrive. Source code must never read a wall clock and
// must draw any randomness from a PRNG seeded deterministically (e.g. from the
// incarnation), so that a (scenario, seed) pair replays byte for byte.
//
// Thread rules: the host calls the source from one thread at a time and never
// concurrently; a Context and its broker() are used only on the thread of the
// call they were given to, and only during that call.
//
// Example (queue shape):
//   class Scans : public weir::adapter::Source {
//     void Advance(weir::adapter::Context& ctx) override {
//       std::vector<weir::v1::Delivery> got;
//       if (ctx.broker().Pull(64, &got).ok())
//         for (const auto& d : got) ctx.Emit(d.message_id(), d.event_time_ns(), d.payload());
//       ctx.ResumeAt(ctx.now() + 100'000'000);
//     }
//     ...
//   };
//   int main() { Scans s; return weir::adapter::Serve(s); }
//
// Example (log shape; retries, idleness and bookmarks left out, see
// fixtures/connectors/log_reference_source.h for a complete reader):
//   class Buoys : public weir::adapter::Source {
//     weir::adapter::SourceShape shape() const override { return weir::adapter::SourceShape::kLog; }
//     grpc::Status Open(const weir::adapter::OpenInfo& info, weir::adapter::Context&) override {
//       next_.clear();
//       for (const auto& span : info.spans) next_[span.partition] = span.start_offset;
//       return grpc::Status::OK;
//     }
//     void Advance(weir::adapter::Context& ctx) override {
//       for (auto& [partition, next] : next_) {
//         weir::adapter::ReadResult got;
//         weir::adapter::BrokerStatus s = ctx.broker().Read(partition, next, {}, &got);
//         if (s.out_of_range()) {
//           ctx.ReportGap(partition, next, *s.first_retained_offset);
//           next = *s.first_retained_offset;
//         }
//         if (!s.ok()) continue;
//         for (const auto& r : got.records)
//           ctx.EmitLogRecord(partition, r.offset(), r.event_time_ns(), r.payload());
//         next = got.next_offset;
//       }
//     }
//     std::vector<weir::adapter::ResumePoint> ResumePoints() override {
//       std::vector<weir::adapter::ResumePoint> out;
//       for (const auto& [partition, next] : next_) out.push_back({partition, next});
//       return out;
//     }
//     ...
//     std::map<std::uint32_t, std::uint64_t> next_;
//   };
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include <grpcpp/support/status.h>

#include "weir/v1/broker.pb.h"
#include "weir/v1/connector.pb.h"

namespace weir::adapter {

// The outcome of one broker call.
struct BrokerStatus {
  grpc::StatusCode code = grpc::StatusCode::OK;
  std::string message;
  // The virtual now after the call, as the broker reported it (answer's now_ns,
  // or trailing metadata "weir-now-ns" on failure); unset when the broker said
  // nothing (e.g. the call never reached it).
  std::optional<std::int64_t> now_ns;
  // RESOURCE_EXHAUSTED only: the broker's retry-after hint (trailing metadata
  // "retry-after-ms"), in ns. The throttled method must not be called again
  // before now + retry_after_ns; other methods may.
  std::optional<std::int64_t> retry_after_ns;
  // OUT_OF_RANGE only (log shape, Read below the first retained offset): the
  // partition's first retained offset (trailing metadata
  // "weir-first-retained-offset", or the OffsetOutOfRange status detail). Every
  // offset below it is gone: report the skipped ones with Context::ReportGap.
  std::optional<std::uint64_t> first_retained_offset;

  bool ok() const { return code == grpc::StatusCode::OK; }
  bool throttled() const { return code == grpc::StatusCode::RESOURCE_EXHAUSTED; }
  // A transient failure worth retrying after a backoff.
  bool transient() const {
    return code == grpc::StatusCode::UNAVAILABLE || code == grpc::StatusCode::DEADLINE_EXCEEDED;
  }
  bool out_of_range() const { return code == grpc::StatusCode::OUT_OF_RANGE; }
};

// Log shape: a partition and the next offset to read there. The same pair is a
// resume point (in a checkpoint) and a bookmark (stored at the broker).
struct PartitionOffset {
  std::uint32_t partition = 0;
  std::uint64_t next_offset = 0;
  friend bool operator==(const PartitionOffset&, const PartitionOffset&) = default;
};
using ResumePoint = PartitionOffset;
using Bookmark = PartitionOffset;

// Log shape: a partition and a range of its offsets held by the reader:
// [start_offset, end_offset), or open ended (a live log) when end_offset is unset.
struct Span {
  std::uint32_t partition = 0;
  std::uint64_t start_offset = 0;
  std::optional<std::uint64_t> end_offset;
  friend bool operator==(const Span&, const Span&) = default;
};

// Log shape: how much one Read may return.
struct ReadOptions {
  std::uint32_t max_records = 64;
  std::uint32_t max_bytes = 0;   // 0: no byte bound
  std::int64_t max_wait_ns = 0;  // > 0: long poll at the readable end, this long (virtual)
};

// Log shape: what one Read returned.
struct ReadResult {
  // In offset order, consecutive, starting at the requested offset.
  std::vector<v1::LogRecord> records;
  // The offset after the last record returned (the requested offset if none).
  std::uint64_t next_offset = 0;
  std::uint64_t first_retained_offset = 0;
  // The end of what is readable now.
  std::uint64_t readable_end = 0;
  // Nothing more is readable now: next_offset == readable_end.
  bool caught_up() const { return next_offset >= readable_end; }
};

// weir's Broker service as the source sees it. Each call is synchronous and
// bounded in wall time by the implementation; none throws.
class BrokerClient {
 public:
  virtual ~BrokerClient() = default;

  // Replaces *out with up to max deliverable messages, each with a fresh receipt.
  // On error *out is empty.
  [[nodiscard]] virtual BrokerStatus Pull(std::uint32_t max, std::vector<v1::Delivery>* out) = 0;
  // Removes the messages behind these receipts for good. A receipt that no longer
  // holds its message (lease expired, superseded) is ignored by the broker.
  [[nodiscard]] virtual BrokerStatus Ack(const std::vector<std::uint64_t>& receipts) = 0;
  // Makes the messages behind these receipts deliverable again at once.
  [[nodiscard]] virtual BrokerStatus Nack(const std::vector<std::uint64_t>& receipts) = 0;
  // Moves the lease deadline of these receipts to now + extension_ns. Replaces
  // *rejected with the receipts whose lease could not be extended.
  [[nodiscard]] virtual BrokerStatus ExtendLease(const std::vector<std::uint64_t>& receipts, std::int64_t extension_ns,
                                                 std::vector<std::uint64_t>* rejected) = 0;

  // Log shape. The default implementations answer UNIMPLEMENTED (a host that
  // serves only queue sources need not override them).
  //
  // Replaces *out with every partition, its first retained offset and the
  // offset its next appended record will get. On error *out is empty.
  [[nodiscard]] virtual BrokerStatus ListPartitions(std::vector<v1::PartitionInfo>* out);
  // Reads records of `partition` from `offset` on. On success *out holds them and
  // where the partition stands; on error its records are empty. OUT_OF_RANGE:
  // `offset` is below the first retained offset, which the status carries.
  [[nodiscard]] virtual BrokerStatus Read(std::uint32_t partition, std::uint64_t offset, const ReadOptions& options,
                                          ReadResult* out);
  // Stores these bookmarks at the broker. Only resume points of a committed
  // checkpoint may be saved (see the log protocol at the top of this file).
  [[nodiscard]] virtual BrokerStatus SaveBookmarks(const std::vector<Bookmark>& bookmarks);
  // Replaces *out with the bookmarks stored so far (never-bookmarked partitions
  // are left out).
  [[nodiscard]] virtual BrokerStatus LoadBookmarks(std::vector<Bookmark>* out);
};

// Which connector call a Context belongs to.
enum class CallKind { kOpen, kAdvance, kCheckpoint, kCommitted, kAssign, kRevoke, kCut };

// Given to every Source call. Collects what an Advance produces and keeps the
// virtual now.
//
// Invariants: now() never decreases; the step-shaping methods (Emit,
// EmitLogRecord, ReportGap, SetWatermark, ResumeAt, Finish) are valid only in an
// Advance call — elsewhere
// they are ignored and recorded as misuse, which the host turns into a failed
// call (FAILED_PRECONDITION) so the mistake surfaces as a connector-error.
class Context {
 public:
  // For hosts. REQUIRES: broker outlives the context.
  Context(CallKind call, std::int64_t now_ns, BrokerClient& broker);
  Context(const Context&) = delete;
  Context& operator=(const Context&) = delete;

  // The virtual now in ns. Moves forward as broker calls return.
  std::int64_t now() const { return now_ns_; }
  CallKind call() const { return call_; }
  // The broker. Every call through it moves now() to the answer's virtual now.
  BrokerClient& broker() { return clocked_; }

  // Advance only. Adds a record produced from message `message_id`.
  void Emit(std::uint64_t message_id, std::int64_t event_time_ns, std::string value = {});
  // Advance only, log shape. Adds a record produced from the log record at
  // (partition, offset).
  void EmitLogRecord(std::uint32_t partition, std::uint64_t offset, std::int64_t event_time_ns, std::string value = {});
  // Advance only, log shape. Offsets [from_offset, to_offset) of `partition` will
  // never be emitted: retention deleted them before they could be read. A reader
  // that skips offsets must say so; skipping silently is a violation.
  void ReportGap(std::uint32_t partition, std::uint64_t from_offset, std::uint64_t to_offset);
  // Advance only. The watermark after this step's records; the last call wins.
  // Unset: the step reports no watermark.
  void SetWatermark(std::int64_t watermark_ns);
  // Advance only. Call Advance again at this virtual time (a time already past
  // means now()). The last of ResumeAt/Finish wins. With neither, the step asks
  // to be called again at now() + kDefaultResumeDelayNs.
  void ResumeAt(std::int64_t at_ns);
  // Advance only. No more work will ever come from this source.
  void Finish();

  static constexpr std::int64_t kDefaultResumeDelayNs = 100'000'000;  // 100 ms virtual

  // For hosts, after the source returned: writes records, gaps, watermark and
  // resume_at/finished into *response (applying the default resume rule).
  // REQUIRES: call() == CallKind::kAdvance.
  void WriteStep(v1::AdvanceResponse* response);
  // For hosts: empty, or what the source did that its call does not allow.
  const std::string& misuse() const { return misuse_; }

 private:
  // Forwards to the host's broker and moves now() from each answer.
  class ClockedBroker final : public BrokerClient {
   public:
    ClockedBroker(BrokerClient& inner, Context& ctx) : inner_(inner), ctx_(ctx) {}
    BrokerStatus Pull(std::uint32_t max, std::vector<v1::Delivery>* out) override;
    BrokerStatus Ack(const std::vector<std::uint64_t>& receipts) override;
    BrokerStatus Nack(const std::vector<std::uint64_t>& receipts) override;
    BrokerStatus ExtendLease(const std::vector<std::uint64_t>& receipts, std::int64_t extension_ns,
                             std::vector<std::uint64_t>* rejected) override;
    BrokerStatus ListPartitions(std::vector<v1::PartitionInfo>* out) override;
    BrokerStatus Read(std::uint32_t partition, std::uint64_t offset, const ReadOptions& options,
                      ReadResult* out) override;
    BrokerStatus SaveBookmarks(const std::vector<Bookmark>& bookmarks) override;
    BrokerStatus LoadBookmarks(std::vector<Bookmark>* out) override;

   private:
    BrokerStatus Observe(BrokerStatus status);
    BrokerClient& inner_;
    Context& ctx_;
  };

  // False (and misuse recorded) when `method` is not allowed in this call.
  bool AllowedHere(const char* method);

  const CallKind call_;
  std::int64_t now_ns_;
  ClockedBroker clocked_;
  std::vector<v1::Record> records_;
  std::vector<v1::Gap> gaps_;
  std::optional<std::int64_t> watermark_ns_;
  std::optional<std::int64_t> resume_at_ns_;
  bool finished_ = false;
  std::string misuse_;
};

// What Open is told.
struct OpenInfo {
  std::uint64_t incarnation = 0;  // 1 for the first life of the connector, then 2, ...
  bool restore = false;           // true: restore from the committed checkpoint below
  std::uint64_t checkpoint_id = 0;
  std::string checkpoint_state;  // bytes the source returned from Checkpoint(checkpoint_id)
  // The broker redelivers an acked message no later than this long after the ack,
  // so dedup memory of acked messages may be dropped after it.
  std::int64_t redelivery_horizon_ns = 0;
  // Log shape: the spans this reader holds, each from its resume point.
  std::vector<Span> spans;
  // Log shape: partitions that appear after Open are held too, from offset 0.
  bool new_partitions_held = false;
  // Many readers: this reader's index (0-based) and how many reader slots the
  // run has (1 when the request leaves it unset: a single reader).
  std::uint32_t reader = 0;
  std::uint32_t readers = 1;
};

// Many readers, log shape: what a Cut answers. For the cut offset c the reader
// chose (never below an offset it has emitted from the span): head = [the held
// span's start, c), tail = [c, the held span's end); disjoint, together exactly
// the held span, the head holding every offset emitted from it. Without a tail
// the reader declines and the head is the whole held span.
struct CutAnswer {
  Span head;
  std::optional<Span> tail;
  // Declines: keeps all of `held`.
  static CutAnswer Decline(const Span& held) { return CutAnswer{held, std::nullopt}; }
};

// Which shape of broker a source reads (OpenResponse.shape); it must be the
// scenario's.
enum class SourceShape { kQueue, kLog };

// A source connector. The host calls Open first (again on every new incarnation,
// possibly on the same object: Open must reset all state), then any sequence of
// Advance, Checkpoint and Committed, one at a time.
//
// Errors: an exception that escapes a call fails that call with INTERNAL
// ("source threw during Advance: …"), a misuse of the Context with
// FAILED_PRECONDITION, a non-OK status from Open with that status; the process
// keeps serving. weir reports every such error status as connector-error (in
// Open from a committed checkpoint: bad-checkpoint). protocol-error is for
// malformed exchanges: an answer that does not parse or exceeds the receive
// limit (RESOURCE_EXHAUSTED), an unserved method (UNIMPLEMENTED), records of
// messages never delivered, impossible times. DEADLINE_EXCEEDED is step-timeout;
// a process that ended is unexpected-exit.
class Source {
 public:
  virtual ~Source() = default;

  // Starts an incarnation. A non-OK status means the incarnation cannot start;
  // with info.restore set, weir reports it as a bad checkpoint.
  [[nodiscard]] virtual grpc::Status Open(const OpenInfo& info, Context& ctx) = 0;
  // One step: do a unit of work now and shape the step through ctx.
  virtual void Advance(Context& ctx) = 0;
  // Closes the current epoch as checkpoint `checkpoint_id` and returns state that,
  // restored by Open, resumes after every record emitted so far.
  virtual std::string Checkpoint(std::uint64_t checkpoint_id, Context& ctx) = 0;
  // Commit notice: checkpoint `checkpoint_id` and every epoch before it are durable.
  virtual void Committed(std::uint64_t checkpoint_id, Context& ctx) = 0;

  // The shape of broker this source reads. Default: queue.
  virtual SourceShape shape() const { return SourceShape::kQueue; }
  // Log shape: called right after Checkpoint returned, in the same connector
  // call: the resume point of every partition the reader holds (the next offset
  // to read after every record emitted so far). Default: none (queue shape).
  virtual std::vector<ResumePoint> ResumePoints() { return {}; }

  // Many readers, log shape (see the protocol at the top of this file). A
  // non-OK status from Assign or Revoke fails the call with that status (a
  // connector-error). Defaults: Assign and Revoke answer UNIMPLEMENTED, so a
  // source that does not override them fails any run with several readers
  // that moves spans; Cut declines.
  //
  // Takes up `spans`, each from its start offset (its resume point); an open
  // end means the live log. Never a partition the reader already holds.
  [[nodiscard]] virtual grpc::Status Assign(const std::vector<Span>& spans, Context& ctx);
  // Gives up the spans of `partitions` (whole): nothing of them is read or
  // emitted from now on.
  [[nodiscard]] virtual grpc::Status Revoke(const std::vector<std::uint32_t>& partitions, Context& ctx);
  // Gives up the unread tail of the span it holds of `held.partition`, the
  // runtime asking for the tail to begin at `at_offset`. `held` is the span as
  // the host told it to the source (Open, Assign, earlier Cut answers; from
  // offset 0 for a partition taken up through new_partitions_held); the
  // source's own view wins where they differ.
  [[nodiscard]] virtual CutAnswer Cut(const Span& held, std::uint64_t at_offset, Context& ctx);
};

// For hosts (Serve, weir's in-process harness): the same translation of the
// wire messages for both, so a source cannot tell them apart.
//
// What Open is told, from the request.
OpenInfo OpenInfoFrom(const v1::OpenRequest& request);
// Writes what Open answers about the source (its shape; unset for a queue
// source, which the contract reads as QUEUE) into *response.
void WriteOpen(const Source& source, v1::OpenResponse* response);
// Runs Checkpoint and then ResumePoints, writing both into *response.
void RunCheckpoint(Source& source, std::uint64_t checkpoint_id, Context& ctx, v1::CheckpointResponse* response);

// Many readers. The spans a source has been told it holds, kept by a host so
// that Cut can name the held span: reset by Open, grown by Assign, shrunk by
// Revoke, and narrowed to the head of each Cut answer. A partition never told
// (taken up through new_partitions_held) is held from offset 0, open ended.
class SpansTold {
 public:
  void Opened(const OpenInfo& info);
  void Assigned(const std::vector<Span>& spans);
  void Revoked(const std::vector<std::uint32_t>& partitions);
  void Cut(const CutAnswer& answer);
  Span Held(std::uint32_t partition) const;

 private:
  std::vector<Span> spans_;  // by partition, ascending
};

// Runs Assign / Revoke with the request's spans or partitions, keeping *told.
[[nodiscard]] grpc::Status RunAssign(Source& source, const v1::AssignRequest& request, Context& ctx, SpansTold* told);
[[nodiscard]] grpc::Status RunRevoke(Source& source, const v1::RevokeRequest& request, Context& ctx, SpansTold* told);
// Runs Cut on the held span of the request's partition and writes the answer
// into *response, keeping *told.
void RunCut(Source& source, const v1::CutRequest& request, Context& ctx, SpansTold* told, v1::CutResponse* response);

}  // namespace weir::adapter
