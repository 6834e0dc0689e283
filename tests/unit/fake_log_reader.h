// An in-process ConnectorPort for tests of the log shape: a small log reader
// that calls the broker endpoint directly. Correct by default; each flag of
// LogBugs switches on one classic log-reader bug. Start() forgets everything,
// as a new process would; after each broker call it honours
// broker.CrashRequested() (connector_port.h) by abandoning the call.
//
// Behaviour: Open takes the spans as resume points; every step lists the
// partitions (to find new ones), reads each held partition once from its next
// offset, reports a gap when retention deleted what it was about to read, and
// emits one record per log record. Watermark: the lowest over partitions of
// their event-time frontier, or now - idle_lag for a partition caught up for
// longer than idle_timeout; held while a partition has emitted nothing; never
// down.
// Checkpoint: the next offset per partition; Committed(N) saves the resume
// points of checkpoint N as bookmarks.
// Many readers: a span may end (it stops reading there); Assign adds spans,
// Revoke drops them, Cut(p, at) keeps [start, max(at, next)) and gives the
// rest. The many-reader bugs below break exactly one of those.
#pragma once

#include <algorithm>
#include <map>
#include <optional>
#include <set>
#include <string>
#include <vector>

#include "harness/runtime/connector_port.h"

namespace weir::testing {

struct LogBugs {
  bool resume_plus_one = false;        // resume-exact (skip)
  bool resume_minus_one = false;       // resume-exact (rewind), duplicate-output
  bool bookmark_on_read = false;       // position-before-commit
  bool ignore_new_partitions = false;  // new-partition
  bool silent_skip = false;            // silent-skip
  bool fastest_watermark = false;      // late-record under bounded lateness
  bool idle_stalls = false;            // watermark-stall (an idle partition holds it back)
  bool global_resume_point = false;    // offset-gap: one resume point (the largest) for all
  // Many readers.
  bool cut_tail_emit = false;                // record-outside-span: reads on into the tail it gave
  bool cut_overlap = false;                  // cut-conservation: the tail starts one before the head's end
  bool cut_drops_first = false;              // cut-conservation: the tail starts one after the head's end
  bool keeps_revoked = false;                // record-outside-span: reads on what was revoked
  bool checkpoint_forgets_assigned = false;  // checkpoint-coverage: names only spans held at the last one
  bool trusts_state = false;                 // record-outside-span: on restore reads what its state names
};

class FakeLogReader : public ConnectorPort {
 public:
  explicit FakeLogReader(LogBugs bugs = {}) : bugs_(bugs) {}

  VirtualDuration idle_timeout = Millis(2000);
  VirtualDuration idle_lag = Millis(1000);

  ConnectorFailure Start(std::uint64_t) override {
    parts_.clear();
    revoked_.clear();
    named_.clear();
    epochs_.clear();
    watermark_.reset();
    listed_ = false;
    return {};
  }
  ConnectorFailure Open(const v1::OpenRequest& rq, v1::OpenResponse* rs, BrokerEndpoint&) override {
    rs->set_shape(v1::LOG);
    new_held_ = rq.new_partitions_held();
    std::uint64_t largest = 0;
    for (const auto& span : rq.spans()) largest = std::max(largest, span.start_offset());
    for (const auto& span : rq.spans()) {
      std::uint64_t start = bugs_.global_resume_point && rq.restore() ? largest : span.start_offset();
      if (rq.restore() && bugs_.resume_plus_one) start += 1;
      if (rq.restore() && bugs_.resume_minus_one && start > 0) start -= 1;
      parts_[span.partition()].next = start;
    }
    for (const auto& span : rq.spans()) {
      if (span.has_end_offset()) parts_[span.partition()].end = span.end_offset();
      parts_[span.partition()].start = parts_[span.partition()].next;
      named_.insert(span.partition());
    }
    if (rq.restore()) {
      const std::string& s = rq.checkpoint_state();
      const std::size_t bar = s.find('|');
      const std::string w = s.substr(0, bar);
      if (!w.empty()) watermark_ = std::stoll(w);
      // The state also lists "p:next," of the spans held at the checkpoint.
      if (bugs_.trusts_state && bar != std::string::npos) {
        std::size_t i = bar + 1;
        while (i < s.size()) {
          const std::size_t colon = s.find(':', i), comma = s.find(',', i);
          const auto p = static_cast<std::uint32_t>(std::stoul(s.substr(i, colon - i)));
          if (!parts_.contains(p)) parts_[p].next = std::stoull(s.substr(colon + 1, comma - colon - 1));
          i = comma + 1;
        }
      }
    }
    return {};
  }
  ConnectorFailure Assign(const v1::AssignRequest& rq, v1::AssignResponse*, BrokerEndpoint&) override {
    for (const auto& span : rq.spans()) {
      Part& part = parts_[span.partition()];
      part = Part{};
      part.next = part.start = span.start_offset();
      if (span.has_end_offset()) part.end = span.end_offset();
      revoked_.erase(span.partition());
    }
    return {};
  }
  ConnectorFailure Revoke(const v1::RevokeRequest& rq, v1::RevokeResponse*, BrokerEndpoint&) override {
    for (std::uint32_t p : rq.partitions()) {
      if (bugs_.keeps_revoked) {
        revoked_.insert(p);  // still read (the bug), but no longer checkpointed
      } else {
        parts_.erase(p);
      }
      named_.erase(p);
    }
    return {};
  }
  ConnectorFailure Cut(const v1::CutRequest& rq, v1::CutResponse* rs, BrokerEndpoint&) override {
    auto it = parts_.find(rq.partition());
    if (it == parts_.end()) return {};
    Part& part = it->second;
    const std::uint64_t c = std::max(rq.at_offset(), part.next);
    auto* head = rs->mutable_head();
    head->set_partition(rq.partition());
    head->set_start_offset(part.start);
    if (part.end.has_value() && c >= *part.end) {  // nothing to give: declined
      head->set_end_offset(*part.end);
      return {};
    }
    head->set_end_offset(bugs_.cut_overlap ? c + 1 : c);
    auto* tail = rs->mutable_tail();
    tail->set_partition(rq.partition());
    tail->set_start_offset(bugs_.cut_drops_first ? c + 1 : c);
    if (part.end.has_value()) tail->set_end_offset(*part.end);
    if (!bugs_.cut_tail_emit) part.end = bugs_.cut_overlap ? c + 1 : c;
    return {};
  }
  ConnectorFailure Advance(const v1::AdvanceRequest& rq, v1::AdvanceResponse* rs, BrokerEndpoint& broker) override {
    VirtualTime now = rq.now_ns();
    if (new_held_ && !(bugs_.ignore_new_partitions && listed_)) {
      v1::ListPartitionsResponse list;
      CallStatus st = broker.ListPartitions({}, &list);
      if (broker.CrashRequested()) return Crashed();
      now = std::max(now, st.now);
      if (st.ok()) {
        listed_ = true;
        for (const auto& p : list.partitions()) parts_.try_emplace(p.partition());
      }
    }
    bool all_caught_up = true;
    for (auto& [p, part] : parts_) {
      if (part.end.has_value() && part.next >= *part.end) continue;  // a closed span, done
      v1::ReadRequest read;
      read.set_partition(p);
      read.set_max_records(
          part.end.has_value() ? static_cast<std::uint32_t>(std::min<std::uint64_t>(16, *part.end - part.next)) : 16);
      v1::ReadResponse got;
      CallStatus st;
      // At most twice: after a gap, read again at once from the first retained
      // offset, so the gap and the records after it come in one step.
      for (int attempt = 0; attempt < 2; ++attempt) {
        read.set_offset(part.next);
        got.Clear();
        st = broker.Read(read, &got);
        if (broker.CrashRequested()) return Crashed();
        now = std::max(now, st.now);
        if (st.code != CallCode::kOutOfRange || st.first_retained_offset <= part.next) break;
        if (!bugs_.silent_skip) {
          auto* gap = rs->add_gaps();
          gap->set_partition(p);
          gap->set_from_offset(part.next);
          gap->set_to_offset(st.first_retained_offset);
        }
        part.next = st.first_retained_offset;
        all_caught_up = false;
      }
      if (st.code == CallCode::kOutOfRange) continue;
      if (!st.ok()) continue;  // try this partition again at the next step
      for (const auto& r : got.records()) {
        auto* out = rs->add_records();
        out->set_partition(p);
        out->set_offset(r.offset());
        out->set_event_time_ns(r.event_time_ns());
        part.frontier = std::max(part.frontier.value_or(r.event_time_ns()), r.event_time_ns());
      }
      part.next = got.next_offset();
      if (got.next_offset() >= got.readable_end()) {
        if (!part.caught_up_since.has_value()) part.caught_up_since = now;
      } else {
        part.caught_up_since.reset();
        all_caught_up = false;
      }
      if (bugs_.bookmark_on_read) {
        v1::SaveBookmarksRequest save;
        auto* b = save.add_bookmarks();
        b->set_partition(p);
        b->set_next_offset(part.next);
        v1::SaveBookmarksResponse ignored;
        (void)broker.SaveBookmarks(save, &ignored);
        if (broker.CrashRequested()) return Crashed();
      }
    }
    // Watermark: an idle partition stands for "nothing older than now -
    // idle_lag can still come"; the others for their frontier.
    std::optional<std::int64_t> candidate;
    bool hold = false;
    for (const auto& [p, part] : parts_) {
      if (part.end.has_value() && part.next >= *part.end) continue;  // done: holds nothing back
      const bool idle = part.caught_up_since.has_value() && now - *part.caught_up_since > idle_timeout;
      std::optional<std::int64_t> value;
      if (idle && !bugs_.idle_stalls) {
        value = now - idle_lag;
      } else if (part.frontier.has_value()) {
        value = *part.frontier;
      } else {
        hold = true;  // nothing emitted yet: where it stands is unknown
        continue;
      }
      candidate = !candidate.has_value()    ? *value
                  : bugs_.fastest_watermark ? std::max(*candidate, *value)
                                            : std::min(*candidate, *value);
    }
    if (!hold && candidate.has_value() && (!watermark_.has_value() || *candidate > *watermark_)) {
      watermark_ = candidate;
    }
    if (watermark_.has_value()) rs->set_watermark_ns(*watermark_);
    rs->set_resume_at_ns(all_caught_up ? now + Millis(100) : now);
    return {};
  }
  ConnectorFailure Checkpoint(const v1::CheckpointRequest& rq, v1::CheckpointResponse* rs, BrokerEndpoint&) override {
    auto& snapshot = epochs_[rq.checkpoint_id()];
    std::string spans;
    std::set<std::uint32_t> named_now;
    for (const auto& [p, part] : parts_) {
      if (revoked_.contains(p)) continue;
      named_now.insert(p);
      if (bugs_.checkpoint_forgets_assigned && !named_.contains(p)) continue;
      spans += std::to_string(p) + ":" + std::to_string(part.next) + ",";
      auto* r = rs->add_resume_points();
      r->set_partition(p);
      r->set_next_offset(part.next);
      snapshot[p] = part.next;
    }
    named_ = std::move(named_now);
    rs->set_state((watermark_.has_value() ? std::to_string(*watermark_) : std::string()) + "|" + spans);
    return {};
  }
  ConnectorFailure Committed(const v1::CommittedRequest& rq, v1::CommittedResponse*, BrokerEndpoint& broker) override {
    auto it = epochs_.find(rq.checkpoint_id());
    if (it == epochs_.end()) return {};
    if (!bugs_.bookmark_on_read) {
      v1::SaveBookmarksRequest save;
      for (const auto& [p, next] : it->second) {
        auto* b = save.add_bookmarks();
        b->set_partition(p);
        b->set_next_offset(next);
      }
      v1::SaveBookmarksResponse ignored;
      (void)broker.SaveBookmarks(save, &ignored);
      if (broker.CrashRequested()) return Crashed();
    }
    epochs_.erase(epochs_.begin(), std::next(it));
    return {};
  }
  void Kill() override {}

 private:
  struct Part {
    std::uint64_t start = 0;
    std::optional<std::uint64_t> end;
    std::uint64_t next = 0;
    std::optional<std::int64_t> frontier;
    std::optional<VirtualTime> caught_up_since;
  };
  static ConnectorFailure Crashed() {
    return ConnectorFailure{ConnectorFailure::Kind::kCrashed, "killed at a crash point", "", ""};
  }

  const LogBugs bugs_;
  std::map<std::uint32_t, Part> parts_;
  std::map<std::uint64_t, std::map<std::uint32_t, std::uint64_t>> epochs_;
  std::optional<std::int64_t> watermark_;
  bool new_held_ = false;
  bool listed_ = false;
  std::set<std::uint32_t> revoked_;  // keeps_revoked: still read, never named
  std::set<std::uint32_t> named_;    // held at the last checkpoint (or Open)
};

}  // namespace weir::testing
