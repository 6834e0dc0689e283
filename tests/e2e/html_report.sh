#!/usr/bin/env bash
# html_report.sh (ctest, label e2e): weir explain --html.
#   - the page of a failing mutant run is well-formed (xmllint) and its SVG has
#     one overview marker per commit and per crash of the trace, counted from
#     the trace itself, and one timeline per failed invariant;
#   - the page opens in headless Chromium with no console message at all (it
#     has no script; a deliberately broken page shows the check can fail);
#   - a connector that writes <script>, quotes, & and invalid UTF-8 to stderr
#     and puts <script> in its argv gets all of it escaped: no script element
#     exists in the file nor in the DOM Chromium builds from it;
#   - a bad trace exits 2 and leaves no page behind.
# Usage: html_report.sh WEIR CONNECTOR_BIN_DIR SCENARIO_DIR
set -euo pipefail
weir="${1:?weir}"
bin="${2:?connector bin dir}"
scenarios="${3:?scenario dir}"
tmp="$(mktemp -d)"
trap 'rm -rf "$tmp"' EXIT
fail() { echo "FAIL: $*" >&2; exit 1; }
xpath() { xmllint --xpath "$1" "$2"; }

# Headless Chromium, flags as the machine notes say; prints the DOM, keeps the
# console log. Bounded by timeout.
chrome() {  # PAGE DOM_OUT LOG_OUT
  local profile
  profile="$(mktemp -d "$tmp/profile.XXXXXX")"
  timeout 90 chromium --headless --no-sandbox --disable-gpu --disable-quic --no-first-run \
    --disable-background-networking --disable-component-update --disable-sync \
    --user-data-dir="$profile" --enable-logging=stderr --v=0 --dump-dom "file://$1" >"$2" 2>"$3" ||
    { cat "$3" >&2; fail "chromium did not render $1"; }
}
# Console messages (errors, CSP refusals, warnings) are logged as CONSOLE(…) lines.
console_lines() { grep -E 'CONSOLE|Uncaught|Refused' "$1" || true; }

# 1. A failing run with crashes and commits.
rc=0
"$weir" run --scenario "$scenarios/crash_storm_weather_buoys.scenario" --seed 1 \
  --connector "$bin/mutant_no_dedup_in_checkpoint" --trace "$tmp/run.jsonl" >"$tmp/run.out" 2>&1 || rc=$?
[[ $rc == 1 ]] || { cat "$tmp/run.out" >&2; fail "expected a failing run (exit 1), got $rc"; }
"$weir" explain "$tmp/run.jsonl" --html "$tmp/run.html" >"$tmp/explain.out" 2>&1 ||
  { cat "$tmp/explain.out" >&2; fail "explain --html exited non-zero"; }
[[ -s "$tmp/run.html" ]] || fail "no page written"
bytes=$(wc -c <"$tmp/run.html")
xmllint --noout "$tmp/run.html" || fail "the page is not well-formed XML"
commits=$(grep -c '"committed":{' "$tmp/run.jsonl" || true)
crashes=$(grep -c '"crashed":{' "$tmp/run.jsonl" || true)
(( commits > 0 && crashes > 0 )) || fail "the run has $commits commits and $crashes crashes; want both"
got_commits=$(xpath "count(//*[local-name()='svg'][@class='overview']//*[local-name()='line'][@class='mark commit'])" "$tmp/run.html")
got_crashes=$(xpath "count(//*[local-name()='svg'][@class='overview']//*[local-name()='line'][@class='mark crash'])" "$tmp/run.html")
[[ $got_commits == "$commits" ]] || fail "overview has $got_commits commit markers; the trace has $commits commits"
[[ $got_crashes == "$crashes" ]] || fail "overview has $got_crashes crash markers; the trace has $crashes crashes"
# The commit markers name exactly the trace's committed events.
want_seqs=$(grep '"committed":{' "$tmp/run.jsonl" | sed 's/.*"seq":"\([0-9]*\)".*/\1/' | sort -n | tr '\n' ' ')
got_seqs=$(xpath "//*[local-name()='line'][@class='mark commit']/@data-seq" "$tmp/run.html" |
  sed 's/[^0-9 ]//g' | tr ' ' '\n' | grep . | sort -n | tr '\n' ' ')
[[ "$want_seqs" == "$got_seqs" ]] || fail "commit markers at events [$got_seqs], trace commits at [$want_seqs]"
# One timeline per failed invariant, each with a ringed proving event.
failed=$(grep -cE '^[a-z-]+ +FAILED' "$tmp/run.out" || true)
timelines=$(xpath "count(//*[local-name()='div'][@class='violation'])" "$tmp/run.html")
svgs=$(xpath "count(//*[local-name()='div'][@class='violation']//*[local-name()='svg'])" "$tmp/run.html")
(( failed > 0 )) || { cat "$tmp/run.out" >&2; fail "no FAILED row in the run's verdict table"; }
[[ $timelines == "$failed" && $svgs == "$failed" ]] ||
  fail "$timelines timelines ($svgs drawn) for $failed failed invariants"
rings=$(xpath "count(//*[local-name()='circle'][@class='ring'])" "$tmp/run.html")
(( rings > 0 )) || fail "no proving event is ringed"
lanes=$(xpath "count(//*[local-name()='text'][@class='lane-name'][.='broker' or .='connector' or .='runtime'])" "$tmp/run.html")
[[ $lanes == $((3 * failed)) ]] || fail "$lanes lane labels, want 3 per timeline"
echo "ok   page of a failing run: $bytes bytes, $commits commits and $crashes crashes marked, $timelines timelines"

# 2. Chromium opens it without console messages; a broken page is caught.
chrome "$tmp/run.html" "$tmp/run.dom" "$tmp/run.log"
grep -q '<svg class="overview"' "$tmp/run.dom" || fail "the DOM Chromium built has no overview SVG"
grep -q 'class="timeline"' "$tmp/run.dom" || fail "the DOM Chromium built has no timeline SVG"
msgs="$(console_lines "$tmp/run.log")"
[[ -z "$msgs" ]] || fail "console messages opening the page: $msgs"
sed 's|</body>|<script>console.error("broken page")</script></body>|' "$tmp/run.html" >"$tmp/broken.html"
chrome "$tmp/broken.html" "$tmp/broken.dom" "$tmp/broken.log"
[[ -n "$(console_lines "$tmp/broken.log")" ]] || fail "the console check missed a page with a script"
echo "ok   chromium renders the page without console messages (and flags a page with a script)"

# 3. Hostile connector output is escaped.
hostile='printf "<script>alert(\"stderr\")</script> \"quoted\" &amp; & \377\376 bytes\n" >&2; exit 3'
rc=0
"$weir" run --scenario "$scenarios/steady_parcel_scanners.scenario" --seed 1 --trace "$tmp/h.jsonl" \
  -- /bin/sh -c "$hostile" '<script>alert("argv")</script>' >"$tmp/h.out" 2>&1 || rc=$?
[[ $rc == 1 ]] || { cat "$tmp/h.out" >&2; fail "hostile connector: expected a failing run (exit 1), got $rc"; }
grep -q 'script' "$tmp/h.jsonl" || fail "the hostile text did not reach the trace"
"$weir" explain "$tmp/h.jsonl" --html "$tmp/h.html" >"$tmp/h.explain" 2>&1 ||
  { cat "$tmp/h.explain" >&2; fail "explain --html of the hostile run exited non-zero"; }
xmllint --noout "$tmp/h.html" || fail "hostile page is not well-formed XML"
[[ $(xpath "count(//*[local-name()='script'])" "$tmp/h.html") == 0 ]] || fail "a script element exists in the page"
grep -q '&lt;script&gt;alert(&quot;stderr&quot;)&lt;/script&gt;' "$tmp/h.html" || fail "stderr <script> not shown escaped"
grep -q '&lt;script&gt;alert(&quot;argv&quot;)&lt;/script&gt;' "$tmp/h.html" || fail "argv <script> not shown escaped"
grep -q '&amp;amp; &amp; ' "$tmp/h.html" || fail "& not escaped"
LC_ALL=C grep -q $'\xff' "$tmp/h.html" && fail "an invalid UTF-8 byte reached the page"
iconv -f UTF-8 -t UTF-8 "$tmp/h.html" >/dev/null || fail "the page is not valid UTF-8"
chrome "$tmp/h.html" "$tmp/h.dom" "$tmp/h.log"
grep -qi '<script' "$tmp/h.dom" && fail "Chromium's DOM of the hostile page holds a script element"
grep -q 'alert(' "$tmp/h.dom" || fail "the hostile text is missing from the DOM (escaped text expected)"
msgs="$(console_lines "$tmp/h.log")"
[[ -z "$msgs" ]] || fail "console messages opening the hostile page: $msgs"
echo "ok   connector text (<script>, quotes, &, invalid UTF-8) is escaped; no script element in the DOM"

# 4. A bad trace: exit 2, no page.
head -n 20 "$tmp/run.jsonl" >"$tmp/bad.jsonl"
rc=0
"$weir" explain "$tmp/bad.jsonl" --html "$tmp/bad.html" >"$tmp/bad.out" 2>&1 || rc=$?
[[ $rc == 2 ]] || fail "bad trace: exit $rc, expected 2"
[[ ! -e "$tmp/bad.html" && ! -e "$tmp/bad.html.partial" ]] || fail "a page was left behind for a bad trace"
echo "PASSED: explain --html"
