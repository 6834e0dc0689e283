// Oracle throughput and memory on a long synthetic trace: the oracle must keep
// up with any run (target: at least 5 M events/s) and hold only what is in
// flight (memory flat however long the trace).
//
//   build/bench/oracle_bench [events]      (default 10,000,000)
//
// Events are generated on the fly (never stored): a realistic mix of
// published, broker_call (Pull), delivered, emitted, stepped with a
// watermark, checkpoint, committed, commit_notice and acked (each message
// acked right after the commit that holds its record, so what is in flight
// stays bounded), with an occasional lease expiry and redelivery (a second
// record: a duplicate under at-least-once). One reused TraceEvent per kind,
// so generating costs no allocation.
//
// Two passes over the same trace: one into a no-op observer (the cost of
// generating), one into the Oracle. Prints the raw rate (events / time of the
// oracle pass) and the oracle's own rate (events / (oracle pass - generation
// pass)), and VmHWM (peak resident memory) after 1M, 2M, 5M and 10M events.
// Exits 1 when the verdict is not the expected one (a clean run apart from the
// counted duplicates).
#include <chrono>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <string>
#include <vector>

#include "bench/bench_support.h"
#include "harness/oracle/oracle.h"

namespace weir {
namespace {

using v1::TraceEvent;

constexpr std::uint64_t kPerStep = 4;          // messages published and pulled per step
constexpr std::uint64_t kStepsPerEpoch = 16;   // steps between checkpoints
constexpr std::uint64_t kRedeliverEvery = 64;  // steps between lease expiries

// Generates about `target` events into `sink`; calls `mark(n)` whenever the
// count crosses one of the marks. Ends at an epoch boundary with run_ended.
template <typename Mark>
std::uint64_t Generate(std::uint64_t target, TraceObserver* sink, Mark mark) {
  TraceEvent published, call, delivered, emitted, stepped, checkpoint, committed, notice, acked, expired, ended;
  published.mutable_published()->set_payload_crc32c(0x1234);
  call.mutable_broker_call()->set_method("Pull");
  delivered.mutable_delivered();
  emitted.mutable_emitted();
  stepped.mutable_stepped();
  checkpoint.mutable_checkpoint()->set_state_bytes(64);
  committed.mutable_committed();
  notice.mutable_commit_notice();
  acked.mutable_acked();
  expired.mutable_lease_expired();
  ended.mutable_run_ended()->set_reason("bench over");
  TraceEvent opened;
  opened.mutable_opened();

  std::uint64_t seq = 0;
  std::int64_t t = 0;
  auto send = [&](TraceEvent& e) {
    e.set_seq(seq);
    e.set_t_ns(t);
    e.set_incarnation(1);
    sink->OnEvent(e);
    ++seq;
    t += 1000;  // 1 us of virtual time per event
    mark(seq);
  };

  send(opened);
  std::uint64_t next_id = 1, receipt = 1, step = 0, cp = 0;
  std::uint64_t epoch_first = 1;  // first message id of the open epoch
  std::uint64_t posn = 0;
  while (true) {
    // One step: pull, publish and deliver kPerStep messages, emit them, step.
    for (std::uint64_t i = 0; i < kPerStep; ++i) {
      auto* p = published.mutable_published();
      p->set_message_id(next_id + i);
      p->set_event_time_ns(t);
      send(published);
    }
    call.mutable_broker_call()->set_position(++posn);
    send(call);
    ++step;
    for (std::uint64_t i = 0; i < kPerStep; ++i) {
      auto* d = delivered.mutable_delivered();
      d->set_message_id(next_id + i);
      d->set_receipt(receipt++);
      d->set_attempt(1);
      d->set_lease_deadline_ns(t + 30'000'000'000);
      send(delivered);
    }
    for (std::uint64_t i = 0; i < kPerStep; ++i) {
      auto* x = emitted.mutable_emitted();
      x->set_message_id(next_id + i);
      x->set_event_time_ns(t);
      x->set_step(step);
      send(emitted);
    }
    if (step % kRedeliverEvery == 0) {
      // A lease ran out on a message of this epoch: redelivered, emitted again.
      const std::uint64_t id = epoch_first;
      expired.mutable_lease_expired()->set_message_id(id);
      expired.mutable_lease_expired()->set_receipt(receipt - 1);
      send(expired);
      auto* d = delivered.mutable_delivered();
      d->set_message_id(id);
      d->set_receipt(receipt++);
      d->set_attempt(2);
      send(delivered);
      auto* x = emitted.mutable_emitted();
      x->set_message_id(id);
      x->set_step(step);
      send(emitted);
    }
    next_id += kPerStep;
    auto* s = stepped.mutable_stepped();
    s->set_step(step);
    s->set_records(static_cast<std::uint32_t>(kPerStep));
    s->set_watermark_ns(t - 5'000'000);
    s->set_resume_at_ns(t);
    send(stepped);

    if (step % kStepsPerEpoch == 0) {
      ++cp;
      auto* c = checkpoint.mutable_checkpoint();
      c->set_checkpoint_id(cp);
      c->set_records(static_cast<std::uint32_t>(kPerStep * kStepsPerEpoch));
      c->set_watermark_ns(t - 5'000'000);
      send(checkpoint);
      committed.mutable_committed()->set_checkpoint_id(cp);
      send(committed);
      notice.mutable_commit_notice()->set_checkpoint_id(cp);
      send(notice);
      // The connector acks everything the committed epoch holds.
      for (std::uint64_t id = epoch_first; id < next_id; ++id) {
        acked.mutable_acked()->set_message_id(id);
        acked.mutable_acked()->set_receipt(id);  // any receipt of the message will do
        send(acked);
      }
      epoch_first = next_id;
      if (seq >= target) break;
    }
  }
  send(ended);
  return seq;
}

double Seconds(std::chrono::steady_clock::time_point a, std::chrono::steady_clock::time_point b) {
  return std::chrono::duration<double>(b - a).count();
}

int Main(int argc, char** argv) {
  const std::uint64_t target = argc > 1 ? std::strtoull(argv[1], nullptr, 10) : 10'000'000;

  // Pass 1: generation alone.
  bench::NoOpObserver noop;
  auto t0 = std::chrono::steady_clock::now();
  const std::uint64_t n_gen = Generate(target, &noop, [](std::uint64_t) {});
  auto t1 = std::chrono::steady_clock::now();
  const double gen_s = Seconds(t0, t1);

  // Pass 2: into the oracle, with memory read at the marks.
  v1::Profile profile;
  profile.set_guarantee(v1::Profile::AT_LEAST_ONCE);
  profile.set_watermark_policy(v1::Profile::MONOTONIC);
  profile.set_idle_timeout_ms(10'000);
  Oracle oracle(profile);
  const std::uint64_t marks[] = {1'000'000, 2'000'000, 5'000'000, 10'000'000, 20'000'000, 50'000'000, 100'000'000};
  std::vector<std::pair<std::uint64_t, long>> hwm;
  std::size_t next_mark = 0;
  auto t2 = std::chrono::steady_clock::now();
  const std::uint64_t n = Generate(target, &oracle, [&](std::uint64_t seq) {
    if (next_mark < std::size(marks) && seq == marks[next_mark]) {
      hwm.emplace_back(seq, bench::StatusKb("VmHWM"));
      ++next_mark;
    }
  });
  const Verdict v = oracle.Finish();
  auto t3 = std::chrono::steady_clock::now();
  const double total_s = Seconds(t2, t3);
  const double oracle_s = total_s - gen_s;

  std::printf("events: %llu (generation pass %llu, checksum %llu)\n", static_cast<unsigned long long>(n),
              static_cast<unsigned long long>(n_gen), static_cast<unsigned long long>(noop.sum % 1000));
  std::printf("generation only:   %.3f s  (%.2f M events/s)\n", gen_s, n / gen_s / 1e6);
  std::printf("generation+oracle: %.3f s  (raw %.2f M events/s)\n", total_s, n / total_s / 1e6);
  std::printf("oracle only:       %.3f s  (%.2f M events/s)\n", oracle_s, oracle_s > 0 ? n / oracle_s / 1e6 : 0.0);
  for (const auto& [at, kb] : hwm) {
    std::printf("VmHWM after %5.1fM events: %ld kB\n", at / 1e6, kb);
  }
  std::printf("VmHWM at end:               %ld kB\n", bench::StatusKb("VmHWM"));
  std::printf("verdict: passed=%d duplicate_records=%llu late_records=%llu\n", v.passed(),
              static_cast<unsigned long long>(v.duplicate_records), static_cast<unsigned long long>(v.late_records));
  for (int i = 0; i < kInvariantCount; ++i) {
    if (v.results[i].violations > 0) {
      std::printf("  %s: %llu\n", InvariantName(static_cast<Invariant>(i)),
                  static_cast<unsigned long long>(v.results[i].violations));
    }
  }
  if (!v.passed() || v.events != n || v.duplicate_records == 0) {
    std::fprintf(stderr, "unexpected verdict\n");
    return 1;
  }
  return 0;
}

}  // namespace
}  // namespace weir

int main(int argc, char** argv) { return weir::Main(argc, argv); }
