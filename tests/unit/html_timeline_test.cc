// EscapeMarkup and the HTML timeline renderer.
#include "harness/report/html_timeline.h"

#include <gtest/gtest.h>

#include <string>

#include "harness/report/markup_escape.h"

namespace weir {
namespace {

std::size_t Count(const std::string& haystack, const std::string& needle) {
  std::size_t n = 0;
  for (std::size_t at = haystack.find(needle); at != std::string::npos; at = haystack.find(needle, at + 1)) ++n;
  return n;
}

const std::string kFffd = "\xEF\xBF\xBD";

TEST(EscapeMarkup, TurnsScriptTagsQuotesAndAmpersandsIntoEntities) {
  // The five characters HTML and XML treat as markup (HTML Living Standard,
  // "Escaping a string"; XML 1.0 §2.4 predefined entities).
  EXPECT_EQ(EscapeMarkup("<script>alert(\"x\")</script>"), "&lt;script&gt;alert(&quot;x&quot;)&lt;/script&gt;");
  EXPECT_EQ(EscapeMarkup("a & b 'c'"), "a &amp; b &#39;c&#39;");
  EXPECT_EQ(EscapeMarkup("&amp;"), "&amp;amp;");
  EXPECT_EQ(EscapeMarkup("plain text, tab\tnewline\n"), "plain text, tab\tnewline\n");
}

TEST(EscapeMarkup, PassesWellFormedUtf8Through) {
  EXPECT_EQ(EscapeMarkup("caf\xC3\xA9 \xE2\x82\xAC \xF0\x9F\x8C\x8A"), "caf\xC3\xA9 \xE2\x82\xAC \xF0\x9F\x8C\x8A");
}

TEST(EscapeMarkup, ReplacesInvalidUtf8WithReplacementCharacters) {
  // Ill-formed sequences per RFC 3629 §3-4: a lone 0xFF, a stray continuation
  // byte, an overlong NUL (C0 80), a UTF-16 surrogate (ED A0 80), a code point
  // above U+10FFFF (F4 90 80 80) and a truncated 3-byte sequence.
  EXPECT_EQ(EscapeMarkup("a\xFF"
                         "b"),
            "a" + kFffd + "b");
  EXPECT_EQ(EscapeMarkup("\x80"), kFffd);
  EXPECT_EQ(EscapeMarkup("\xC0\x80"), kFffd + kFffd);
  EXPECT_EQ(EscapeMarkup("\xED\xA0\x80"), kFffd + kFffd + kFffd);
  EXPECT_EQ(EscapeMarkup("\xF4\x90\x80\x80"), kFffd + kFffd + kFffd + kFffd);
  EXPECT_EQ(EscapeMarkup("\xE2\x82<"), kFffd + kFffd + "&lt;");
}

TEST(EscapeMarkup, ReplacesCharactersXmlForbids) {
  // XML 1.0 §2.2 "Char": no C0 controls but tab, LF, CR; no U+FFFE/U+FFFF.
  EXPECT_EQ(EscapeMarkup(std::string("a\0b", 3)), "a" + kFffd + "b");
  EXPECT_EQ(EscapeMarkup("\x01\x1B\x7F"), kFffd + kFffd + kFffd);
  EXPECT_EQ(EscapeMarkup("\xEF\xBF\xBE"), kFffd);
  EXPECT_EQ(EscapeMarkup("\xC2\x85"), kFffd);  // C1 control NEL
}

v1::TraceEvent Event(std::uint64_t seq, std::int64_t t, std::uint64_t incarnation) {
  v1::TraceEvent e;
  e.set_seq(seq);
  e.set_t_ns(t);
  e.set_incarnation(incarnation);
  return e;
}

RunTimelines HostileRun() {
  RunTimelines run;
  run.title = "title <script>alert(1)</script>";
  run.connector = "/bin/connector '<script>x</script>' \"&\" \xFF";
  run.replay = "weir replay 'a&b.jsonl'";
  run.passed = false;
  run.overview.events = 9;
  run.overview.end_ns = 9000;
  run.overview.commits = {{4, 4000}, {7, 7000}};
  run.overview.crashes = {{5, 5000}};
  ViolationTimeline v;
  v.invariant = "unexpected-exit";
  v.sentence = "the connector said <img src=x onerror=alert(1)>";
  auto add = [&](v1::TraceEvent e, bool proving = false, std::uint64_t epoch = 0) {
    v.events.push_back(TimelineEvent{std::move(e), proving, epoch});
  };
  v1::TraceEvent e = Event(1, 1000, 1);
  e.mutable_delivered()->set_message_id(3);
  e.mutable_delivered()->set_receipt(30);
  add(e);
  e = Event(2, 2000, 1);
  e.mutable_emitted()->set_message_id(3);
  e.mutable_emitted()->set_event_time_ns(1500);
  add(e, false, 1);
  e = Event(3, 3000, 1);
  e.mutable_checkpoint()->set_checkpoint_id(1);
  add(e);
  e = Event(4, 4000, 1);
  e.mutable_committed()->set_checkpoint_id(1);
  add(e);
  e = Event(5, 5000, 1);
  e.mutable_crashed()->set_point("after-commit");
  add(e);
  e = Event(6, 6000, 2);
  e.mutable_acked()->set_message_id(3);
  e.mutable_acked()->set_receipt(30);
  add(e, true);
  e = Event(7, 7000, 2);
  e.mutable_exited()->set_status("exit 3");
  e.mutable_exited()->set_stderr_tail("<script>alert('stderr')</script> & \"quoted\" \xFE\xFF");
  add(e, true);
  e = Event(8, 8000, 2);
  e.mutable_protocol_error()->set_call("Advance");
  e.mutable_protocol_error()->set_detail("</title><script>alert(2)</script>");
  add(e);
  run.violations.push_back(std::move(v));
  return run;
}

TEST(HtmlTimeline, EscapesEveryConnectorSuppliedString) {
  const std::string page = HtmlPage("weir <explain>", RunTimelinesHtml(HostileRun()));
  EXPECT_EQ(Count(page, "<script"), 0u) << page;
  EXPECT_EQ(Count(page, "<img"), 0u);
  EXPECT_NE(page.find("&lt;/title&gt;&lt;script&gt;alert(2)"), std::string::npos);
  EXPECT_NE(page.find("&lt;script&gt;alert(&#39;stderr&#39;)&lt;/script&gt; &amp; &quot;quoted&quot; " + kFffd + kFffd),
            std::string::npos);
  EXPECT_NE(page.find("&lt;img src=x onerror=alert(1)&gt;"), std::string::npos);
  EXPECT_NE(page.find("<title>weir &lt;explain&gt;</title>"), std::string::npos);
  // The raw invalid bytes never reach the page.
  EXPECT_EQ(page.find('\xFF'), std::string::npos);
  EXPECT_EQ(page.find('\xFE'), std::string::npos);
}

TEST(HtmlTimeline, DrawsOneOverviewMarkPerCommitAndCrash) {
  const std::string html = RunTimelinesHtml(HostileRun());
  EXPECT_EQ(Count(html, "class=\"mark commit\""), 2u);
  EXPECT_EQ(Count(html, "class=\"mark crash\""), 1u);
  EXPECT_EQ(Count(html, "class=\"crash-rule\""), 1u);
  EXPECT_EQ(Count(html, "class=\"ev crash\""), 1u);
  EXPECT_EQ(Count(html, "class=\"ev commit\""), 1u);
}

TEST(HtmlTimeline, JoinsCommitsToTheirEpochAndAcksToTheirRecord) {
  const std::string html = RunTimelinesHtml(HostileRun());
  EXPECT_EQ(Count(html, "class=\"join commit-join\""), 1u);   // checkpoint 1 closed the epoch of one record
  EXPECT_EQ(Count(html, "class=\"join ack-join bad\""), 1u);  // the proving ack, to message 3's record
  EXPECT_EQ(Count(html, "class=\"join receipt-join\""), 1u);  // and to its delivery (receipt 30)
  EXPECT_EQ(Count(html, " proving\" data-seq="), 2u);
  EXPECT_EQ(Count(html, "class=\"watermark\""), 0u);   // no watermark was reported
  EXPECT_EQ(Count(html, "<circle class=\"et\""), 1u);  // the record at its event time
}

// Proving events far apart: the stretch between their windows is folded,
// with a rule that says how many events it stands for; short skips are not.
TEST(HtmlTimeline, FoldsTheLongStretchBetweenTwoWindows) {
  RunTimelines run = HostileRun();
  ViolationTimeline& v = run.violations[0];
  EXPECT_EQ(Count(RunTimelinesHtml(run), "class=\"fold\""), 0u);  // 1 … 8, no jump
  for (TimelineEvent& te : v.events) {
    if (te.event.seq() >= 6) te.event.set_seq(te.event.seq() + 994);  // 6, 7, 8 -> 1000, 1001, 1002
  }
  const std::string html = RunTimelinesHtml(run);
  EXPECT_EQ(Count(html, "class=\"fold\""), 1u);
  EXPECT_NE(html.find(">994 events folded<"), std::string::npos);  // #6 … #999
  v.events[5].event.set_seq(26);                                   // a jump of 20 events (#6 … #25) is no fold
  v.events[6].event.set_seq(27);
  v.events[7].event.set_seq(28);
  EXPECT_EQ(Count(RunTimelinesHtml(run), "class=\"fold\""), 0u);
}

TEST(HtmlTimeline, SaysWhatWasLeftOut) {
  RunTimelines run = HostileRun();
  run.violations[0].elided = 17;
  run.violations_not_drawn = 4;
  run.overview.commits_elided = 5;
  const std::string html = RunTimelinesHtml(run);
  EXPECT_NE(html.find("17 more events"), std::string::npos);
  EXPECT_NE(html.find("4 further violations"), std::string::npos);
  EXPECT_NE(html.find("5 commits and 0 crashes after them are not drawn"), std::string::npos);
}

}  // namespace
}  // namespace weir
