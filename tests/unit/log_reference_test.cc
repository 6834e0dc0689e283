// Tests for the log reference connector (fixtures/connectors/log_reference_source.h)
// against a small in-memory log: what it emits, the gaps it reports, the resume
// points and bookmarks it gives, its watermark and its broker calls while idle,
// and with several readers its spans (Assign, Revoke, Cut) and the readers
// mutants.
// weir's own log broker and oracle judge it end to end (log scenarios and the
// detection matrix); these pin the behaviour its header promises.
#include "fixtures/connectors/log_reference_source.h"

#include <algorithm>
#include <cstdint>
#include <map>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include <gtest/gtest.h>

#include "log_reference_state.pb.h"

namespace weir::fixtures {
namespace {

using adapter::BrokerStatus;
using adapter::CallKind;
using adapter::Context;
using adapter::ResumePoint;

constexpr std::int64_t kMs = 1'000'000;
constexpr std::int64_t kSecond = 1'000 * kMs;

// A log of partitions in memory; every answer carries the test's virtual now.
class FakeLog : public adapter::BrokerClient {
 public:
  struct Part {
    std::uint64_t first_retained = 0;
    std::vector<std::int64_t> event_times;  // offset -> event time
  };

  void Append(std::uint32_t partition, std::int64_t event_time_ns, int count = 1) {
    for (int i = 0; i < count; ++i) parts[partition].event_times.push_back(event_time_ns);
  }

  BrokerStatus Pull(std::uint32_t, std::vector<v1::Delivery>* out) override {
    out->clear();
    return Fail(grpc::StatusCode::FAILED_PRECONDITION);
  }
  BrokerStatus Ack(const std::vector<std::uint64_t>&) override { return Fail(grpc::StatusCode::FAILED_PRECONDITION); }
  BrokerStatus Nack(const std::vector<std::uint64_t>&) override { return Fail(grpc::StatusCode::FAILED_PRECONDITION); }
  BrokerStatus ExtendLease(const std::vector<std::uint64_t>&, std::int64_t, std::vector<std::uint64_t>*) override {
    return Fail(grpc::StatusCode::FAILED_PRECONDITION);
  }

  BrokerStatus ListPartitions(std::vector<v1::PartitionInfo>* out) override {
    out->clear();
    ++lists;
    calls.push_back("ListPartitions");
    for (const auto& [id, p] : parts) {
      v1::PartitionInfo& info = out->emplace_back();
      info.set_partition(id);
      info.set_first_retained_offset(p.first_retained);
      info.set_next_offset(p.event_times.size());
    }
    return Ok();
  }

  BrokerStatus Read(std::uint32_t partition, std::uint64_t offset, const adapter::ReadOptions& options,
                    adapter::ReadResult* out) override {
    *out = adapter::ReadResult{};
    out->next_offset = offset;
    ++reads;
    calls.push_back("Read " + std::to_string(partition) + "@" + std::to_string(offset));
    if (throttle_reads_until_ns > now_ns) {
      BrokerStatus st = Fail(grpc::StatusCode::RESOURCE_EXHAUSTED);
      st.retry_after_ns = throttle_reads_until_ns - now_ns;
      return st;
    }
    if (unavailable.count(partition) != 0) return Fail(grpc::StatusCode::UNAVAILABLE);
    const Part& p = parts.at(partition);
    if (offset < p.first_retained || offset > p.event_times.size()) {
      BrokerStatus st = Fail(grpc::StatusCode::OUT_OF_RANGE);
      st.first_retained_offset = p.first_retained;
      return st;
    }
    const std::uint64_t end = p.event_times.size();
    for (std::uint64_t o = offset; o < end && out->records.size() < options.max_records; ++o) {
      v1::LogRecord& r = out->records.emplace_back();
      r.set_offset(o);
      r.set_event_time_ns(p.event_times[o]);
    }
    out->next_offset = offset + out->records.size();
    out->first_retained_offset = p.first_retained;
    out->readable_end = end;
    return Ok();
  }

  BrokerStatus SaveBookmarks(const std::vector<adapter::Bookmark>& bookmarks) override {
    calls.push_back("SaveBookmarks");
    if (failing_saves > 0) {
      --failing_saves;
      return Fail(grpc::StatusCode::UNAVAILABLE);
    }
    saves.push_back(bookmarks);
    return Ok();
  }

  std::int64_t now_ns = 0;
  std::map<std::uint32_t, Part> parts;
  std::map<std::uint32_t, bool> unavailable;
  std::int64_t throttle_reads_until_ns = 0;
  int failing_saves = 0;  // this many SaveBookmarks calls fail UNAVAILABLE
  int lists = 0;
  int reads = 0;
  std::vector<std::string> calls;
  std::vector<std::vector<adapter::Bookmark>> saves;

 private:
  BrokerStatus Ok() const {
    BrokerStatus st;
    st.now_ns = now_ns;
    return st;
  }
  BrokerStatus Fail(grpc::StatusCode code) const {
    BrokerStatus st;
    st.code = code;
    st.now_ns = now_ns;
    return st;
  }
};

// One emitted record, as a step answer carries it.
struct Emitted {
  std::uint32_t partition;
  std::uint64_t offset;
  std::int64_t event_time_ns;
};

// Drives a LogReferenceSource over a FakeLog in virtual time.
class Driver {
 public:
  explicit Driver(LogBugs bugs = {}, Options options = {}) : source(bugs, options) {}

  grpc::Status Open(std::vector<adapter::Span> spans, bool new_partitions_held = true,
                    std::optional<std::pair<std::uint64_t, std::string>> restore = std::nullopt) {
    Context ctx(CallKind::kOpen, log.now_ns, log);
    adapter::OpenInfo info;
    info.incarnation = ++incarnation;
    info.spans = std::move(spans);
    info.new_partitions_held = new_partitions_held;
    info.readers = readers;
    if (restore.has_value()) {
      info.restore = true;
      info.checkpoint_id = restore->first;
      info.checkpoint_state = restore->second;
    }
    next_step_ns = log.now_ns;
    grpc::Status status = source.Open(info, ctx);
    if (status.ok()) told.Opened(info);
    return status;
  }

  // Many readers, through the adapter's host helpers (as Serve runs them).
  grpc::Status Assign(const std::vector<adapter::Span>& spans) {
    Context ctx(CallKind::kAssign, log.now_ns, log);
    v1::AssignRequest request;
    request.set_now_ns(log.now_ns);
    for (const adapter::Span& span : spans) {
      v1::Span* out = request.add_spans();
      out->set_partition(span.partition);
      out->set_start_offset(span.start_offset);
      if (span.end_offset.has_value()) out->set_end_offset(*span.end_offset);
    }
    grpc::Status status = adapter::RunAssign(source, request, ctx, &told);
    EXPECT_TRUE(ctx.misuse().empty()) << ctx.misuse();
    next_step_ns = std::min(next_step_ns, log.now_ns);  // the runtime steps it soon
    return status;
  }

  grpc::Status Revoke(const std::vector<std::uint32_t>& partitions) {
    Context ctx(CallKind::kRevoke, log.now_ns, log);
    v1::RevokeRequest request;
    for (std::uint32_t p : partitions) request.add_partitions(p);
    grpc::Status status = adapter::RunRevoke(source, request, ctx, &told);
    EXPECT_TRUE(ctx.misuse().empty()) << ctx.misuse();
    return status;
  }

  // The answer as (head, tail).
  std::pair<adapter::Span, std::optional<adapter::Span>> Cut(std::uint32_t partition, std::uint64_t at) {
    Context ctx(CallKind::kCut, log.now_ns, log);
    v1::CutRequest request;
    request.set_partition(partition);
    request.set_at_offset(at);
    v1::CutResponse response;
    adapter::RunCut(source, request, ctx, &told, &response);
    EXPECT_TRUE(ctx.misuse().empty()) << ctx.misuse();
    auto span_of = [](const v1::Span& sp) {
      return adapter::Span{sp.partition(), sp.start_offset(),
                           sp.has_end_offset() ? std::optional<std::uint64_t>(sp.end_offset()) : std::nullopt};
    };
    std::optional<adapter::Span> tail;
    if (response.has_tail()) tail = span_of(response.tail());
    return {span_of(response.head()), tail};
  }

  // One Advance at the time the previous one asked for.
  v1::AdvanceResponse Step() {
    log.now_ns = std::max(log.now_ns, next_step_ns);
    Context ctx(CallKind::kAdvance, log.now_ns, log);
    source.Advance(ctx);
    EXPECT_TRUE(ctx.misuse().empty()) << ctx.misuse();
    v1::AdvanceResponse response;
    ctx.WriteStep(&response);
    for (const v1::Record& r : response.records()) {
      emitted.push_back({r.partition(), r.offset(), r.event_time_ns()});
    }
    for (const v1::Gap& g : response.gaps()) gaps.push_back(g);
    if (response.has_watermark_ns()) watermarks.push_back(response.watermark_ns());
    next_step_ns = response.resume_at_ns();
    return response;
  }

  // Steps until virtual time reaches `until_ns`.
  void RunUntil(std::int64_t until_ns) {
    for (int i = 0; i < 100'000 && next_step_ns <= until_ns; ++i) Step();
  }

  v1::CheckpointResponse Checkpoint(std::uint64_t id) {
    Context ctx(CallKind::kCheckpoint, log.now_ns, log);
    v1::CheckpointResponse response;
    adapter::RunCheckpoint(source, id, ctx, &response);
    return response;
  }

  void Committed(std::uint64_t id) {
    Context ctx(CallKind::kCommitted, log.now_ns, log);
    source.Committed(id, ctx);
  }

  std::vector<std::uint64_t> OffsetsOf(std::uint32_t partition) const {
    std::vector<std::uint64_t> out;
    for (const Emitted& e : emitted) {
      if (e.partition == partition) out.push_back(e.offset);
    }
    return out;
  }

  FakeLog log;
  LogReferenceSource source;
  adapter::SpansTold told;
  std::uint32_t readers = 1;
  std::uint64_t incarnation = 0;
  std::int64_t next_step_ns = 0;
  std::vector<Emitted> emitted;
  std::vector<v1::Gap> gaps;
  std::vector<std::int64_t> watermarks;
};

std::vector<std::uint64_t> Range(std::uint64_t from, std::uint64_t to) {
  std::vector<std::uint64_t> out;
  for (std::uint64_t o = from; o < to; ++o) out.push_back(o);
  return out;
}

std::vector<std::pair<std::uint32_t, std::uint64_t>> Pairs(const std::vector<ResumePoint>& points) {
  std::vector<std::pair<std::uint32_t, std::uint64_t>> out;
  for (const ResumePoint& p : points) out.emplace_back(p.partition, p.next_offset);
  return out;
}

std::vector<std::pair<std::uint32_t, std::uint64_t>> Pairs(const v1::CheckpointResponse& response) {
  std::vector<std::pair<std::uint32_t, std::uint64_t>> out;
  for (const v1::ResumePoint& p : response.resume_points()) out.emplace_back(p.partition(), p.next_offset());
  return out;
}

TEST(LogReference, EmitsEveryOffsetOfEveryPartitionOnceFromItsSpanStart) {
  Driver d;
  d.log.Append(0, 1 * kSecond, 150);
  d.log.Append(1, 1 * kSecond, 150);
  d.log.Append(2, 1 * kSecond, 3);
  ASSERT_TRUE(d.Open({{0, 0, {}}, {1, 40, {}}, {2, 0, {}}}).ok());
  d.RunUntil(2 * kSecond);
  EXPECT_EQ(d.OffsetsOf(0), Range(0, 150));
  EXPECT_EQ(d.OffsetsOf(1), Range(40, 150));
  EXPECT_EQ(d.OffsetsOf(2), Range(0, 3));
  EXPECT_TRUE(d.gaps.empty());
  EXPECT_EQ(d.source.shape(), adapter::SourceShape::kLog);
}

TEST(LogReference, ReadsNoMoreThanAPageOfRecordsPerRead) {
  Driver d;
  d.log.Append(0, 0, 200);
  ASSERT_TRUE(d.Open({{0, 0, {}}}).ok());
  const v1::AdvanceResponse first = d.Step();
  EXPECT_EQ(first.records_size(), static_cast<int>(LogReferenceSource::kMaxRecords));
  EXPECT_EQ(first.resume_at_ns(), d.log.now_ns) << "more to read: called again at once";
}

TEST(LogReference, StopsAtTheEndOfAClosedSpan) {
  Driver d;
  d.log.Append(0, 0, 100);
  ASSERT_TRUE(d.Open({{0, 10, 30}}).ok());
  d.RunUntil(5 * kSecond);
  EXPECT_EQ(d.OffsetsOf(0), Range(10, 30));
}

TEST(LogReference, ReportsOffsetsDeletedByRetentionAsAGapAndReadsOn) {
  Driver d;
  d.log.Append(0, 0, 100);
  d.log.parts[0].first_retained = 70;
  ASSERT_TRUE(d.Open({{0, 20, {}}}).ok());
  d.RunUntil(1 * kSecond);
  ASSERT_EQ(d.gaps.size(), 1u);
  EXPECT_EQ(d.gaps[0].partition(), 0u);
  EXPECT_EQ(d.gaps[0].from_offset(), 20u);
  EXPECT_EQ(d.gaps[0].to_offset(), 70u);
  EXPECT_EQ(d.OffsetsOf(0), Range(70, 100));
}

TEST(LogReference, AResumePointPastTheEndWaitsForTheLogToGrow) {
  Driver d;
  d.log.Append(0, 0, 5);
  // Past the end a read fails OUT_OF_RANGE naming a first retained offset
  // below it (weir's log and the fake alike).
  ASSERT_TRUE(d.Open({{0, 7, {}}}).ok());
  d.RunUntil(10 * kSecond);
  EXPECT_LT(d.log.reads, 20) << "polls, does not spin";
  d.log.Append(0, 0, 5);
  d.RunUntil(20 * kSecond);
  EXPECT_EQ(d.OffsetsOf(0), Range(7, 10));
}

TEST(LogReference, SilentSkipMutantJumpsWithoutAGap) {
  LogBugs bugs;
  bugs.silent_skip = true;
  Driver d(bugs);
  d.log.Append(0, 0, 100);
  d.log.parts[0].first_retained = 70;
  ASSERT_TRUE(d.Open({{0, 20, {}}}).ok());
  d.RunUntil(1 * kSecond);
  EXPECT_TRUE(d.gaps.empty());
  EXPECT_EQ(d.OffsetsOf(0), Range(70, 100));
}

TEST(LogReference, HoldsPartitionsAddedLaterFromOffsetZero) {
  Driver d;
  d.log.Append(0, 0, 5);
  ASSERT_TRUE(d.Open({{0, 0, {}}}).ok());
  d.RunUntil(1 * kSecond);
  d.log.Append(1, 0, 7);  // partition 1 appears
  d.RunUntil(10 * kSecond);
  EXPECT_EQ(d.OffsetsOf(1), Range(0, 7));
}

TEST(LogReference, DoesNotTakeUpNewPartitionsItWasNotGiven) {
  Driver d;
  d.log.Append(0, 0, 5);
  ASSERT_TRUE(d.Open({{0, 0, {}}}, /*new_partitions_held=*/false).ok());
  d.log.Append(1, 0, 7);
  d.RunUntil(10 * kSecond);
  EXPECT_TRUE(d.OffsetsOf(1).empty());
}

TEST(LogReference, IgnoreNewPartitionsMutantNeverReadsThem) {
  LogBugs bugs;
  bugs.ignore_new_partitions = true;
  Driver d(bugs);
  d.log.Append(0, 0, 5);
  ASSERT_TRUE(d.Open({{0, 0, {}}}).ok());
  d.log.Append(1, 0, 7);
  d.RunUntil(10 * kSecond);
  EXPECT_TRUE(d.OffsetsOf(1).empty());
}

TEST(LogReference, CheckpointResumePointsAreTheNextOffsetAfterEverythingEmitted) {
  Driver d;
  d.log.Append(0, 0, 100);
  d.log.Append(1, 0, 10);
  d.log.Append(2, 0, 4);  // all before the span start
  ASSERT_TRUE(d.Open({{0, 0, {}}, {1, 0, {}}, {2, 4, {}}}).ok());
  d.Step();  // partition 0: one page of 64
  const v1::CheckpointResponse cp = d.Checkpoint(1);
  EXPECT_EQ(Pairs(cp), (std::vector<std::pair<std::uint32_t, std::uint64_t>>{{0, 64}, {1, 10}, {2, 4}}));
  LogReferenceState state;
  ASSERT_TRUE(state.ParseFromString(cp.state()));
  ASSERT_EQ(state.resume_points_size(), 3);
  EXPECT_EQ(state.resume_points(0).next_offset(), 64u);
  EXPECT_EQ(state.resume_points(2).next_offset(), 4u);
}

TEST(LogReference, CommittedSavesThatCheckpointsResumePointsNeverNewerOnes) {
  Driver d;
  d.log.Append(0, 0, 200);
  ASSERT_TRUE(d.Open({{0, 0, {}}}).ok());
  d.Step();
  d.Checkpoint(1);  // resume point 64
  d.Step();
  d.Checkpoint(2);  // resume point 128
  d.Step();
  ASSERT_TRUE(d.log.saves.empty()) << "nothing saved before a commit notice";
  d.Committed(1);
  ASSERT_EQ(d.log.saves.size(), 1u);
  EXPECT_EQ(Pairs(d.log.saves[0]), (std::vector<std::pair<std::uint32_t, std::uint64_t>>{{0, 64}}));
  d.Committed(2);
  ASSERT_EQ(d.log.saves.size(), 2u);
  EXPECT_EQ(Pairs(d.log.saves[1]), (std::vector<std::pair<std::uint32_t, std::uint64_t>>{{0, 128}}));
}

TEST(LogReference, DoesNotSaveBookmarksThatDidNotMove) {
  Driver d;
  d.log.Append(0, 0, 10);
  ASSERT_TRUE(d.Open({{0, 0, {}}}).ok());
  d.Step();
  d.Checkpoint(1);
  d.Committed(1);
  d.Checkpoint(2);  // nothing new read
  d.Committed(2);
  EXPECT_EQ(d.log.saves.size(), 1u);
}

TEST(LogReference, BookmarkOnReadMutantSavesBeforeTheCommit) {
  LogBugs bugs;
  bugs.bookmark_on_read = true;
  Driver d(bugs);
  d.log.Append(0, 0, 10);
  ASSERT_TRUE(d.Open({{0, 0, {}}}).ok());
  d.Step();
  ASSERT_EQ(d.log.saves.size(), 1u);
  EXPECT_EQ(Pairs(d.log.saves[0]), (std::vector<std::pair<std::uint32_t, std::uint64_t>>{{0, 10}}));
}

TEST(LogReference, RestoresExactlyAtTheSpansAndItsWatermark) {
  Driver first;
  first.log.Append(0, 5 * kSecond, 100);
  ASSERT_TRUE(first.Open({{0, 0, {}}}).ok());
  first.Step();
  const v1::CheckpointResponse cp = first.Checkpoint(3);

  Driver second;
  second.log = first.log;
  ASSERT_TRUE(second.Open({{0, 64, {}}}, true, std::make_pair(std::uint64_t{3}, cp.state())).ok());
  second.RunUntil(second.log.now_ns + kSecond);
  EXPECT_EQ(second.OffsetsOf(0), Range(64, 100));
  ASSERT_FALSE(second.watermarks.empty());
  EXPECT_GE(second.watermarks.front(), 5 * kSecond);
}

TEST(LogReference, RefusesAStateThatDisagreesWithTheSpans) {
  Driver first;
  first.log.Append(0, 0, 100);
  ASSERT_TRUE(first.Open({{0, 0, {}}}).ok());
  first.Step();
  const v1::CheckpointResponse cp = first.Checkpoint(3);
  Driver second;
  const grpc::Status st = second.Open({{0, 10, {}}}, true, std::make_pair(std::uint64_t{3}, cp.state()));
  EXPECT_EQ(st.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
}

TEST(LogReference, ResumeMutantsStartOneOffAfterARestore) {
  Driver first;
  first.log.Append(0, 0, 100);
  ASSERT_TRUE(first.Open({{0, 0, {}}}).ok());
  first.Step();
  const std::string state = first.Checkpoint(1).state();
  for (bool after : {true, false}) {
    LogBugs bugs;
    (after ? bugs.resume_after_checkpoint : bugs.resume_before_checkpoint) = true;
    Driver d(bugs);
    d.log = first.log;
    ASSERT_TRUE(d.Open({{0, 64, {}}}, true, std::make_pair(std::uint64_t{1}, state)).ok());
    d.Step();
    ASSERT_FALSE(d.emitted.empty());
    EXPECT_EQ(d.emitted.front().offset, after ? 65u : 63u);
  }
}

TEST(LogReference, GlobalResumePointMutantCheckpointsOneOffsetForAll) {
  LogBugs bugs;
  bugs.global_resume_point = true;
  Driver d(bugs);
  d.log.Append(0, 0, 10);
  d.log.Append(1, 0, 3);
  ASSERT_TRUE(d.Open({{0, 0, {}}, {1, 0, {}}}).ok());
  d.Step();
  EXPECT_EQ(Pairs(d.Checkpoint(1)), (std::vector<std::pair<std::uint32_t, std::uint64_t>>{{0, 3}, {1, 3}}));
}

TEST(LogReference, WatermarkIsTheSlowestPartitionsEventTime) {
  Driver d;
  d.log.Append(0, 10 * kSecond, 5);
  d.log.Append(1, 4 * kSecond, 5);
  ASSERT_TRUE(d.Open({{0, 0, {}}, {1, 0, {}}}).ok());
  d.Step();
  ASSERT_FALSE(d.watermarks.empty());
  EXPECT_EQ(d.watermarks.back(), 4 * kSecond);
}

TEST(LogReference, FastestPartitionMutantTakesTheLargest) {
  LogBugs bugs;
  bugs.fastest_partition_watermark = true;
  Driver d(bugs);
  d.log.Append(0, 10 * kSecond, 5);
  d.log.Append(1, 4 * kSecond, 5);
  ASSERT_TRUE(d.Open({{0, 0, {}}, {1, 0, {}}}).ok());
  d.Step();
  ASSERT_FALSE(d.watermarks.empty());
  EXPECT_EQ(d.watermarks.back(), 10 * kSecond);
}

TEST(LogReference, APartitionNeverReadHoldsTheWatermarkOnlyUntilItIsIdle) {
  Options options;  // idle after 10 s, lag 5 s
  Driver d({}, options);
  d.log.Append(0, 1 * kSecond, 1);
  d.log.parts[1];  // a partition that never receives a record
  ASSERT_TRUE(d.Open({{0, 0, {}}, {1, 0, {}}}).ok());
  d.Step();
  EXPECT_TRUE(d.watermarks.empty()) << "partition 1 is not idle yet";
  // Partition 0 keeps receiving records; partition 1 stays empty.
  for (int s = 1; s <= 30; ++s) {
    d.log.Append(0, s * kSecond, 1);
    d.RunUntil(s * kSecond);
  }
  ASSERT_FALSE(d.watermarks.empty());
  EXPECT_GE(d.watermarks.back(), 29 * kSecond);
  EXPECT_LE(d.watermarks.back(), 30 * kSecond);
}

TEST(LogReference, IdleLogMovesTheWatermarkUpToNowMinusTheLagAndNeverBack) {
  Options options;
  Driver d({}, options);
  d.log.Append(0, 1 * kSecond, 3);
  ASSERT_TRUE(d.Open({{0, 0, {}}}).ok());
  d.RunUntil(60 * kSecond);
  ASSERT_FALSE(d.watermarks.empty());
  EXPECT_GE(d.watermarks.back(), d.log.now_ns - options.idle_lag_ns - LogReferenceSource::kMaxIdlePollNs);
  for (std::size_t i = 1; i < d.watermarks.size(); ++i) EXPECT_GE(d.watermarks[i], d.watermarks[i - 1]);
}

TEST(LogReference, IdlePartitionStallsMutantNeverMovesAnIdleWatermark) {
  LogBugs bugs;
  bugs.idle_partition_stalls = true;
  Driver d(bugs);
  d.log.Append(0, 1 * kSecond, 3);
  d.log.parts[1];
  ASSERT_TRUE(d.Open({{0, 0, {}}, {1, 0, {}}}).ok());
  d.RunUntil(60 * kSecond);
  EXPECT_TRUE(d.watermarks.empty());
}

TEST(LogReference, AnIdleStepCostsOneListingAndNoRead) {
  Driver d;
  for (std::uint32_t p = 0; p < 8; ++p) d.log.Append(p, 0, 2);
  std::vector<adapter::Span> spans;
  for (std::uint32_t p = 0; p < 8; ++p) spans.push_back({p, 0, {}});
  ASSERT_TRUE(d.Open(spans).ok());
  d.RunUntil(10 * kSecond);
  const int lists = d.log.lists;
  const int reads = d.log.reads;
  const std::int64_t from = d.log.now_ns;
  d.RunUntil(from + 3600 * kSecond);
  const int idle_lists = d.log.lists - lists;
  EXPECT_EQ(d.log.reads, reads) << "nothing new: no partition is read";
  // One listing per idle poll, the poll capped at kMaxIdlePollNs.
  EXPECT_LE(idle_lists, 3600 * kSecond / LogReferenceSource::kMaxIdlePollNs + 2);
  EXPECT_GE(idle_lists, 3600 * kSecond / LogReferenceSource::kMaxIdlePollNs - 2);
  // A record appended later is still found.
  d.log.Append(5, 0, 1);
  d.RunUntil(d.log.now_ns + 10 * kSecond);
  EXPECT_EQ(d.OffsetsOf(5), Range(0, 3));
}

TEST(LogReference, NeverReadsAgainBeforeAThrottlesRetryAfter) {
  Driver d;
  d.log.Append(0, 0, 10);
  ASSERT_TRUE(d.Open({{0, 0, {}}}).ok());
  d.log.throttle_reads_until_ns = 3 * kSecond;
  d.Step();
  ASSERT_EQ(d.log.reads, 1);
  const std::int64_t resume = d.next_step_ns;
  EXPECT_GE(resume, 3 * kSecond);
  d.RunUntil(resume - 1);
  EXPECT_EQ(d.log.reads, 1);
  d.RunUntil(4 * kSecond);
  EXPECT_EQ(d.OffsetsOf(0), Range(0, 10));
}

TEST(LogReference, AnUnavailablePartitionBacksOffAloneWhileOthersAreRead) {
  Driver d;
  d.log.Append(0, 0, 10);
  d.log.Append(1, 0, 10);
  d.log.unavailable[0] = true;
  ASSERT_TRUE(d.Open({{0, 0, {}}, {1, 0, {}}}).ok());
  d.Step();
  EXPECT_EQ(d.OffsetsOf(1), Range(0, 10)) << "read in the same step";
  const std::int64_t failed_at = d.log.now_ns;
  // Partition 0 is not read again sooner than its first backoff (at least 800 ms).
  d.RunUntil(failed_at + 700 * kMs);
  EXPECT_EQ(std::count(d.log.calls.begin(), d.log.calls.end(), "Read 0@0"), 1);
  d.log.unavailable.erase(0);
  d.RunUntil(d.log.now_ns + 10 * kSecond);
  EXPECT_EQ(d.OffsetsOf(0), Range(0, 10));
}

// Many readers.

using Points = std::vector<std::pair<std::uint32_t, std::uint64_t>>;

TEST(LogReaders, AssignAddsSpansReadOnlyWithinThem) {
  Driver d;
  d.readers = 2;
  d.log.Append(0, 0, 5);
  d.log.Append(1, 0, 20);
  d.log.Append(2, 0, 20);  // never given to this reader
  ASSERT_TRUE(d.Open({{0, 0, {}}}, /*new_partitions_held=*/false).ok());
  d.RunUntil(1 * kSecond);
  EXPECT_TRUE(d.OffsetsOf(1).empty());
  ASSERT_TRUE(d.Assign({{1, 5, 12}}).ok());
  d.RunUntil(5 * kSecond);
  EXPECT_EQ(d.OffsetsOf(0), Range(0, 5));
  EXPECT_EQ(d.OffsetsOf(1), Range(5, 12));
  EXPECT_TRUE(d.OffsetsOf(2).empty()) << "never takes up a partition by itself";
  EXPECT_EQ(Pairs(d.Checkpoint(1)), (Points{{0, 5}, {1, 12}})) << "a finished closed span is named too";
}

TEST(LogReaders, RevokeStopsReadingAtOnceAndForgetsTheSpan) {
  Driver d;
  d.readers = 2;
  d.log.Append(0, 10 * kSecond, 5);
  d.log.Append(1, 4 * kSecond, 5);
  ASSERT_TRUE(d.Open({{0, 0, {}}, {1, 0, {}}}, false).ok());
  d.Step();
  ASSERT_FALSE(d.watermarks.empty());
  EXPECT_EQ(d.watermarks.back(), 4 * kSecond) << "partition 1 holds the watermark back";
  d.Checkpoint(1);
  d.Committed(1);
  ASSERT_TRUE(d.Revoke({1}).ok());
  const std::size_t calls_before = d.log.calls.size();
  d.log.Append(1, 5 * kSecond, 10);
  d.log.Append(0, 12 * kSecond, 1);
  d.RunUntil(d.log.now_ns + 2 * kSecond);
  EXPECT_EQ(d.OffsetsOf(1), Range(0, 5)) << "nothing emitted after the revoke";
  EXPECT_EQ(d.OffsetsOf(0), Range(0, 6));
  for (std::size_t i = calls_before; i < d.log.calls.size(); ++i) {
    EXPECT_NE(d.log.calls[i].rfind("Read 1@", 0), 0u) << "read after the revoke: " << d.log.calls[i];
  }
  EXPECT_EQ(d.watermarks.back(), 12 * kSecond) << "a revoked span is forgotten";
  EXPECT_EQ(Pairs(d.Checkpoint(2)), (Points{{0, 6}}));
}

TEST(LogReaders, RevokeDropsABookmarkNotYetSaved) {
  Driver d;
  d.readers = 2;
  d.log.Append(0, 0, 5);
  d.log.Append(1, 0, 5);
  ASSERT_TRUE(d.Open({{0, 0, {}}, {1, 0, {}}}, false).ok());
  d.Step();
  d.Checkpoint(1);
  d.log.failing_saves = 1;
  d.Committed(1);  // the save fails: checkpoint 1's bookmarks wait for a retry
  ASSERT_TRUE(d.log.saves.empty());
  ASSERT_TRUE(d.Revoke({1}).ok());
  d.RunUntil(d.log.now_ns + 10 * kSecond);
  ASSERT_EQ(d.log.saves.size(), 1u);
  EXPECT_EQ(Pairs(d.log.saves[0]), (Points{{0, 5}})) << "the revoked partition's bookmark is not ours";
}

TEST(LogReaders, CutHeadAndTailAreDisjointMakeTheSpanAndHoldEveryEmittedOffset) {
  struct Case {
    std::optional<std::uint64_t> end;
    int steps;         // steps before the cut (64 records each)
    std::uint64_t at;  // the proposed tail start
  };
  const std::vector<Case> cases = {
      {std::nullopt, 0, 0},  {std::nullopt, 0, 30}, {std::nullopt, 1, 10},
      {std::nullopt, 1, 64}, {std::nullopt, 1, 90}, {std::nullopt, 2, 500},
      {150, 1, 10},          {150, 1, 100},         {150, 0, 149},
  };
  for (const Case& c : cases) {
    SCOPED_TRACE(testing::Message() << "end " << (c.end ? std::to_string(*c.end) : "open") << " steps " << c.steps
                                    << " at " << c.at);
    Driver d;
    d.readers = 2;
    d.log.Append(0, 0, 300);
    ASSERT_TRUE(d.Open({{0, 3, c.end}}, false).ok());
    for (int i = 0; i < c.steps; ++i) d.Step();
    const std::vector<std::uint64_t> before = d.OffsetsOf(0);
    const auto [head, tail] = d.Cut(0, c.at);
    ASSERT_TRUE(tail.has_value()) << "the span has offsets left";
    EXPECT_EQ(head.partition, 0u);
    EXPECT_EQ(tail->partition, 0u);
    EXPECT_EQ(head.start_offset, 3u) << "the head starts where the span did";
    ASSERT_TRUE(head.end_offset.has_value());
    EXPECT_EQ(tail->start_offset, *head.end_offset) << "disjoint, nothing between";
    EXPECT_EQ(tail->end_offset, c.end) << "the tail ends where the span did";
    EXPECT_GE(*head.end_offset, c.at) << "never earlier than asked: the reader keeps nothing read ahead";
    for (std::uint64_t o : before) EXPECT_LT(o, *head.end_offset) << "the head holds every emitted offset";
    // Afterwards the reader reads its head to the end and nothing of the tail.
    d.RunUntil(d.log.now_ns + 5 * kSecond);
    const std::uint64_t read_to = std::min<std::uint64_t>(*head.end_offset, 300);  // the log's end
    EXPECT_EQ(d.OffsetsOf(0), Range(3, read_to));
    EXPECT_EQ(Pairs(d.Checkpoint(1)), (Points{{0, read_to}}));
  }
}

TEST(LogReaders, CutTakesTheNextOffsetToEmitWhenAskedForLess) {
  Driver d;
  d.readers = 2;
  d.log.Append(0, 0, 300);
  ASSERT_TRUE(d.Open({{0, 0, {}}}, false).ok());
  d.Step();  // emits 0..63
  const auto [head, tail] = d.Cut(0, 10);
  EXPECT_EQ(head, (adapter::Span{0, 0, 64}));
  EXPECT_EQ(tail, (adapter::Span{0, 64, std::nullopt}));
}

TEST(LogReaders, CutDeclinesAtTheEndOfAClosedSpan) {
  Driver d;
  d.readers = 2;
  d.log.Append(0, 0, 100);
  ASSERT_TRUE(d.Open({{0, 10, 30}}, false).ok());
  {
    const auto [head, tail] = d.Cut(0, 30);  // nothing read, asked at the end
    EXPECT_FALSE(tail.has_value());
    EXPECT_EQ(head, (adapter::Span{0, 10, 30}));
  }
  {
    const auto [head, tail] = d.Cut(0, 45);  // past the end
    EXPECT_FALSE(tail.has_value());
    EXPECT_EQ(head, (adapter::Span{0, 10, 30}));
  }
  d.RunUntil(2 * kSecond);
  EXPECT_EQ(d.OffsetsOf(0), Range(10, 30)) << "a declined cut keeps the whole span";
  const auto [head, tail] = d.Cut(0, 12);  // read to its end: nothing left to give
  EXPECT_FALSE(tail.has_value());
  EXPECT_EQ(head, (adapter::Span{0, 10, 30}));
}

TEST(LogReaders, CutOfASecondTailKeepsTheFirstCutsEnd) {
  Driver d;
  d.readers = 2;
  d.log.Append(0, 0, 300);
  ASSERT_TRUE(d.Open({{0, 0, {}}}, false).ok());
  ASSERT_EQ(d.Cut(0, 200).second, (adapter::Span{0, 200, std::nullopt}));
  const auto [head, tail] = d.Cut(0, 150);
  EXPECT_EQ(head, (adapter::Span{0, 0, 150}));
  EXPECT_EQ(tail, (adapter::Span{0, 150, 200}));
}

TEST(LogReaders, AFinishedClosedSpanDoesNotHoldTheWatermarkBack) {
  Driver d;
  d.readers = 2;
  d.log.Append(0, 2 * kSecond, 5);
  d.log.Append(1, 9 * kSecond, 5);
  ASSERT_TRUE(d.Open({{0, 0, 5}, {1, 0, {}}}, false).ok());
  d.Step();
  d.log.Append(1, 11 * kSecond, 1);
  d.RunUntil(d.log.now_ns + kSecond);
  ASSERT_FALSE(d.watermarks.empty());
  EXPECT_EQ(d.watermarks.back(), 11 * kSecond);
}

// A checkpoint state of a reader that held partition 0 up to offset 64.
std::string StateAt64() {
  Driver first;
  first.log.Append(0, 0, 100);
  EXPECT_TRUE(first.Open({{0, 0, {}}}).ok());
  first.Step();
  return first.Checkpoint(1).state();
}

TEST(LogReaders, WithSeveralReadersOpensSpansAreTheResumePoints) {
  const std::string state = StateAt64();
  Driver d;
  d.readers = 2;
  d.log.Append(0, 0, 100);
  d.log.Append(1, 0, 100);
  // The state says partition 0 at 64; the spans say otherwise: they win.
  ASSERT_TRUE(d.Open({{0, 80, {}}, {1, 10, {}}}, false, std::make_pair(std::uint64_t{1}, state)).ok());
  d.RunUntil(2 * kSecond);
  EXPECT_EQ(d.OffsetsOf(0), Range(80, 100));
  EXPECT_EQ(d.OffsetsOf(1), Range(10, 100));

  Driver single;  // one reader: the same disagreement is a bad checkpoint
  EXPECT_EQ(single.Open({{0, 80, {}}}, false, std::make_pair(std::uint64_t{1}, state)).error_code(),
            grpc::StatusCode::INVALID_ARGUMENT);
}

// The readers mutants: each flag changes exactly the behaviour it names.

TEST(LogReadersMutants, TailEmitKeepsReadingTheTailItGaveAway) {
  for (bool bug : {false, true}) {
    LogBugs bugs;
    bugs.readers_tail_emit = bug;
    Driver d(bugs);
    d.readers = 2;
    d.log.Append(0, 0, 100);
    ASSERT_TRUE(d.Open({{0, 0, {}}}, false).ok());
    const auto [head, tail] = d.Cut(0, 40);
    EXPECT_EQ(head, (adapter::Span{0, 0, 40})) << "the answer is the reference's";
    EXPECT_EQ(tail, (adapter::Span{0, 40, std::nullopt}));
    d.RunUntil(2 * kSecond);
    EXPECT_EQ(d.OffsetsOf(0), Range(0, bug ? 100 : 40));
  }
}

TEST(LogReadersMutants, CutOverlapAndDropsFirstMoveOnlyTheTailsStart) {
  for (int bug = 0; bug < 3; ++bug) {
    LogBugs bugs;
    bugs.readers_cut_overlap = bug == 1;
    bugs.readers_cut_drops_first = bug == 2;
    Driver d(bugs);
    d.readers = 2;
    d.log.Append(0, 0, 100);
    ASSERT_TRUE(d.Open({{0, 0, 90}}, false).ok());
    const auto [head, tail] = d.Cut(0, 40);
    EXPECT_EQ(head, (adapter::Span{0, 0, 40}));
    const std::uint64_t start = bug == 0 ? 40 : bug == 1 ? 39 : 41;
    EXPECT_EQ(tail, (adapter::Span{0, start, 90}));
    d.RunUntil(2 * kSecond);
    EXPECT_EQ(d.OffsetsOf(0), Range(0, 40)) << "the reader itself keeps to its head";
  }
}

TEST(LogReadersMutants, KeepsRevokedReadsAPartitionTakenAway) {
  for (bool bug : {false, true}) {
    LogBugs bugs;
    bugs.readers_keeps_revoked = bug;
    Driver d(bugs);
    d.readers = 2;
    d.log.Append(0, 0, 5);
    d.log.Append(1, 0, 5);
    ASSERT_TRUE(d.Open({{0, 0, {}}, {1, 0, {}}}, false).ok());
    d.Step();
    ASSERT_TRUE(d.Revoke({1}).ok());
    d.log.Append(1, 0, 5);
    d.RunUntil(d.log.now_ns + 10 * kSecond);
    EXPECT_EQ(d.OffsetsOf(1), Range(0, bug ? 10 : 5));
    EXPECT_EQ(d.OffsetsOf(0), Range(0, 5));
  }
}

TEST(LogReadersMutants, CheckpointForgetsAssignedOmitsSpansNewSinceTheLastCheckpoint) {
  for (bool bug : {false, true}) {
    LogBugs bugs;
    bugs.readers_checkpoint_forgets_assigned = bug;
    Driver d(bugs);
    d.readers = 2;
    d.log.Append(0, 0, 5);
    d.log.Append(1, 0, 5);
    ASSERT_TRUE(d.Open({{0, 0, {}}}, false).ok());
    d.Step();
    ASSERT_TRUE(d.Assign({{1, 2, {}}}).ok());
    d.Step();
    EXPECT_EQ(d.OffsetsOf(1), Range(2, 5)) << "the span is read either way";
    EXPECT_EQ(Pairs(d.Checkpoint(1)), bug ? (Points{{0, 5}}) : (Points{{0, 5}, {1, 5}}));
    EXPECT_EQ(Pairs(d.Checkpoint(2)), (Points{{0, 5}, {1, 5}})) << "held at the previous checkpoint";
  }
  // Restored: a span Open gives that the restored state did not name.
  const std::string state = StateAt64();
  for (bool bug : {false, true}) {
    LogBugs bugs;
    bugs.readers_checkpoint_forgets_assigned = bug;
    Driver d(bugs);
    d.readers = 2;
    d.log.Append(0, 0, 64);
    d.log.Append(1, 0, 3);
    ASSERT_TRUE(d.Open({{0, 64, {}}, {1, 0, {}}}, false, std::make_pair(std::uint64_t{1}, state)).ok());
    EXPECT_EQ(Pairs(d.Checkpoint(2)), bug ? (Points{{0, 64}}) : (Points{{0, 64}, {1, 0}}));
  }
}

TEST(LogReadersMutants, TrustsRestoredStateReadsWhatItsStateNamesNotOpensSpans) {
  const std::string state = StateAt64();
  for (bool bug : {false, true}) {
    LogBugs bugs;
    bugs.readers_trusts_restored_state = bug;
    Driver d(bugs);
    d.readers = 2;
    d.log.Append(0, 0, 100);
    d.log.Append(1, 0, 100);
    ASSERT_TRUE(d.Open({{1, 90, {}}}, false, std::make_pair(std::uint64_t{1}, state)).ok());
    d.RunUntil(2 * kSecond);
    EXPECT_EQ(d.OffsetsOf(0), bug ? Range(64, 100) : Range(0, 0));
    EXPECT_EQ(d.OffsetsOf(1), bug ? Range(0, 0) : Range(90, 100));
  }
}

}  // namespace
}  // namespace weir::fixtures
