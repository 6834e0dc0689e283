#include "harness/replay/explain.h"

#include <algorithm>
#include <cstdint>
#include <map>
#include <optional>
#include <set>
#include <tuple>
#include <utility>
#include <vector>

#include "absl/container/flat_hash_map.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "harness/edge/command_line.h"
#include "harness/edge/replay_line.h"
#include "harness/core/record_key.h"
#include "harness/core/virtual_time.h"
#include "harness/oracle/oracle.h"
#include "harness/replay/trace_reader.h"
#include "harness/trace/describe.h"

namespace weir {
namespace {

using v1::TraceEvent;

constexpr std::uint64_t kWindowBefore = 25;  // events shown before a proving event
constexpr std::uint64_t kWindowAfter = 8;    // and after it
constexpr std::size_t kMaxLines = 80;        // per violation
constexpr std::uint64_t kDrawBefore = 60;    // events drawn before a proving event
constexpr std::uint64_t kDrawAfter = 20;     // and after it

// Log events are followed by partition: every event of a partition a proving
// event names is shown in the window.
std::uint64_t PartitionTag(std::uint32_t partition) { return LogRecordKey(partition, kMaxOffset); }

// The message (queue) or partition (log) an event is about, or 0.
std::uint64_t MessageOf(const TraceEvent& e) {
  switch (e.kind_case()) {
    case TraceEvent::kPublished: return e.published().message_id();
    case TraceEvent::kDelivered: return e.delivered().message_id();
    case TraceEvent::kEmitted:
      return e.emitted().has_offset() ? PartitionTag(e.emitted().partition()) : e.emitted().message_id();
    case TraceEvent::kAppended: return PartitionTag(e.appended().partition());
    case TraceEvent::kLogRead: return PartitionTag(e.log_read().partition());
    case TraceEvent::kRetentionDeleted: return PartitionTag(e.retention_deleted().partition());
    case TraceEvent::kPartitionAdded: return PartitionTag(e.partition_added().partition());
    case TraceEvent::kBookmarkSaved: return PartitionTag(e.bookmark_saved().partition());
    case TraceEvent::kGapReported: return PartitionTag(e.gap_reported().partition());
    case TraceEvent::kCut: return PartitionTag(e.cut().held().partition());
    case TraceEvent::kAssigned:
      return e.assigned().spans_size() == 1 ? PartitionTag(e.assigned().spans(0).partition()) : 0;
    case TraceEvent::kRevoked:
      return e.revoked().spans_size() == 1 ? PartitionTag(e.revoked().spans(0).partition()) : 0;
    case TraceEvent::kBrokerCallFailed:
      return e.broker_call_failed().has_partition() ? PartitionTag(e.broker_call_failed().partition()) : 0;
    case TraceEvent::kAcked: return e.acked().message_id();
    case TraceEvent::kNacked: return e.nacked().message_id();
    case TraceEvent::kLeaseExtended: return e.lease_extended().message_id();
    case TraceEvent::kLeaseExpired: return e.lease_expired().message_id();
    case TraceEvent::kAckIgnored: return e.ack_ignored().message_id();
    default: return 0;
  }
}

// Events that shape the run around a violation (shown inside the window).
bool IsStructural(const TraceEvent& e) {
  switch (e.kind_case()) {
    case TraceEvent::kCheckpoint:
    case TraceEvent::kCommitted:
    case TraceEvent::kCommitFailed:
    case TraceEvent::kCommitNotice:
    case TraceEvent::kCrashed:
    case TraceEvent::kOpened:
    case TraceEvent::kExited:
    case TraceEvent::kProtocolError:
    case TraceEvent::kConnectorError:
    case TraceEvent::kLivelock:
    case TraceEvent::kCallTimedOut:
    case TraceEvent::kRunEnded:
    case TraceEvent::kBrokerCallFailed:
    case TraceEvent::kFaultApplied:
    case TraceEvent::kAssigned:
    case TraceEvent::kRevoked:
    case TraceEvent::kCut:
    case TraceEvent::kReaderLeft:
    case TraceEvent::kReaderJoined: return true;
    default: return false;
  }
}

struct Section {
  const Violation* violation = nullptr;
  std::set<std::uint64_t> proving;                               // seqs
  std::set<std::uint64_t> messages;                              // ids named by proving events
  std::vector<std::pair<std::uint64_t, std::uint64_t>> windows;  // [lo, hi]
  std::vector<std::pair<std::uint64_t, std::uint64_t>> draw_windows;
  bool broker_calls = false;  // show broker calls in the window (throttle, retry)
  std::string text;
  std::size_t lines = 0;
  std::size_t dropped = 0;
  std::uint64_t last_incarnation = UINT64_MAX;
  // The last fault applied that is not shown yet: shown before the first
  // shown event at its virtual time (a lease that a broker restart ended
  // comes with the restart).
  struct PendingFault {
    v1::TraceEvent event;
    bool drawn = false;
  };
  std::optional<PendingFault> pending_fault;
  // The HTML timeline (only for the first violation of each invariant).
  bool drawn = false;
  ViolationTimeline timeline;

  static bool In(const std::vector<std::pair<std::uint64_t, std::uint64_t>>& w, std::uint64_t seq) {
    for (const auto& [lo, hi] : w) {
      if (seq >= lo && seq <= hi) return true;
    }
    return false;
  }
  bool InWindow(std::uint64_t seq) const { return In(windows, seq); }
  bool InDrawWindow(std::uint64_t seq) const { return In(draw_windows, seq); }
  // Whether a context event (not a proving one) still fits the drawing: the
  // bound is shared out between the proving events' windows, so an early
  // window cannot use it all up and push a later proving event off the
  // timeline. Proving events are always drawn.
  std::vector<std::size_t> drawn_in_window;
  std::size_t proving_drawn = 0;
  bool ContextFits(std::uint64_t seq) {
    // Room is kept for the proving events still to come.
    const std::size_t proving_left = proving.size() > proving_drawn ? proving.size() - proving_drawn : 0;
    if (timeline.events.size() + proving_left >= kMaxDrawnEvents) return false;
    if (drawn_in_window.size() != draw_windows.size()) drawn_in_window.assign(draw_windows.size(), 0);
    for (std::size_t w = 0; w < draw_windows.size(); ++w) {
      if (seq < draw_windows[w].first || seq > draw_windows[w].second) continue;
      if (drawn_in_window[w] >= std::max<std::size_t>(16, kMaxDrawnEvents / draw_windows.size())) return false;
      ++drawn_in_window[w];
      return true;
    }
    return true;
  }
};

template <typename F>
absl::Status ForEachEvent(const std::string& path, F&& f) {
  auto r = TraceReader::Open(path);
  if (!r.ok()) return r.status();
  while (true) {
    auto next = (*r)->Next();
    if (!next.ok()) return next.status();
    if (!*next) return absl::OkStatus();
    f((*r)->event());
  }
}

}  // namespace

absl::StatusOr<ExplainOutput> ExplainTrace(const std::string& path, const ExplainOptions& options) {
  auto reader = TraceReader::Open(path);
  if (!reader.ok()) return reader.status();
  const v1::TraceHeader header = (*reader)->header();
  reader->reset();

  // Pass 1: the oracle, and the overview's commits and crashes.
  ExplainOutput out;
  RunTimelines& tl = out.timelines;
  Oracle oracle(header.scenario().profile(), header.scenario().has_log() ? v1::LOG : v1::QUEUE,
                std::max<std::uint32_t>(1, header.scenario().readers().count()));
  if (absl::Status st = ForEachEvent(path,
                                     [&](const TraceEvent& e) {
                                       oracle.OnEvent(e);
                                       tl.overview.end_ns = e.t_ns();
                                       if (e.has_committed()) {
                                         if (tl.overview.commits.size() < kMaxOverviewMarks) {
                                           tl.overview.commits.push_back({e.seq(), e.t_ns()});
                                         } else {
                                           ++tl.overview.commits_elided;
                                         }
                                       }
                                       if (e.has_crashed()) {
                                         if (tl.overview.crashes.size() < kMaxOverviewMarks) {
                                           tl.overview.crashes.push_back({e.seq(), e.t_ns()});
                                         } else {
                                           ++tl.overview.crashes_elided;
                                         }
                                       }
                                     });
      !st.ok()) {
    return st;
  }
  const Verdict verdict = oracle.Finish();

  out.passed = verdict.passed();
  std::vector<std::string> argv(header.connector_argv().begin(), header.connector_argv().end());
  absl::StrAppend(&out.text, "trace      ", path, "\n", "scenario   ", header.scenario_path(), " (",
                  header.scenario().name(), "), seed ", header.seed(), "\n", "connector  ", ShellJoin(argv), "\n");
  tl.title = absl::StrCat(header.scenario().name(), ", seed ", header.seed());
  tl.source = path;
  tl.scenario = absl::StrCat(header.scenario_path(), " (", header.scenario().name(), ")");
  tl.seed = header.seed();
  tl.connector = ShellJoin(argv);
  tl.replay = options.replay.empty() ? TraceCommand("replay", path) : options.replay;
  tl.passed = verdict.passed();
  tl.overview.events = verdict.events;

  std::vector<Section> sections;
  for (int i = 0; i < kInvariantCount; ++i) {
    const InvariantResult& r = verdict.results[i];
    if (!r.checked || r.violations == 0) continue;
    const char* name = InvariantName(static_cast<Invariant>(i));
    if (!options.only_invariant.empty() && options.only_invariant != name) continue;
    for (const Violation& v : r.first) {
      Section s;
      s.violation = &v;
      for (const Evidence& ev : v.evidence) {
        s.proving.insert(ev.seq);
        s.windows.emplace_back(ev.seq > kWindowBefore ? ev.seq - kWindowBefore : 0, ev.seq + kWindowAfter);
        s.draw_windows.emplace_back(ev.seq > kDrawBefore ? ev.seq - kDrawBefore : 0, ev.seq + kDrawAfter);
      }
      s.broker_calls = v.invariant == Invariant::kThrottleViolation || v.invariant == Invariant::kRetryStorm;
      s.drawn = &v == &r.first.front();
      s.timeline.invariant = name;
      s.timeline.sentence = v.sentence;
      sections.push_back(std::move(s));
    }
    tl.violations_not_drawn += r.violations - 1;
  }
  // Causes before consequences: by the event that started each violation.
  std::stable_sort(sections.begin(), sections.end(), [](const Section& a, const Section& b) {
    return std::make_tuple(a.violation->cause_seq, a.violation->detected_seq,
                           static_cast<int>(a.violation->invariant)) <
           std::make_tuple(b.violation->cause_seq, b.violation->detected_seq, static_cast<int>(b.violation->invariant));
  });
  if (sections.empty()) {
    if (verdict.passed() || options.only_invariant.empty()) {
      absl::StrAppend(&out.text, "\nno violations: every checked invariant held over ", verdict.events, " events\n");
    } else {
      absl::StrAppend(&out.text, "\nno violations of ", options.only_invariant, "\n");
    }
    return out;
  }

  // Pass 2: the messages the proving events name.
  if (absl::Status st = ForEachEvent(path,
                                     [&](const TraceEvent& e) {
                                       for (Section& s : sections) {
                                         if (s.proving.contains(e.seq())) {
                                           if (std::uint64_t m = MessageOf(e); m != 0) s.messages.insert(m);
                                         }
                                       }
                                     });
      !st.ok()) {
    return st;
  }

  // Pass 3: the timelines.
  const bool many = header.scenario().readers().count() > 1;
  // Many readers: what each reader holds as the trace goes (reader ->
  // partition -> [start, end)), written under each violation when it is detected.
  std::map<std::uint32_t, std::map<std::uint32_t, std::pair<std::uint64_t, std::optional<std::uint64_t>>>> held;
  auto track_spans = [&](const TraceEvent& e) {
    auto end_of = [](const v1::SpanHeld& x) {
      return x.has_end_offset() ? std::optional<std::uint64_t>(x.end_offset()) : std::nullopt;
    };
    if (e.has_opened()) {
      held[e.reader()].clear();
      for (const auto& x : e.opened().spans()) held[e.reader()][x.partition()] = {x.start_offset(), end_of(x)};
    } else if (e.has_assigned()) {
      for (const auto& x : e.assigned().spans()) held[e.reader()][x.partition()] = {x.start_offset(), end_of(x)};
    } else if (e.has_revoked()) {
      for (const auto& x : e.revoked().spans()) held[e.reader()].erase(x.partition());
    } else if (e.has_cut() && e.cut().has_tail()) {
      auto& mine = held[e.reader()];
      if (auto it = mine.find(e.cut().held().partition()); it != mine.end()) it->second.second = end_of(e.cut().head());
    } else if (e.has_reader_left()) {
      held.erase(e.reader());
    }
  };
  auto held_text = [&] {
    std::string text = "    spans held then:";
    for (const auto& [r, spans] : held) {
      absl::StrAppend(&text, "\n      reader ", r, ":");
      if (spans.empty()) absl::StrAppend(&text, " none");
      for (const auto& [p, range] : spans) {
        absl::StrAppend(&text, " ", p, "[", range.first, ",",
                        range.second.has_value() ? absl::StrCat(*range.second) : std::string("open"), ")");
      }
    }
    return text + "\n";
  };
  absl::flat_hash_map<std::uint64_t, std::optional<std::int64_t>> watermark;  // per incarnation
  // Drawn records whose epoch is still open: (section, event index).
  std::vector<std::pair<std::size_t, std::size_t>> open_epoch;
  // Draws `ev` when it is shown or in the draw window (and `may_draw`), and
  // writes its text line when shown. Returns whether it was drawn.
  auto emit = [&](Section& s, const TraceEvent& ev, bool proving, bool show, bool may_draw) {
    bool drawn = false;
    if (may_draw && s.drawn && (show || (s.InDrawWindow(ev.seq()) && (!ev.has_broker_call() || s.broker_calls)))) {
      if (proving || s.ContextFits(ev.seq())) {
        if (ev.has_emitted()) {
          open_epoch.emplace_back(static_cast<std::size_t>(&s - sections.data()), s.timeline.events.size());
        }
        s.timeline.events.push_back(TimelineEvent{ev, proving, 0});
        if (proving) ++s.proving_drawn;
        drawn = true;
      } else {
        ++s.timeline.elided;
      }
    }
    if (!show) return drawn;
    if (s.lines >= kMaxLines) {
      ++s.dropped;
      return drawn;
    }
    if (ev.incarnation() != s.last_incarnation) {
      absl::StrAppend(&s.text, many ? absl::StrCat("  reader ", ev.reader(), ", incarnation ") : "  incarnation ",
                      ev.incarnation(), "\n");
      s.last_incarnation = ev.incarnation();
    }
    absl::StrAppend(&s.text, absl::StrFormat("    %s #%-7d %12s  %s\n", proving ? "=>" : "  ", ev.seq(),
                                             FormatTime(ev.t_ns()), DescribeEvent(ev)));
    ++s.lines;
    return drawn;
  };
  if (absl::Status st = ForEachEvent(path,
                                     [&](const TraceEvent& e) {
                                       if (many) track_spans(e);
                                       if (e.has_checkpoint()) {
                                         // The checkpoint closes the epoch of its incarnation; a record of
                                         // an earlier incarnation was discarded with its epoch at the crash.
                                         for (const auto& [si, ei] : open_epoch) {
                                           TimelineEvent& te = sections[si].timeline.events[ei];
                                           if (te.event.incarnation() == e.incarnation())
                                             te.epoch_checkpoint = e.checkpoint().checkpoint_id();
                                         }
                                         open_epoch.clear();
                                       }
                                       bool moved = false;
                                       if (e.has_stepped() && e.stepped().has_watermark_ns()) {
                                         auto& w = watermark[e.incarnation()];
                                         moved = !w.has_value() || *w != e.stepped().watermark_ns();
                                         w = e.stepped().watermark_ns();
                                       }
                                       for (Section& s : sections) {
                                         const bool proving = s.proving.contains(e.seq());
                                         const std::uint64_t m = MessageOf(e);
                                         // A message's few events are all worth showing; a partition's many
                                         // only near the proving events.
                                         const bool about = proving || (m != 0 && s.messages.contains(m) &&
                                                                        (!IsLogKey(m) || s.InWindow(e.seq())));
                                         bool show = about;
                                         if (!show && s.InWindow(e.seq())) {
                                           show = IsStructural(e) || moved || (s.broker_calls && e.has_broker_call());
                                         }
                                         if (s.pending_fault.has_value() && s.pending_fault->event.t_ns() != e.t_ns())
                                           s.pending_fault.reset();
                                         if (!show && e.has_fault_applied()) {
                                           // Not near a proving event, but maybe the cause of one at its time.
                                           s.pending_fault = Section::PendingFault{e, emit(s, e, false, false, true)};
                                           continue;
                                         }
                                         if (show && s.pending_fault.has_value()) {
                                           emit(s, s.pending_fault->event, false, true, !s.pending_fault->drawn);
                                           s.pending_fault.reset();
                                         }
                                         emit(s, e, proving, show, true);
                                         if (many && e.seq() == s.violation->detected_seq && s.lines < kMaxLines) {
                                           absl::StrAppend(&s.text, held_text());
                                           ++s.lines;
                                         }
                                       }
                                     });
      !st.ok()) {
    return st;
  }

  for (Section& s : sections) {
    if (!s.drawn) continue;
    // A fault drawn when an event at its time was shown may come after events
    // drawn for the window: the timeline is in trace order.
    std::stable_sort(s.timeline.events.begin(), s.timeline.events.end(),
                     [](const TimelineEvent& a, const TimelineEvent& b) { return a.event.seq() < b.event.seq(); });
    tl.violations.push_back(std::move(s.timeline));
  }
  std::size_t n = 0;
  for (const Section& s : sections) {
    ++n;
    absl::StrAppend(&out.text, "\nviolation ", n, " of ", sections.size(), ": ", InvariantName(s.violation->invariant),
                    ": ", s.violation->sentence, "\n");
    absl::StrAppend(&out.text, s.text);
    if (s.dropped > 0) absl::StrAppend(&out.text, "    … ", s.dropped, " more events not shown\n");
  }
  std::uint64_t total = 0, echoes = 0;
  for (const auto& r : verdict.results) {
    if (r.checked) total += r.violations;
    if (r.checked) echoes += r.echoes;
  }
  if (total > sections.size()) {
    absl::StrAppend(&out.text, "\n(", total, " violations in all; the first ", Oracle::kKeptViolations,
                    " of each invariant are explained)\n");
  }
  if (echoes > 0) {
    absl::StrAppend(&out.text, "(", echoes, echoes == 1 ? " repeat" : " repeats",
                    " of a cause already counted, such as a regressed watermark seen again at a later "
                    "step, are not counted as violations)\n");
  }
  return out;
}

}  // namespace weir
