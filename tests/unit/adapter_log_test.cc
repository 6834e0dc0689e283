// Tests for the log shape of the C++ adapter (adapters/cpp/include/weir/adapter/source.h):
// what a step carries (log records, gaps), what Open and Checkpoint answer for
// a log source, the default broker calls of a queue-only client, the gRPC
// broker client's reading of an out-of-range read (the status, status details
// and trailing metadata of proto/weir/v1/broker.proto, Broker.Read), and the many-readers
// calls (Assign, Revoke, Cut) as the hosts run them.
#include <chrono>
#include <cstdint>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include <grpcpp/grpcpp.h>
#include <gtest/gtest.h>

#include "adapters/cpp/src/call_queue.h"
#include "weir/v1/status_details.pb.h"
#include "adapters/cpp/src/grpc_broker_client.h"
#include "weir/adapter/source.h"
#include "weir/v1/broker.grpc.pb.h"

namespace weir::adapter {
namespace {

// A queue-only broker client: the log calls keep their defaults.
class QueueOnlyBroker : public BrokerClient {
 public:
  BrokerStatus Pull(std::uint32_t, std::vector<v1::Delivery>* out) override {
    out->clear();
    return {};
  }
  BrokerStatus Ack(const std::vector<std::uint64_t>&) override { return {}; }
  BrokerStatus Nack(const std::vector<std::uint64_t>&) override { return {}; }
  BrokerStatus ExtendLease(const std::vector<std::uint64_t>&, std::int64_t,
                           std::vector<std::uint64_t>* rejected) override {
    rejected->clear();
    return {};
  }
};

// A log broker client with canned answers.
class CannedLogBroker : public QueueOnlyBroker {
 public:
  BrokerStatus Read(std::uint32_t partition, std::uint64_t offset, const ReadOptions&, ReadResult* out) override {
    last_partition = partition;
    last_offset = offset;
    *out = ReadResult{};
    BrokerStatus status;
    status.now_ns = answer_now_ns;
    if (offset < first_retained) {
      status.code = grpc::StatusCode::OUT_OF_RANGE;
      status.first_retained_offset = first_retained;
      return status;
    }
    v1::LogRecord& r = out->records.emplace_back();
    r.set_offset(offset);
    r.set_event_time_ns(5);
    out->next_offset = offset + 1;
    out->readable_end = offset + 1;
    out->first_retained_offset = first_retained;
    return status;
  }
  std::uint64_t first_retained = 0;
  std::int64_t answer_now_ns = 0;
  std::uint32_t last_partition = 0;
  std::uint64_t last_offset = 0;
};

class LogSource : public Source {
 public:
  SourceShape shape() const override { return SourceShape::kLog; }
  grpc::Status Open(const OpenInfo&, Context&) override { return grpc::Status::OK; }
  void Advance(Context&) override {}
  std::string Checkpoint(std::uint64_t checkpoint_id, Context&) override {
    order += "checkpoint;";
    return "state-" + std::to_string(checkpoint_id);
  }
  void Committed(std::uint64_t, Context&) override {}
  std::vector<ResumePoint> ResumePoints() override {
    order += "resume-points;";
    return {{0, 17}, {3, 4}};
  }
  std::string order;
};

class QueueSource : public Source {
 public:
  grpc::Status Open(const OpenInfo&, Context&) override { return grpc::Status::OK; }
  void Advance(Context&) override {}
  std::string Checkpoint(std::uint64_t, Context&) override { return "q"; }
  void Committed(std::uint64_t, Context&) override {}
};

TEST(AdapterLog, AStepCarriesLogRecordsAndGapsInOrder) {
  QueueOnlyBroker broker;
  Context ctx(CallKind::kAdvance, 100, broker);
  ctx.ReportGap(2, 10, 14);
  ctx.EmitLogRecord(2, 14, 900, "v14");
  ctx.EmitLogRecord(2, 15, 901);
  v1::AdvanceResponse response;
  ctx.WriteStep(&response);

  ASSERT_TRUE(ctx.misuse().empty());
  ASSERT_EQ(response.records_size(), 2);
  EXPECT_EQ(response.records(0).partition(), 2u);
  ASSERT_TRUE(response.records(0).has_offset());
  EXPECT_EQ(response.records(0).offset(), 14u);
  EXPECT_EQ(response.records(0).event_time_ns(), 900);
  EXPECT_EQ(response.records(0).value(), "v14");
  EXPECT_EQ(response.records(0).message_id(), 0u);
  EXPECT_EQ(response.records(1).offset(), 15u);
  ASSERT_EQ(response.gaps_size(), 1);
  EXPECT_EQ(response.gaps(0).partition(), 2u);
  EXPECT_EQ(response.gaps(0).from_offset(), 10u);
  EXPECT_EQ(response.gaps(0).to_offset(), 14u);
}

TEST(AdapterLog, AQueueRecordCarriesNoOffset) {
  QueueOnlyBroker broker;
  Context ctx(CallKind::kAdvance, 100, broker);
  ctx.Emit(7, 1);
  v1::AdvanceResponse response;
  ctx.WriteStep(&response);
  ASSERT_EQ(response.records_size(), 1);
  EXPECT_FALSE(response.records(0).has_offset());
  EXPECT_EQ(response.gaps_size(), 0);
}

TEST(AdapterLog, GapsAndLogRecordsOutsideAdvanceAreMisuse) {
  QueueOnlyBroker broker;
  Context checkpoint(CallKind::kCheckpoint, 0, broker);
  checkpoint.ReportGap(0, 1, 2);
  EXPECT_NE(checkpoint.misuse().find("ReportGap called during Checkpoint"), std::string::npos);
  Context committed(CallKind::kCommitted, 0, broker);
  committed.EmitLogRecord(0, 1, 2);
  EXPECT_NE(committed.misuse().find("EmitLogRecord called during Committed"), std::string::npos);
}

TEST(AdapterLog, OpenInfoCarriesSpansAndNewPartitions) {
  v1::OpenRequest request;
  request.set_incarnation(3);
  request.set_restore(true);
  request.set_checkpoint_id(9);
  request.set_checkpoint_state("s");
  v1::Span* open = request.add_spans();
  open->set_partition(1);
  open->set_start_offset(40);
  v1::Span* closed = request.add_spans();
  closed->set_partition(2);
  closed->set_start_offset(5);
  closed->set_end_offset(8);
  request.set_new_partitions_held(true);

  const OpenInfo info = OpenInfoFrom(request);
  EXPECT_EQ(info.incarnation, 3u);
  EXPECT_TRUE(info.restore);
  EXPECT_EQ(info.checkpoint_id, 9u);
  EXPECT_EQ(info.checkpoint_state, "s");
  ASSERT_EQ(info.spans.size(), 2u);
  EXPECT_EQ(info.spans[0], (Span{1, 40, std::nullopt}));
  EXPECT_EQ(info.spans[1], (Span{2, 5, 8}));
  EXPECT_TRUE(info.new_partitions_held);
}

TEST(AdapterLog, OpenAnswersTheSourceShape) {
  LogSource log;
  v1::OpenResponse log_answer;
  WriteOpen(log, &log_answer);
  EXPECT_EQ(log_answer.shape(), v1::LOG);

  QueueSource queue;
  v1::OpenResponse queue_answer;
  WriteOpen(queue, &queue_answer);
  // Unset reads as QUEUE; a queue source's answer stays empty on the wire.
  EXPECT_EQ(queue_answer.shape(), v1::SOURCE_SHAPE_UNSPECIFIED);
  EXPECT_EQ(queue_answer.ByteSizeLong(), 0u);
}

TEST(AdapterLog, CheckpointAsksForResumePointsRightAfterTheState) {
  QueueOnlyBroker broker;
  LogSource source;
  Context ctx(CallKind::kCheckpoint, 0, broker);
  v1::CheckpointResponse response;
  RunCheckpoint(source, 4, ctx, &response);
  EXPECT_EQ(source.order, "checkpoint;resume-points;");
  EXPECT_EQ(response.state(), "state-4");
  ASSERT_EQ(response.resume_points_size(), 2);
  EXPECT_EQ(response.resume_points(0).partition(), 0u);
  EXPECT_EQ(response.resume_points(0).next_offset(), 17u);
  EXPECT_EQ(response.resume_points(1).partition(), 3u);
  EXPECT_EQ(response.resume_points(1).next_offset(), 4u);
}

TEST(AdapterLog, AQueueSourceCheckpointHasNoResumePoints) {
  QueueOnlyBroker broker;
  QueueSource source;
  Context ctx(CallKind::kCheckpoint, 0, broker);
  v1::CheckpointResponse response;
  RunCheckpoint(source, 1, ctx, &response);
  EXPECT_EQ(response.state(), "q");
  EXPECT_EQ(response.resume_points_size(), 0);
}

TEST(AdapterLog, AQueueOnlyClientAnswersLogCallsUnimplemented) {
  QueueOnlyBroker broker;
  std::vector<v1::PartitionInfo> partitions(1);
  EXPECT_EQ(broker.ListPartitions(&partitions).code, grpc::StatusCode::UNIMPLEMENTED);
  EXPECT_TRUE(partitions.empty());
  ReadResult read;
  read.records.resize(2);
  EXPECT_EQ(broker.Read(0, 0, {}, &read).code, grpc::StatusCode::UNIMPLEMENTED);
  EXPECT_TRUE(read.records.empty());
  EXPECT_EQ(broker.SaveBookmarks({{0, 1}}).code, grpc::StatusCode::UNIMPLEMENTED);
  std::vector<Bookmark> bookmarks(1);
  EXPECT_EQ(broker.LoadBookmarks(&bookmarks).code, grpc::StatusCode::UNIMPLEMENTED);
  EXPECT_TRUE(bookmarks.empty());
}

TEST(AdapterLog, ReadsThroughTheContextMoveNowAndCarryTheFirstRetainedOffset) {
  CannedLogBroker broker;
  broker.first_retained = 30;
  broker.answer_now_ns = 500;
  Context ctx(CallKind::kAdvance, 100, broker);
  ReadResult got;
  const BrokerStatus gone = ctx.broker().Read(6, 12, {}, &got);
  EXPECT_TRUE(gone.out_of_range());
  ASSERT_TRUE(gone.first_retained_offset.has_value());
  EXPECT_EQ(*gone.first_retained_offset, 30u);
  EXPECT_EQ(ctx.now(), 500);

  broker.answer_now_ns = 700;
  const BrokerStatus read = ctx.broker().Read(6, 30, {}, &got);
  ASSERT_TRUE(read.ok());
  EXPECT_EQ(broker.last_partition, 6u);
  EXPECT_EQ(broker.last_offset, 30u);
  ASSERT_EQ(got.records.size(), 1u);
  EXPECT_TRUE(got.caught_up());
  EXPECT_EQ(ctx.now(), 700);
}

// Many readers.

TEST(AdapterReaders, OpenInfoCarriesTheReaderAndTheSlots) {
  v1::OpenRequest request;
  request.set_reader(2);
  request.set_readers(3);
  const OpenInfo info = OpenInfoFrom(request);
  EXPECT_EQ(info.reader, 2u);
  EXPECT_EQ(info.readers, 3u);

  const OpenInfo single = OpenInfoFrom(v1::OpenRequest());
  EXPECT_EQ(single.reader, 0u);
  EXPECT_EQ(single.readers, 1u) << "unset: one reader";
}

// Records what the many-readers calls were given; Cut answers at the
// proposed offset, or declines when told to.
class SpanSource : public LogSource {
 public:
  grpc::Status Assign(const std::vector<Span>& spans, Context& ctx) override {
    assigned = spans;
    ReadOnce(ctx);
    return assign_answer;
  }
  grpc::Status Revoke(const std::vector<std::uint32_t>& partitions, Context& ctx) override {
    revoked = partitions;
    ReadOnce(ctx);
    return grpc::Status::OK;
  }
  CutAnswer Cut(const Span& held, std::uint64_t at_offset, Context& ctx) override {
    cut_held = held;
    ReadOnce(ctx);
    if (decline) return CutAnswer::Decline(held);
    return CutAnswer{Span{held.partition, held.start_offset, at_offset},
                     Span{held.partition, at_offset, held.end_offset}};
  }
  void ReadOnce(Context& ctx) {
    ReadResult got;
    (void)ctx.broker().Read(0, 0, {}, &got);
    now_after_read = ctx.now();
  }
  std::vector<Span> assigned;
  std::vector<std::uint32_t> revoked;
  std::optional<Span> cut_held;
  grpc::Status assign_answer = grpc::Status::OK;
  bool decline = false;
  std::int64_t now_after_read = 0;
};

v1::AssignRequest AssignOf(std::vector<Span> spans, std::int64_t now_ns = 0) {
  v1::AssignRequest request;
  request.set_now_ns(now_ns);
  for (const Span& span : spans) {
    v1::Span* out = request.add_spans();
    out->set_partition(span.partition);
    out->set_start_offset(span.start_offset);
    if (span.end_offset.has_value()) out->set_end_offset(*span.end_offset);
  }
  return request;
}

v1::CutRequest CutOf(std::uint32_t partition, std::uint64_t at) {
  v1::CutRequest request;
  request.set_partition(partition);
  request.set_at_offset(at);
  return request;
}

Span SpanOf(const v1::Span& s) {
  return Span{s.partition(), s.start_offset(),
              s.has_end_offset() ? std::optional<std::uint64_t>(s.end_offset()) : std::nullopt};
}

TEST(AdapterReaders, ASourceWithoutManyReadersFailsAssignAndRevokeAndDeclinesCuts) {
  QueueOnlyBroker broker;
  LogSource source;  // overrides none of the three
  SpansTold told;
  OpenInfo info;
  info.spans = {{2, 5, std::nullopt}, {4, 1, 9}};
  told.Opened(info);

  Context assign(CallKind::kAssign, 0, broker);
  const grpc::Status assigned = RunAssign(source, AssignOf({{7, 0, {}}}), assign, &told);
  EXPECT_EQ(assigned.error_code(), grpc::StatusCode::UNIMPLEMENTED);
  EXPECT_EQ(told.Held(7), (Span{7, 0, std::nullopt})) << "a failed Assign tells nothing";

  Context revoke(CallKind::kRevoke, 0, broker);
  v1::RevokeRequest request;
  request.add_partitions(2);
  EXPECT_EQ(RunRevoke(source, request, revoke, &told).error_code(), grpc::StatusCode::UNIMPLEMENTED);
  EXPECT_EQ(told.Held(2), (Span{2, 5, std::nullopt})) << "a failed Revoke keeps the span";

  // The decline names the whole span as Open told it.
  for (const Span& span : info.spans) {
    Context cut(CallKind::kCut, 0, broker);
    v1::CutResponse response;
    RunCut(source, CutOf(span.partition, span.start_offset + 1), cut, &told, &response);
    EXPECT_TRUE(cut.misuse().empty());
    EXPECT_EQ(SpanOf(response.head()), span);
    EXPECT_FALSE(response.has_tail());
  }
}

TEST(AdapterReaders, AssignRevokeAndCutReachTheSourceWithTheSpansItHolds) {
  CannedLogBroker broker;
  SpanSource source;
  SpansTold told;
  OpenInfo info;
  info.spans = {{1, 40, std::nullopt}};
  told.Opened(info);

  Context assign(CallKind::kAssign, 10, broker);
  ASSERT_TRUE(RunAssign(source, AssignOf({{3, 7, 20}, {5, 4, {}}}, 10), assign, &told).ok());
  EXPECT_EQ(source.assigned, (std::vector<Span>{{3, 7, 20}, {5, 4, std::nullopt}}));

  // Cut sees the span as told: from Open, from Assign, and untold from 0.
  struct Case {
    std::uint32_t partition;
    Span held;
  };
  for (const Case& c : {Case{1, {1, 40, std::nullopt}}, Case{3, {3, 7, 20}}, Case{9, {9, 0, std::nullopt}}}) {
    source.decline = true;
    Context cut(CallKind::kCut, 0, broker);
    v1::CutResponse response;
    RunCut(source, CutOf(c.partition, 12), cut, &told, &response);
    ASSERT_TRUE(source.cut_held.has_value());
    EXPECT_EQ(*source.cut_held, c.held);
  }

  // After a cut the source holds the head: the next Cut names it.
  source.decline = false;
  Context first(CallKind::kCut, 0, broker);
  v1::CutResponse answer;
  RunCut(source, CutOf(3, 12), first, &told, &answer);
  EXPECT_EQ(SpanOf(answer.head()), (Span{3, 7, 12}));
  ASSERT_TRUE(answer.has_tail());
  EXPECT_EQ(SpanOf(answer.tail()), (Span{3, 12, 20}));
  EXPECT_EQ(told.Held(3), (Span{3, 7, 12}));

  Context revoke(CallKind::kRevoke, 0, broker);
  v1::RevokeRequest request;
  request.add_partitions(3);
  request.add_partitions(1);
  ASSERT_TRUE(RunRevoke(source, request, revoke, &told).ok());
  EXPECT_EQ(source.revoked, (std::vector<std::uint32_t>{3, 1}));
  EXPECT_EQ(told.Held(3), (Span{3, 0, std::nullopt})) << "forgotten";
  EXPECT_EQ(told.Held(5), (Span{5, 4, std::nullopt})) << "not revoked";
  EXPECT_EQ(told.Held(1), (Span{1, 0, std::nullopt}));

  // A reopened source starts from Open's spans alone.
  info.spans = {{3, 50, std::nullopt}};
  told.Opened(info);
  EXPECT_EQ(told.Held(3), (Span{3, 50, std::nullopt}));
}

TEST(AdapterReaders, AnAssignErrorIsTheSourcesOwnStatus) {
  QueueOnlyBroker broker;
  SpanSource source;
  source.assign_answer = grpc::Status(grpc::StatusCode::FAILED_PRECONDITION, "already held");
  SpansTold told;
  Context ctx(CallKind::kAssign, 0, broker);
  const grpc::Status status = RunAssign(source, AssignOf({{3, 7, {}}}), ctx, &told);
  EXPECT_EQ(status.error_code(), grpc::StatusCode::FAILED_PRECONDITION);
  EXPECT_EQ(status.error_message(), "already held");
  EXPECT_EQ(told.Held(3), (Span{3, 0, std::nullopt}));
}

TEST(AdapterReaders, TheBrokerMovesNowInsideTheCallsAndStepsCannotBeShaped) {
  CannedLogBroker broker;
  broker.answer_now_ns = 900;
  SpanSource source;
  SpansTold told;

  Context assign(CallKind::kAssign, 100, broker);
  ASSERT_TRUE(RunAssign(source, AssignOf({{0, 0, {}}}, 100), assign, &told).ok());
  EXPECT_EQ(source.now_after_read, 900);
  EXPECT_EQ(assign.now(), 900);

  Context cut(CallKind::kCut, 950, broker);
  v1::CutResponse response;
  RunCut(source, CutOf(0, 3), cut, &told, &response);
  EXPECT_EQ(cut.now(), 950) << "now never goes back";

  Context revoke(CallKind::kRevoke, 0, broker);
  revoke.EmitLogRecord(0, 1, 2);
  EXPECT_NE(revoke.misuse().find("EmitLogRecord called during Revoke"), std::string::npos);
  Context in_cut(CallKind::kCut, 0, broker);
  in_cut.SetWatermark(5);
  EXPECT_NE(in_cut.misuse().find("SetWatermark called during Cut"), std::string::npos);
  Context in_assign(CallKind::kAssign, 0, broker);
  in_assign.ReportGap(0, 1, 2);
  EXPECT_NE(in_assign.misuse().find("ReportGap called during Assign"), std::string::npos);
}

// Status details as weir sends them (proto/weir/v1/broker.proto): a whole
// google.rpc.Status with the call's code and message and `detail` packed in
// one Any.
std::string Wrapped(grpc::StatusCode code, const std::string& message, const google::protobuf::Message& detail) {
  v1::StatusDetails status;
  status.set_code(code);
  status.set_message(message);
  status.add_details()->PackFrom(detail);
  return status.SerializeAsString();
}

// Status details that say nothing about the first retained offset: the bare
// OffsetOutOfRange weir sent before it wrapped it, another detail type, an
// Any that does not parse, bytes that are no Status at all.
std::string BareDetail(const v1::OffsetOutOfRange& detail) { return detail.SerializeAsString(); }
std::string OtherTypeDetail() {
  v1::RetryAfter other;
  other.set_retry_after_ns(77);
  return Wrapped(grpc::StatusCode::OUT_OF_RANGE, "x", other);
}
std::string GarbledAnyDetail() {
  v1::StatusDetails status;
  status.set_code(grpc::StatusCode::OUT_OF_RANGE);
  google::protobuf::Any* any = status.add_details();
  any->set_type_url("type.googleapis.com/weir.v1.OffsetOutOfRange");
  any->set_value("\xff\xff");
  return status.SerializeAsString();
}

// A Broker service whose Read fails OUT_OF_RANGE the way weir's does, with
// the first retained offset in the trailing metadata, in the status detail
// only, or nowhere; or with status details that do not hold it.
class OutOfRangeBroker final : public v1::Broker::Service {
 public:
  enum class Carry { kMetadata, kDetailOnly, kNothing, kBareDetail, kOtherTypeDetail, kGarbledAny, kGarbage };
  explicit OutOfRangeBroker(Carry carry) : carry_(carry) {}

  grpc::Status Read(grpc::ServerContext* context, const v1::ReadRequest* request, v1::ReadResponse* response) override {
    context->AddTrailingMetadata("weir-now-ns", "4200");
    if (request->offset() >= 77) {
      response->set_now_ns(4300);
      response->set_partition(request->partition());
      v1::LogRecord* r = response->add_records();
      r->set_offset(request->offset());
      response->set_next_offset(request->offset() + 1);
      response->set_first_retained_offset(77);
      response->set_readable_end(request->offset() + 5);
      return grpc::Status::OK;
    }
    v1::OffsetOutOfRange detail;
    detail.set_partition(request->partition());
    detail.set_first_retained_offset(77);
    constexpr grpc::StatusCode kCode = grpc::StatusCode::OUT_OF_RANGE;
    const std::string message = "first retained offset 77";
    switch (carry_) {
      case Carry::kMetadata:
        context->AddTrailingMetadata("weir-first-retained-offset", "77");
        return grpc::Status(kCode, message, Wrapped(kCode, message, detail));
      case Carry::kDetailOnly: return grpc::Status(kCode, message, Wrapped(kCode, message, detail));
      case Carry::kNothing: break;
      case Carry::kBareDetail: return grpc::Status(kCode, message, BareDetail(detail));
      case Carry::kOtherTypeDetail: return grpc::Status(kCode, message, OtherTypeDetail());
      case Carry::kGarbledAny: return grpc::Status(kCode, message, GarbledAnyDetail());
      case Carry::kGarbage: return grpc::Status(kCode, message, "\xff\xff");
    }
    return grpc::Status(grpc::StatusCode::OUT_OF_RANGE, "gone");
  }

 private:
  const Carry carry_;
};

// Runs one Read through a real GrpcBrokerClient against `service`.
BrokerStatus ReadOverGrpc(OutOfRangeBroker::Carry carry, std::uint64_t offset, ReadResult* out) {
  OutOfRangeBroker service(carry);
  grpc::ServerBuilder builder;
  int port = 0;
  builder.AddListeningPort("127.0.0.1:0", grpc::InsecureServerCredentials(), &port);
  builder.RegisterService(&service);
  std::unique_ptr<grpc::Server> server = builder.BuildAndStart();
  EXPECT_NE(port, 0);
  grpc::CompletionQueue queue;
  BrokerStatus status;
  {
    internal::CallQueue calls(&queue);
    internal::GrpcBrokerClient client("127.0.0.1:" + std::to_string(port), std::chrono::seconds(10), calls);
    status = client.Read(3, offset, {}, out);
  }
  server->Shutdown(std::chrono::system_clock::now() + std::chrono::seconds(5));
  queue.Shutdown();
  void* tag;
  bool ok;
  while (queue.Next(&tag, &ok)) {
  }
  return status;
}

TEST(AdapterLogGrpc, OutOfRangeReadCarriesTheFirstRetainedOffsetFromMetadata) {
  ReadResult got;
  const BrokerStatus status = ReadOverGrpc(OutOfRangeBroker::Carry::kMetadata, 12, &got);
  EXPECT_TRUE(status.out_of_range());
  ASSERT_TRUE(status.first_retained_offset.has_value());
  EXPECT_EQ(*status.first_retained_offset, 77u);
  ASSERT_TRUE(status.now_ns.has_value());
  EXPECT_EQ(*status.now_ns, 4200);
  EXPECT_TRUE(got.records.empty());
}

TEST(AdapterLogGrpc, OutOfRangeReadFallsBackToTheStatusDetail) {
  ReadResult got;
  const BrokerStatus status = ReadOverGrpc(OutOfRangeBroker::Carry::kDetailOnly, 12, &got);
  EXPECT_TRUE(status.out_of_range());
  ASSERT_TRUE(status.first_retained_offset.has_value());
  EXPECT_EQ(*status.first_retained_offset, 77u);
}

TEST(AdapterLogGrpc, OutOfRangeReadWithoutTheOffsetLeavesItUnset) {
  ReadResult got;
  const BrokerStatus status = ReadOverGrpc(OutOfRangeBroker::Carry::kNothing, 12, &got);
  EXPECT_TRUE(status.out_of_range());
  EXPECT_FALSE(status.first_retained_offset.has_value());
}

TEST(AdapterLogGrpc, StatusDetailsThatDoNotHoldTheOffsetAreIgnored) {
  using Carry = OutOfRangeBroker::Carry;
  for (const Carry carry : {Carry::kBareDetail, Carry::kOtherTypeDetail, Carry::kGarbledAny, Carry::kGarbage}) {
    SCOPED_TRACE(static_cast<int>(carry));
    ReadResult got;
    const BrokerStatus status = ReadOverGrpc(carry, 12, &got);
    EXPECT_TRUE(status.out_of_range());
    EXPECT_EQ(status.message, "first retained offset 77");
    EXPECT_FALSE(status.first_retained_offset.has_value());
  }
}

TEST(AdapterLogGrpc, ASuccessfulReadReturnsRecordsAndWhereThePartitionStands) {
  ReadResult got;
  const BrokerStatus status = ReadOverGrpc(OutOfRangeBroker::Carry::kMetadata, 80, &got);
  ASSERT_TRUE(status.ok()) << status.message;
  ASSERT_EQ(got.records.size(), 1u);
  EXPECT_EQ(got.records[0].offset(), 80u);
  EXPECT_EQ(got.next_offset, 81u);
  EXPECT_EQ(got.first_retained_offset, 77u);
  EXPECT_EQ(got.readable_end, 85u);
  EXPECT_FALSE(got.caught_up());
  EXPECT_EQ(*status.now_ns, 4300);
  EXPECT_FALSE(status.first_retained_offset.has_value());
}

}  // namespace
}  // namespace weir::adapter
