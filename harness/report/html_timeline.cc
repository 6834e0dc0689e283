#include "harness/report/html_timeline.h"

#include <algorithm>
#include <cstdint>
#include <optional>

#include "absl/container/flat_hash_map.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "harness/core/virtual_time.h"
#include "harness/report/markup_escape.h"
#include "harness/trace/describe.h"

namespace weir {
namespace {

using v1::TraceEvent;

// Timeline geometry (SVG user units).
constexpr int kLeft = 96;  // lane labels
constexpr int kCol = 16;   // one column per event
constexpr int kRight = 24;
// More than this many events left out between two drawn ones is a fold.
constexpr std::uint64_t kFoldAt = 20;
constexpr int kLaneGap = 44;  // between lanes: broker, connector (one per reader), runtime
constexpr int kBrokerY = 62;
// Overview geometry.
constexpr int kOverviewWidth = 960, kOverviewLeft = 96, kOverviewHeight = 64;

enum Lane { kBroker = 0, kConnector = 1, kRuntime = 2 };

Lane LaneOf(const TraceEvent& e) {
  switch (e.kind_case()) {
    case TraceEvent::kEmitted:
    case TraceEvent::kStepped:
    case TraceEvent::kOpened:
    case TraceEvent::kExited:
    case TraceEvent::kProtocolError:
    case TraceEvent::kConnectorError:
    case TraceEvent::kCallTimedOut:
    case TraceEvent::kLivelock: return kConnector;
    case TraceEvent::kCheckpoint:
    case TraceEvent::kCommitted:
    case TraceEvent::kCommitFailed:
    case TraceEvent::kCommitNotice:
    case TraceEvent::kCrashed:
    case TraceEvent::kRunEnded: return kRuntime;
    case TraceEvent::kAssigned:  // what a reader holds: on its own lane
    case TraceEvent::kRevoked:
    case TraceEvent::kCut:
    case TraceEvent::kReaderLeft:
    case TraceEvent::kReaderJoined: return kConnector;
    default: return kBroker;
  }
}

// CSS class of an event's marker.
const char* ClassOf(const TraceEvent& e) {
  switch (e.kind_case()) {
    case TraceEvent::kPublished: return "published";
    case TraceEvent::kDelivered: return "delivered";
    case TraceEvent::kEmitted: return "record";
    case TraceEvent::kStepped: return "step";
    case TraceEvent::kCheckpoint: return "checkpoint";
    case TraceEvent::kCommitted: return "commit";
    case TraceEvent::kCommitFailed: return "commit-failed";
    case TraceEvent::kCommitNotice: return "notice";
    case TraceEvent::kAcked: return "ack";
    case TraceEvent::kNacked: return "nack";
    case TraceEvent::kLeaseExtended: return "lease-extended";
    case TraceEvent::kLeaseExpired: return "lease-expired";
    case TraceEvent::kOpened: return "opened";
    case TraceEvent::kCrashed: return "crash";
    case TraceEvent::kExited: return "exit";
    case TraceEvent::kProtocolError: return "protocol-error";
    case TraceEvent::kConnectorError: return "connector-error";
    case TraceEvent::kLivelock: return "livelock";
    case TraceEvent::kAckIgnored: return "ack-ignored";
    case TraceEvent::kRunEnded: return "run-ended";
    case TraceEvent::kCallTimedOut: return "timeout";
    case TraceEvent::kBrokerCallFailed: return e.broker_call_failed().code() == 8 ? "throttle" : "broker-error";
    case TraceEvent::kFaultApplied: return "fault";
    case TraceEvent::kBrokerCall: return "call";
    case TraceEvent::kAssigned: return "assigned";
    case TraceEvent::kRevoked: return "revoked";
    case TraceEvent::kCut: return "cut";
    case TraceEvent::kReaderLeft: return "reader-left";
    case TraceEvent::kReaderJoined: return "reader-joined";
    default: return "other";
  }
}

// The extra text an event carries beyond DescribeEvent (connector-supplied).
std::string Detail(const TraceEvent& e) {
  if (e.has_exited() && !e.exited().stderr_tail().empty()) {
    return absl::StrCat("\nstderr: ", e.exited().stderr_tail());
  }
  return "";
}

std::string Marker(const TraceEvent& e, int x, int y) {
  switch (e.kind_case()) {
    case TraceEvent::kCrashed:
    case TraceEvent::kExited:
      return absl::StrFormat("<path class=\"x\" d=\"M%d %dl10 10m0 -10l-10 10\"/>", x - 5, y - 5);
    case TraceEvent::kCheckpoint:
    case TraceEvent::kCommitted:
    case TraceEvent::kCommitFailed:
    case TraceEvent::kCommitNotice:
    case TraceEvent::kRunEnded:
      return absl::StrFormat("<rect x=\"%d\" y=\"%d\" width=\"10\" height=\"10\"/>", x - 5, y - 5);
    case TraceEvent::kAcked:
    case TraceEvent::kNacked: return absl::StrFormat("<path d=\"M%d %dl6 6l-6 6l-6 -6z\"/>", x, y - 6);
    case TraceEvent::kBrokerCallFailed: return absl::StrFormat("<path d=\"M%d %dl6 11h-12z\"/>", x, y - 6);
    case TraceEvent::kStepped:
    case TraceEvent::kBrokerCall:
      return absl::StrFormat("<rect x=\"%d\" y=\"%d\" width=\"2\" height=\"12\"/>", x - 1, y - 6);
    default: return absl::StrFormat("<circle cx=\"%d\" cy=\"%d\" r=\"4\"/>", x, y);
  }
}

int ColumnX(std::size_t i) { return kLeft + static_cast<int>(i) * kCol + kCol / 2; }

// The lanes of one timeline: the broker, one connector lane per reader shown
// ("connector" with one reader, "reader N" with several), the runtime, then
// the watermark panel.
struct Layout {
  explicit Layout(std::uint32_t reader_count) : readers(std::max<std::uint32_t>(1, reader_count)) {}
  int Y(Lane lane, std::uint32_t reader = 0) const {
    switch (lane) {
      case kBroker: return kBrokerY;
      case kConnector: return kBrokerY + kLaneGap * (1 + static_cast<int>(std::min(reader, readers - 1)));
      case kRuntime: break;
    }
    return kBrokerY + kLaneGap * (1 + static_cast<int>(readers));
  }
  int Y(const TraceEvent& e) const { return Y(LaneOf(e), e.reader()); }
  int WmTop() const { return Y(kRuntime) + 46; }
  int WmBottom() const { return WmTop() + 120; }
  int Height() const { return WmBottom() + 24; }
  std::uint32_t readers;
};

std::string TimelineSvg(const ViolationTimeline& v) {
  const std::size_t n = v.events.size();
  const int width = kLeft + static_cast<int>(n) * kCol + kRight;
  std::uint32_t readers = 1;
  for (const TimelineEvent& te : v.events) readers = std::max(readers, te.event.reader() + 1);
  const Layout lay(readers);
  const int wm_top = lay.WmTop(), wm_bottom = lay.WmBottom(), height = lay.Height();
  std::string out = absl::StrFormat(
      "<svg class=\"timeline\" xmlns=\"http://www.w3.org/2000/svg\" width=\"%d\" height=\"%d\" "
      "viewBox=\"0 0 %d %d\" role=\"img\">\n",
      width, height, width, height);

  // Incarnations as shaded bands, labelled (one reader: several readers'
  // incarnations interleave, and each lane says whose events it holds).
  for (std::size_t i = 0; i < n && readers == 1;) {
    std::size_t j = i;
    const std::uint64_t inc = v.events[i].event.incarnation();
    while (j < n && v.events[j].event.incarnation() == inc) ++j;
    const int x0 = kLeft + static_cast<int>(i) * kCol;
    absl::StrAppend(&out, absl::StrFormat("<rect class=\"band b%d\" x=\"%d\" y=\"20\" width=\"%d\" height=\"%d\"/>"
                                          "<text class=\"inc\" x=\"%d\" y=\"16\">incarnation %d</text>\n",
                                          inc % 2, x0, static_cast<int>(j - i) * kCol, wm_bottom - 16, x0 + 2, inc));
    i = j;
  }
  // Lanes.
  std::vector<std::pair<int, std::string>> lanes = {{lay.Y(kBroker), "broker"}};
  for (std::uint32_t r = 0; r < readers; ++r) {
    lanes.emplace_back(lay.Y(kConnector, r), readers == 1 ? std::string("connector") : absl::StrCat("reader ", r));
  }
  lanes.emplace_back(lay.Y(kRuntime), "runtime");
  for (const auto& [y, name] : lanes) {
    absl::StrAppend(&out, absl::StrFormat("<line class=\"lane\" x1=\"%d\" y1=\"%d\" x2=\"%d\" y2=\"%d\"/>"
                                          "<text class=\"lane-name\" x=\"4\" y=\"%d\">%s</text>\n",
                                          kLeft, y, width - kRight, y, y + 4, name));
  }
  // Folds: where the timeline jumps over a long stretch of the run (between
  // the windows around proving events far apart), a dashed rule says how
  // many events it folded away, so every proving event stays in view.
  for (std::size_t i = 1; i < n; ++i) {
    const std::uint64_t prev = v.events[i - 1].event.seq(), seq = v.events[i].event.seq();
    if (seq - prev - 1 <= kFoldAt) continue;
    const int x = kLeft + static_cast<int>(i) * kCol;
    absl::StrAppend(&out, absl::StrFormat("<line class=\"fold\" x1=\"%d\" y1=\"20\" x2=\"%d\" y2=\"%d\"/>"
                                          "<text class=\"fold-label\" x=\"%d\" y=\"%d\">%d events folded</text>\n",
                                          x, x, wm_bottom, x + 2, wm_bottom + 12, static_cast<int>(seq - prev - 1)));
  }
  // Time labels along the top of the lanes, every ten columns.
  for (std::size_t i = 0; i < n; i += 10) {
    absl::StrAppend(&out, absl::StrFormat("<text class=\"tick\" x=\"%d\" y=\"34\">%s</text>\n", ColumnX(i) - 4,
                                          FormatTime(v.events[i].event.t_ns())));
  }

  // Joins: each commit to the records of the epoch it closed, each ack to the
  // latest record of its message shown before it.
  absl::flat_hash_map<std::uint64_t, std::size_t> last_record;  // message -> column
  absl::flat_hash_map<std::uint64_t, std::size_t> delivery;     // receipt -> column
  for (std::size_t i = 0; i < n; ++i) {
    const TraceEvent& e = v.events[i].event;
    if (e.has_emitted()) last_record[e.emitted().message_id()] = i;
    if (e.has_delivered()) delivery[e.delivered().receipt()] = i;
    if (e.has_acked()) {
      auto it = delivery.find(e.acked().receipt());
      if (it != delivery.end()) {
        const int x0 = ColumnX(it->second), x1 = ColumnX(i);
        absl::StrAppend(
            &out, absl::StrFormat("<path class=\"join receipt-join\" d=\"M%d %dQ%d %d %d %d\"/>\n", x0,
                                  lay.Y(kBroker) - 5, (x0 + x1) / 2, lay.Y(kBroker) - 26, x1, lay.Y(kBroker) - 5));
      }
    }
    if (e.has_committed()) {
      for (std::size_t k = 0; k < i; ++k) {
        if (v.events[k].event.has_emitted() && v.events[k].epoch_checkpoint == e.committed().checkpoint_id()) {
          absl::StrAppend(&out, absl::StrFormat("<line class=\"join commit-join\" x1=\"%d\" y1=\"%d\" x2=\"%d\" "
                                                "y2=\"%d\"/>\n",
                                                ColumnX(i), lay.Y(kRuntime), ColumnX(k), lay.Y(v.events[k].event)));
        }
      }
    }
    if (e.has_acked()) {
      auto it = last_record.find(e.acked().message_id());
      if (it != last_record.end()) {
        absl::StrAppend(&out, absl::StrFormat("<line class=\"join ack-join%s\" x1=\"%d\" y1=\"%d\" x2=\"%d\" "
                                              "y2=\"%d\"/>\n",
                                              v.events[i].proving ? " bad" : "", ColumnX(i), lay.Y(kBroker),
                                              ColumnX(it->second), lay.Y(v.events[it->second].event)));
      }
    }
  }
  // Crashes: a red rule across every lane and the watermark panel.
  for (std::size_t i = 0; i < n; ++i) {
    if (!v.events[i].event.has_crashed()) continue;
    absl::StrAppend(&out, absl::StrFormat("<line class=\"crash-rule\" x1=\"%d\" y1=\"20\" x2=\"%d\" y2=\"%d\"/>\n",
                                          ColumnX(i), ColumnX(i), wm_bottom));
  }
  // Markers.
  for (std::size_t i = 0; i < n; ++i) {
    const TimelineEvent& te = v.events[i];
    const TraceEvent& e = te.event;
    const int x = ColumnX(i), y = lay.Y(e);
    absl::StrAppend(
        &out, "<g class=\"ev ", ClassOf(e), te.proving ? " proving" : "", "\" data-seq=\"", e.seq(), "\"><title>",
        EscapeMarkup(absl::StrCat("#", e.seq(), " at ", FormatTime(e.t_ns()), ", incarnation ", e.incarnation(),
                                  readers > 1 ? absl::StrCat(" (reader ", e.reader(), ")") : std::string(), ": ",
                                  DescribeEvent(e), Detail(e))),
        "</title>");
    if (te.proving)
      absl::StrAppend(&out, absl::StrFormat("<circle class=\"ring\" cx=\"%d\" cy=\"%d\" r=\"9\"/>", x, y));
    absl::StrAppend(&out, Marker(e, x, y), "</g>\n");
  }

  // The watermark against event time, with each record at its event time.
  std::optional<std::int64_t> lo, hi;
  auto widen = [&](std::int64_t t) {
    lo = lo ? std::min(*lo, t) : t;
    hi = hi ? std::max(*hi, t) : t;
  };
  for (const TimelineEvent& te : v.events) {
    const TraceEvent& e = te.event;
    if (e.has_emitted()) widen(e.emitted().event_time_ns());
    if (e.has_stepped() && e.stepped().has_watermark_ns()) widen(e.stepped().watermark_ns());
    if (e.has_opened() && e.opened().has_watermark_ns()) widen(e.opened().watermark_ns());
  }
  absl::StrAppend(&out, absl::StrFormat("<text class=\"lane-name\" x=\"4\" y=\"%d\">event time</text>"
                                        "<line class=\"lane\" x1=\"%d\" y1=\"%d\" x2=\"%d\" y2=\"%d\"/>\n",
                                        wm_top + 10, kLeft, wm_bottom, width - kRight, wm_bottom));
  if (!lo.has_value()) {
    absl::StrAppend(&out, absl::StrFormat("<text class=\"tick\" x=\"%d\" y=\"%d\">no records or watermarks in "
                                          "this stretch</text>\n",
                                          kLeft + 4, wm_top + 40));
  } else {
    const double span = *hi > *lo ? static_cast<double>(*hi - *lo) : 1.0;
    auto y = [&](std::int64_t t) {
      return wm_bottom - 6 - static_cast<double>(t - *lo) / span * (wm_bottom - wm_top - 12);
    };
    absl::StrAppend(&out, absl::StrFormat("<text class=\"tick\" x=\"4\" y=\"%d\">%s</text>"
                                          "<text class=\"tick\" x=\"4\" y=\"%d\">%s</text>\n",
                                          wm_top + 24, FormatTime(*hi), wm_bottom - 4, FormatTime(*lo)));
    // One watermark line per reader, broken at each of its restarts.
    struct Line {
      std::optional<std::int64_t> wm;
      std::uint64_t inc = 0;
      std::string path;
    };
    std::vector<Line> lines(readers);
    for (std::uint32_t r = 0; r < readers; ++r) {
      for (std::size_t i = 0; i < n; ++i) {
        if (v.events[i].event.reader() == r) {
          lines[r].inc = v.events[i].event.incarnation();
          break;
        }
      }
    }
    auto flush = [&](std::string& path) {
      if (!path.empty()) absl::StrAppend(&out, "<path class=\"watermark\" d=\"", path, "\"/>\n");
      path.clear();
    };
    for (std::size_t i = 0; i < n; ++i) {
      const TraceEvent& e = v.events[i].event;
      const int x = ColumnX(i);
      Line& line = lines[std::min(e.reader(), readers - 1)];
      auto& wm = line.wm;
      auto& path = line.path;
      const bool own = readers == 1 || e.has_stepped() || e.has_opened() || e.has_emitted();
      if (own && e.incarnation() != line.inc) {
        if (wm.has_value()) absl::StrAppend(&path, absl::StrFormat("H%d", x - kCol / 2));
        flush(path);
        wm.reset();
        line.inc = e.incarnation();
      }
      std::optional<std::int64_t> next;
      if (e.has_stepped() && e.stepped().has_watermark_ns()) next = e.stepped().watermark_ns();
      if (e.has_opened() && e.opened().has_watermark_ns()) next = e.opened().watermark_ns();
      if (e.has_emitted()) {
        const bool late = wm.has_value() && e.emitted().event_time_ns() < *wm;
        absl::StrAppend(&out, absl::StrFormat("<circle class=\"et%s\" cx=\"%d\" cy=\"%.1f\" r=\"3\"/>\n",
                                              late ? " late" : "", x, y(e.emitted().event_time_ns())));
      }
      if (next.has_value()) {
        if (path.empty()) {
          absl::StrAppend(&path, absl::StrFormat("M%d %.1f", x, y(*next)));
        } else {
          absl::StrAppend(&path, absl::StrFormat("H%dV%.1f", x, y(*next)));
        }
        wm = next;
      }
    }
    for (Line& line : lines) {
      if (line.wm.has_value() && n > 0) absl::StrAppend(&line.path, absl::StrFormat("H%d", ColumnX(n - 1) + kCol / 2));
      flush(line.path);
    }
  }
  out += "</svg>\n";
  return out;
}

std::string OverviewSvg(const RunTimelines& run) {
  const RunOverview& o = run.overview;
  const double span = o.end_ns > 0 ? static_cast<double>(o.end_ns) : 1.0;
  const int w = kOverviewWidth - kOverviewLeft - 10;
  auto x = [&](std::int64_t t) { return kOverviewLeft + static_cast<double>(std::max<std::int64_t>(t, 0)) / span * w; };
  std::string out = absl::StrFormat(
      "<svg class=\"overview\" xmlns=\"http://www.w3.org/2000/svg\" width=\"%d\" height=\"%d\" "
      "viewBox=\"0 0 %d %d\" role=\"img\">\n",
      kOverviewWidth, kOverviewHeight, kOverviewWidth, kOverviewHeight);
  absl::StrAppend(&out, absl::StrFormat("<text class=\"lane-name\" x=\"4\" y=\"24\">commits</text>"
                                        "<text class=\"lane-name\" x=\"4\" y=\"46\">crashes</text>"
                                        "<line class=\"lane\" x1=\"%d\" y1=\"56\" x2=\"%d\" y2=\"56\"/>"
                                        "<text class=\"tick\" x=\"%d\" y=\"64\">0s</text>"
                                        "<text class=\"tick\" x=\"%d\" y=\"64\">%s</text>\n",
                                        kOverviewLeft, kOverviewLeft + w, kOverviewLeft, kOverviewLeft + w - 60,
                                        FormatTime(o.end_ns)));
  // The stretches drawn below, and their proving events.
  for (const ViolationTimeline& v : run.violations) {
    if (v.events.empty()) continue;
    const double x0 = x(v.events.front().event.t_ns()), x1 = x(v.events.back().event.t_ns());
    absl::StrAppend(&out, absl::StrFormat("<rect class=\"shown\" x=\"%.1f\" y=\"6\" width=\"%.1f\" height=\"48\"/>\n",
                                          x0, std::max(2.0, x1 - x0)));
    for (const TimelineEvent& te : v.events) {
      if (!te.proving) continue;
      absl::StrAppend(&out,
                      absl::StrFormat("<path class=\"proving-mark\" d=\"M%.1f 2l4 6h-8z\"/>\n", x(te.event.t_ns())));
    }
  }
  for (const RunOverview::Mark& m : o.commits) {
    absl::StrAppend(&out, absl::StrFormat("<line class=\"mark commit\" data-seq=\"%d\" x1=\"%.1f\" y1=\"12\" "
                                          "x2=\"%.1f\" y2=\"30\"/>\n",
                                          m.seq, x(m.t_ns), x(m.t_ns)));
  }
  for (const RunOverview::Mark& m : o.crashes) {
    absl::StrAppend(&out, absl::StrFormat("<line class=\"mark crash\" data-seq=\"%d\" x1=\"%.1f\" y1=\"34\" "
                                          "x2=\"%.1f\" y2=\"52\"/>\n",
                                          m.seq, x(m.t_ns), x(m.t_ns)));
  }
  out += "</svg>\n";
  return out;
}

constexpr char kLegend[] =
    "<p class=\"legend\">"
    "<span class=\"k delivered\">&#9679; delivered</span> "
    "<span class=\"k record\">&#9679; record</span> "
    "<span class=\"k checkpoint\">&#9632; checkpoint</span> "
    "<span class=\"k commit\">&#9632; commit (lines: the records it made durable)</span> "
    "<span class=\"k commit-failed\">&#9632; commit failed</span> "
    "<span class=\"k notice\">&#9632; notice</span> "
    "<span class=\"k ack\">&#9670; ack (arc: its delivery; line: its record, red when premature)</span> "
    "<span class=\"k throttle\">&#9650; throttled</span> "
    "<span class=\"k crash\">&#10005; crash</span> "
    "<span class=\"k proving\">&#9711; cited by the oracle</span> "
    "<span class=\"k watermark\">&#8212; watermark</span> "
    "<span class=\"k late\">&#9679; late record</span>"
    "</p>\n";

}  // namespace

std::string RunTimelinesHtml(const RunTimelines& run) {
  std::string out = "<section class=\"run\">\n";
  absl::StrAppend(&out, "<h2>", EscapeMarkup(run.title), " &#8212; ", run.passed ? "passed" : "FAILED", "</h2>\n");
  out += "<table class=\"facts\">\n";
  auto row = [&out](const char* k, const std::string& v) {
    if (v.empty()) return;
    absl::StrAppend(&out, "<tr><th>", k, "</th><td><code>", EscapeMarkup(v), "</code></td></tr>\n");
  };
  row("source", run.source);
  row("scenario", run.scenario);
  row("seed", absl::StrCat(run.seed));
  row("connector", run.connector);
  row("replay", run.replay);
  row("events", absl::StrCat(run.overview.events, " (", run.overview.commits.size() + run.overview.commits_elided,
                             " commits, ", run.overview.crashes.size() + run.overview.crashes_elided,
                             " crashes), ending at ", FormatTime(run.overview.end_ns)));
  out += "</table>\n<h3>The whole run</h3>\n";
  out += OverviewSvg(run);
  if (run.overview.commits_elided + run.overview.crashes_elided > 0) {
    absl::StrAppend(&out, "<p class=\"elided\">The overview draws the first ", run.overview.commits.size(),
                    " commits and ", run.overview.crashes.size(), " crashes; ", run.overview.commits_elided,
                    " commits and ", run.overview.crashes_elided, " crashes after them are not drawn.</p>\n");
  }
  if (run.violations.empty()) {
    out += "<p>No violations: every checked invariant held.</p>\n";
  } else {
    out += kLegend;
  }
  std::size_t k = 0;
  for (const ViolationTimeline& v : run.violations) {
    ++k;
    absl::StrAppend(&out, "<div class=\"violation\" data-invariant=\"", EscapeMarkup(v.invariant), "\">\n<h3>",
                    "violation ", k, " of ", run.violations.size(), ": <span class=\"inv\">", EscapeMarkup(v.invariant),
                    "</span></h3>\n<p>", EscapeMarkup(v.sentence), "</p>\n");
    if (v.events.empty()) {
      out += "<p class=\"elided\">No events to draw.</p>\n";
    } else {
      absl::StrAppend(&out, "<p class=\"range\">Events #", v.events.front().event.seq(), " to #",
                      v.events.back().event.seq(), " (", FormatTime(v.events.front().event.t_ns()), " to ",
                      FormatTime(v.events.back().event.t_ns()), "): ", v.events.size(),
                      " events around the proving ones; the rest of the run is left out.</p>\n");
      absl::StrAppend(&out, "<div class=\"scroll\">\n", TimelineSvg(v), "</div>\n");
    }
    if (v.elided > 0) {
      absl::StrAppend(&out, "<p class=\"elided\">", v.elided,
                      " more events about the same messages or near the proving events are not drawn "
                      "(the page is bounded; weir explain shows the text timeline).</p>\n");
    }
    out += "</div>\n";
  }
  if (run.violations_not_drawn > 0) {
    absl::StrAppend(&out, "<p class=\"elided\">", run.violations_not_drawn,
                    " further violations were counted but are not drawn (only the first of each invariant "
                    "is).</p>\n");
  }
  out += "</section>\n";
  return out;
}

std::string HtmlPage(std::string_view title, std::string_view body) {
  std::string out =
      "<!DOCTYPE html>\n<html xmlns=\"http://www.w3.org/1999/xhtml\" lang=\"en\">\n<head>\n"
      "<meta charset=\"utf-8\"/>\n"
      "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; style-src 'unsafe-inline'\"/>\n"
      "<title>";
  absl::StrAppend(&out, EscapeMarkup(title), "</title>\n", R"(<style>
body { font: 14px/1.4 sans-serif; margin: 1.5em; color: #222; }
h1 { font-size: 1.4em; } h2 { font-size: 1.2em; margin-top: 2em; } h3 { font-size: 1.05em; }
code { font: 12px monospace; word-break: break-all; }
table { border-collapse: collapse; margin: .5em 0; }
th, td { border: 1px solid #ccc; padding: 2px 8px; text-align: left; vertical-align: top; }
td.failed { color: #b00; font-weight: bold; } td.passed { color: #070; } td.unexercised { color: #a60; }
.scroll { overflow-x: auto; border: 1px solid #ddd; }
.elided, .range { color: #555; font-size: 12px; }
.inv { color: #b00; }
svg text { font: 10px sans-serif; fill: #333; }
svg .tick { font-size: 9px; fill: #666; }
.lane { stroke: #bbb; stroke-width: 1; }
.band.b0 { fill: #f4f7fb; } .band.b1 { fill: #fbf7f0; }
.ev circle, .ev rect, .ev path { fill: #888; stroke: none; }
.ev.published circle { fill: #bbb; } .ev.delivered circle { fill: #3a6ea5; }
.ev.record circle { fill: #2a8a4a; } .ev.step rect { fill: #999; }
.ev.checkpoint rect { fill: #6a5acd; } .ev.commit rect { fill: #1a7f37; }
.ev.commit-failed rect { fill: #d4a017; } .ev.notice rect { fill: #4aa3a3; }
.ev.ack path { fill: #2b5fd9; } .ev.nack path { fill: #999; }
.ev.throttle path { fill: #e07000; } .ev.broker-error path { fill: #a05000; }
.ev.crash path.x, .ev.exit path.x { fill: none; stroke: #c00; stroke-width: 2.5; }
.ev.protocol-error circle, .ev.timeout circle { fill: #c00; }
.ev .ring { fill: none; stroke: #ff8c00; stroke-width: 2.5; }
.crash-rule { stroke: #c00; stroke-width: 1.5; stroke-dasharray: 4 3; }
.fold { stroke: #888; stroke-width: 2; stroke-dasharray: 2 2; } .fold-label { font-size: 10px; fill: #555; }
.join { stroke-width: 1; opacity: .55; }
.commit-join { stroke: #1a7f37; } .receipt-join { fill: none; stroke: #2b5fd9; } .ack-join { stroke: #2b5fd9; } .ack-join.bad { stroke: #c00; stroke-width: 2; opacity: .9; }
.watermark { fill: none; stroke: #6a5acd; stroke-width: 2; }
circle.et { fill: #2a8a4a; } circle.et.late { fill: #c00; }
.overview .shown { fill: #ffe9c7; } .mark.commit { stroke: #1a7f37; stroke-width: 1; }
.mark.crash { stroke: #c00; stroke-width: 1.5; } .proving-mark { fill: #ff8c00; }
.legend .k { margin-right: .8em; white-space: nowrap; } .k.delivered { color: #3a6ea5; } .k.record { color: #2a8a4a; }
.k.checkpoint { color: #6a5acd; } .k.commit { color: #1a7f37; } .k.commit-failed { color: #d4a017; }
.k.notice { color: #4aa3a3; } .k.ack { color: #2b5fd9; } .k.throttle { color: #e07000; } .k.crash { color: #c00; }
.k.proving { color: #ff8c00; } .k.watermark { color: #6a5acd; } .k.late { color: #c00; }
</style>
</head>
<body>
)");
  out.append(body.data(), body.size());
  out += "</body>\n</html>\n";
  return out;
}

}  // namespace weir
