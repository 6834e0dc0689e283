// The oracle's log rules on a long synthetic log trace: throughput in offsets
// per second and peak memory as the run grows.
//
//   build/bench/log_oracle_bench [offsets] [partitions]   (default 10,000,000 over 1,000)
//
// Events are generated on the fly (never stored), as a log reader's run looks:
// per step, a batch of records appended to one partition (round robin), one
// read returning the batch, a record emitted per offset, a stepped event with
// a watermark; every 64 steps a checkpoint naming the resume point of every
// partition, its commit, the notice and a bookmark per partition the epoch
// touched; retention deletes what the reader committed 16 epochs before. One
// reused TraceEvent per kind, so generating costs no allocation.
//
// Two passes over the same trace: one into a no-op observer (the cost of
// generating), one into the Oracle. Prints offsets per second of the oracle's
// own time (oracle pass − generation pass) and VmHWM after 1M, 2M, 5M and 10M
// offsets. Exits 1 unless the verdict is a clean pass.
#include <chrono>
#include <cstdint>
#include <cstdio>
#include <algorithm>
#include <cstdlib>
#include <fstream>
#include <string>
#include <vector>

#include "bench/bench_support.h"
#include "harness/oracle/oracle.h"

namespace weir {
namespace {

using v1::TraceEvent;

constexpr std::uint64_t kBatch = 16;  // records per read
constexpr std::uint64_t kStepsPerEpoch = 64;
constexpr std::uint64_t kRetainEpochs = 16;  // retention trails the committed resume point

// Generates `offsets` appended-and-emitted records over `partitions`
// partitions into `sink`; calls mark(k) with the offsets emitted so far.
template <typename Mark>
std::uint64_t Generate(std::uint64_t offsets, std::uint32_t partitions, TraceObserver* sink, Mark mark) {
  TraceEvent opened, appended, read, emitted, stepped, checkpoint, committed, notice, bookmark, retention, ended;
  auto* o = opened.mutable_opened();
  o->set_new_partitions_held(true);
  for (std::uint32_t p = 0; p < partitions; ++p) {
    auto* s = o->add_spans();
    s->set_partition(p);
  }
  appended.mutable_appended()->set_payload_crc32c(0x1234);
  read.mutable_log_read();
  emitted.mutable_emitted();
  stepped.mutable_stepped();
  auto* c = checkpoint.mutable_checkpoint();
  c->set_state_bytes(64);
  for (std::uint32_t p = 0; p < partitions; ++p) c->add_resume_points()->set_partition(p);
  committed.mutable_committed();
  notice.mutable_commit_notice();
  bookmark.mutable_bookmark_saved();
  retention.mutable_retention_deleted();
  ended.mutable_run_ended()->set_reason("bench over");

  std::uint64_t seq = 0;
  std::int64_t t = 0;
  auto send = [&](TraceEvent& e) {
    e.set_seq(seq++);
    e.set_t_ns(t);
    e.set_incarnation(1);
    sink->OnEvent(e);
    t += 1000;
  };
  std::vector<std::uint64_t> next(partitions, 0);      // next offset per partition
  std::vector<std::uint64_t> retained(partitions, 0);  // first retained
  std::vector<std::vector<std::uint64_t>> history;     // resume points per committed epoch
  std::vector<std::uint32_t> touched;

  send(opened);
  std::uint64_t done = 0, step = 0, cp = 0;
  std::uint32_t cursor = 0;
  while (done < offsets) {
    {
      const std::uint32_t p = cursor;
      cursor = (cursor + 1) % partitions;
      const std::uint64_t first = next[p];
      const std::uint64_t n = std::min<std::uint64_t>(kBatch, offsets - done);
      for (std::uint64_t i = 0; i < n; ++i) {
        auto* a = appended.mutable_appended();
        a->set_partition(p);
        a->set_offset(first + i);
        a->set_event_time_ns(t);
        send(appended);
      }
      next[p] += n;
      auto* r = read.mutable_log_read();
      r->set_partition(p);
      r->set_offset(first);
      r->set_records(static_cast<std::uint32_t>(n));
      r->set_next_offset(first + n);
      send(read);
      for (std::uint64_t i = 0; i < n; ++i) {
        auto* m = emitted.mutable_emitted();
        m->set_partition(p);
        m->set_offset(first + i);
        m->set_event_time_ns(t);
        m->set_step(step + 1);
        send(emitted);
        mark(++done);
      }
      touched.push_back(p);
    }
    auto* st = stepped.mutable_stepped();
    st->set_step(++step);
    st->set_watermark_ns(t - 1000000);
    send(stepped);
    if (step % kStepsPerEpoch != 0 && done < offsets) continue;

    auto* ck = checkpoint.mutable_checkpoint();
    ck->set_checkpoint_id(++cp);
    for (std::uint32_t p = 0; p < partitions; ++p)
      ck->mutable_resume_points(static_cast<int>(p))->set_next_offset(next[p]);
    send(checkpoint);
    committed.mutable_committed()->set_checkpoint_id(cp);
    send(committed);
    notice.mutable_commit_notice()->set_checkpoint_id(cp);
    send(notice);
    std::sort(touched.begin(), touched.end());
    touched.erase(std::unique(touched.begin(), touched.end()), touched.end());
    for (std::uint32_t p : touched) {
      auto* b = bookmark.mutable_bookmark_saved();
      b->set_partition(p);
      b->set_next_offset(next[p]);
      send(bookmark);
    }
    touched.clear();
    history.push_back(next);
    if (history.size() > kRetainEpochs) {
      const std::vector<std::uint64_t>& old = history.front();
      for (std::uint32_t p = 0; p < partitions; ++p) {
        if (old[p] > retained[p]) {
          retained[p] = old[p];
          auto* x = retention.mutable_retention_deleted();
          x->set_partition(p);
          x->set_first_retained_offset(old[p]);
          send(retention);
        }
      }
      history.erase(history.begin());
    }
  }
  send(ended);
  return seq;
}

int Main(int argc, char** argv) {
  const std::uint64_t offsets = argc > 1 ? std::strtoull(argv[1], nullptr, 10) : 10'000'000;
  const std::uint32_t partitions = argc > 2 ? static_cast<std::uint32_t>(std::strtoul(argv[2], nullptr, 10)) : 1000;
  if (offsets == 0 || partitions == 0) {
    std::fprintf(stderr, "usage: log_oracle_bench [offsets >= 1] [partitions >= 1]\n");
    return 2;
  }
  using Clock = std::chrono::steady_clock;

  bench::NoOpObserver noop;
  auto t0 = Clock::now();
  const std::uint64_t events = Generate(offsets, partitions, &noop, [](std::uint64_t) {});
  const double gen_s = std::chrono::duration<double>(Clock::now() - t0).count();

  v1::Profile profile;
  profile.set_guarantee(v1::Profile::EXACTLY_ONCE);
  profile.set_watermark_policy(v1::Profile::MONOTONIC);
  Oracle oracle(profile, v1::LOG);
  std::vector<std::pair<std::uint64_t, long>> marks;
  const std::uint64_t at[] = {1'000'000, 2'000'000, 5'000'000, 10'000'000};
  t0 = Clock::now();
  Generate(offsets, partitions, &oracle, [&](std::uint64_t n) {
    for (std::uint64_t m : at) {
      if (n == m) marks.emplace_back(n, bench::StatusKb("VmHWM"));
    }
  });
  const Verdict v = oracle.Finish();
  const double total_s = std::chrono::duration<double>(Clock::now() - t0).count();
  const double oracle_s = total_s - gen_s;

  std::printf("offsets: %llu over %u partitions (%llu events)\n", static_cast<unsigned long long>(offsets), partitions,
              static_cast<unsigned long long>(events));
  std::printf("generation only:   %.3f s\n", gen_s);
  std::printf("generation+oracle: %.3f s  (raw %.2f M offsets/s)\n", total_s,
              static_cast<double>(offsets) / total_s / 1e6);
  std::printf("oracle only:       %.3f s  (%.2f M offsets/s, %.2f M events/s)\n", oracle_s,
              static_cast<double>(offsets) / oracle_s / 1e6, static_cast<double>(events) / oracle_s / 1e6);
  for (const auto& [n, kb] : marks) {
    std::printf("VmHWM after %5.1fM offsets: %ld kB\n", static_cast<double>(n) / 1e6, kb);
  }
  std::printf("VmHWM at end:               %ld kB\n", bench::StatusKb("VmHWM"));
  std::printf("verdict: passed=%d duplicate_records=%llu deleted_unread=%llu\n", v.passed(),
              static_cast<unsigned long long>(v.duplicate_records), static_cast<unsigned long long>(v.deleted_unread));
  if (!v.passed() || v.duplicate_records != 0) {
    for (int i = 0; i < kInvariantCount; ++i) {
      const auto& r = v.results[i];
      if (r.violations > 0) {
        std::printf("  %s: %llu %s\n", InvariantName(static_cast<Invariant>(i)),
                    static_cast<unsigned long long>(r.violations),
                    r.first.empty() ? "" : r.first.front().sentence.c_str());
      }
    }
    std::fprintf(stderr, "unexpected verdict\n");
    return 1;
  }
  return 0;
}

}  // namespace
}  // namespace weir

int main(int argc, char** argv) { return weir::Main(argc, argv); }
