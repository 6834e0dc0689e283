#!/usr/bin/env bash
# End-to-end: weir certify, verify, sharding by every convention, merge.
# Usage: certify.sh WEIR REFERENCE_CONNECTOR ACK_ON_PULL_MUTANT
set -uo pipefail
WEIR=$1 REF=$2 MUTANT=$3
HERE=$(cd "$(dirname "$0")" && pwd)
SUITE=$HERE/tiny.suite
XSD=$HERE/junit/strict-testsuite.xsd
WORK=$(mktemp -d)
trap 'rm -rf "$WORK"' EXIT
source "$(dirname "${BASH_SOURCE[0]}")/lib.sh"
certify() { "$WEIR" certify --suite "$SUITE" --progress lines --jobs 2 "$@"; }

# Certify keeps its runs in a run log under $TMPDIR (unlinked at once) and the
# first-failure traces in a private directory there: nothing may be left.
SPILL=$WORK/spill
mkdir -p "$SPILL"
nothing_left() { test -z "$(ls -A "$SPILL")"; }

# 1. The reference connector is certified; the certificate verifies.
TMPDIR=$SPILL certify --connector "$REF" --json "$WORK/ref.json" --junit "$WORK/ref.xml" --certificate "$WORK/ref.cert" >"$WORK/ref.out" 2>&1
rc=$?
check "certify leaves nothing in \$TMPDIR" nothing_left
# With --jobs 2 runs finish out of order; the report lists them in pair order.
check "the JSON report lists every pair once, in pair order" /usr/bin/python3 -c '
import json, sys
r = json.load(open(sys.argv[1]))
idx = [int(run["pair_index"]) for run in r["runs"]]
sys.exit(0 if idx == list(range(int(r["pairs_total"]))) and len(idx) > 2 else 1)' "$WORK/ref.json"
check "reference certify exits 0 (got $rc)" test $rc -eq 0
check "reference certify says CERTIFIED" grep -q '^CERTIFIED' "$WORK/ref.out"
check "summary lists every invariant" grep -q '^ack-before-commit' "$WORK/ref.out"
"$WEIR" verify "$WORK/ref.cert" --connector-binary "$REF" >"$WORK/v1.out" 2>&1
check "verify accepts the certified binary" test $? -eq 0
cp "$REF" "$WORK/modified-connector"; printf 'x' >>"$WORK/modified-connector"
"$WEIR" verify "$WORK/ref.cert" --connector-binary "$WORK/modified-connector" >"$WORK/v2.out" 2>&1
check "verify rejects a modified binary (exit 1)" test $? -eq 1
sed 's/"certified": true/"certified": false/' "$WORK/ref.cert" >"$WORK/edited.cert"
check "the edit changed the file" bash -c "! cmp -s '$WORK/ref.cert' '$WORK/edited.cert'"
"$WEIR" verify "$WORK/edited.cert" --connector-binary "$REF" >"$WORK/v3.out" 2>&1
check "verify rejects an edited certificate" test $? -eq 1
check "verify says the certificate was altered" grep -q 'altered' "$WORK/v3.out"

# 2. JUnit XML is valid against the strict schema (xmllint; schema in junit/).
check "reference JUnit is valid (strict schema)" xmllint --noout --schema "$XSD" "$WORK/ref.xml"
sed 's/ hostname="[^"]*"//' "$WORK/ref.xml" >"$WORK/nohost.xml"
check "the schema rejects a testsuite without hostname" bash -c "! xmllint --noout --schema '$XSD' '$WORK/nohost.xml' 2>/dev/null"

# 3. A broken connector fails: exit 1, a JUnit file CI shows red, not certified.
certify --connector "$MUTANT" --junit "$WORK/mut.xml" --certificate "$WORK/mut.cert" >"$WORK/mut.out" 2>&1
rc=$?
check "mutant certify exits 1 (got $rc)" test $rc -eq 1
check "mutant JUnit is valid (strict schema)" xmllint --noout --schema "$XSD" "$WORK/mut.xml"
check "mutant JUnit has failures" grep -q '<failure type="ack-before-commit' "$WORK/mut.xml"
check "mutant summary names the first failing replay" grep -q 'replay: [^ ]*weir run --scenario' "$WORK/mut.out"
"$WEIR" verify "$WORK/mut.cert" --connector-binary "$MUTANT" >"$WORK/v4.out" 2>&1
check "verify refuses an uncertified build" test $? -eq 1

# 4. --max-failures stops early and marks the report incomplete.
certify --connector "$MUTANT" --max-failures 1 --jobs 1 --json "$WORK/early.json" >"$WORK/early.out" 2>&1
check "max-failures run exits 1" test $? -eq 1
check "max-failures report is incomplete" grep -q '"complete": false' "$WORK/early.json"

# 5. Sharding 3 ways by each convention, then merge: the same certificate as
#    the unsharded run (certificates carry no times).
shard_run() {  # shard_run NAME ENV... -- extra args
  local name=$1; shift
  for i in 0 1 2; do
    env "$@" $(echo "$EXTRA_ENV" | sed "s/@I@/$i/g") "$WEIR" certify --suite "$SUITE" --progress none --jobs 2 \
      --connector "$REF" --json "$WORK/$name-$i.json" $EXTRA_ARGS >/dev/null 2>&1
  done
  "$WEIR" merge "$WORK/$name-0.json" "$WORK/$name-1.json" "$WORK/$name-2.json" \
    --certificate "$WORK/$name.cert" --junit "$WORK/$name.xml" >"$WORK/$name-merge.out" 2>&1
  check "$name: merge exits 0" test $? -eq 0
  check "$name: merged certificate equals the unsharded one" cmp -s "$WORK/$name.cert" "$WORK/ref.cert"
  check "$name: merged JUnit is valid" xmllint --noout --schema "$XSD" "$WORK/$name.xml"
}
EXTRA_ENV="GTEST_TOTAL_SHARDS=3 GTEST_SHARD_INDEX=@I@ GTEST_SHARD_STATUS_FILE=$WORK/gtest-status" EXTRA_ARGS="" shard_run gtest
check "gtest: the shard status file was touched" test -e "$WORK/gtest-status"
EXTRA_ENV="TEST_TOTAL_SHARDS=3 TEST_SHARD_INDEX=@I@ TEST_SHARD_STATUS_FILE=$WORK/test-status" EXTRA_ARGS="" shard_run bazel
check "bazel: the shard status file was touched" test -e "$WORK/test-status"
EXTRA_ENV="JOB_COMPLETION_INDEX=@I@" EXTRA_ARGS="--shard-count 3" shard_run indexed
EXTRA_ENV="WEIR_UNUSED=@I@" EXTRA_ARGS="" 
for i in 0 1 2; do "$WEIR" certify --suite "$SUITE" --progress none --jobs 2 --connector "$REF" --shard "$i/3" --json "$WORK/flag-$i.json" >/dev/null 2>&1; done
TMPDIR=$SPILL "$WEIR" merge "$WORK/flag-0.json" "$WORK/flag-1.json" "$WORK/flag-2.json" --certificate "$WORK/flag.cert" \
  --json "$WORK/flag.json" >/dev/null 2>&1
check "--shard: merged certificate equals the unsharded one" cmp -s "$WORK/flag.cert" "$WORK/ref.cert"
check "merge leaves nothing in \$TMPDIR" nothing_left
check "--shard: merged JSON report equals the unsharded one but for wall times" \
  cmp -s <(grep -v '"wall_seconds"' "$WORK/flag.json") <(grep -v '"wall_seconds"' "$WORK/ref.json")
"$WEIR" merge "$WORK/flag-0.json" "$WORK/flag-1.json" --certificate "$WORK/partial.cert" >/dev/null 2>&1
check "merging 2 of 3 shards is not certified (exit 1)" test $? -eq 1

# 6. Usage errors exit 2.
"$WEIR" certify --suite "$SUITE" --connector "$REF" --shard 3/3 >/dev/null 2>&1
check "--shard 3/3 exits 2" test $? -eq 2
printf 'name: "x"\nseeds: 0\n' >"$WORK/bad.suite"
"$WEIR" certify --suite "$WORK/bad.suite" --connector "$REF" >"$WORK/bad.out" 2>&1
check "bad suite exits 2" test $? -eq 2
check "bad suite error names file:line" grep -q 'bad.suite:' "$WORK/bad.out"

# 7. The HTML report: summary plus one timeline per failed invariant,
#    escaped (the connector's path holds <script>, & and quotes), well-formed,
#    and it opens in headless Chromium without console messages.
HOSTILE="$WORK/mut<script>alert(1)<!--&\"x\""
cp "$MUTANT" "$HOSTILE"
TMPDIR=$SPILL "$WEIR" certify --suite "$SUITE" --progress none --jobs 2 --json "$WORK/h.json" --html "$WORK/h.html" \
  -- "$HOSTILE" >"$WORK/h.out" 2>&1
check "hostile-named mutant certify --html exits 1" test $? -eq 1
check "certify --html leaves nothing in \$TMPDIR" nothing_left
check "the HTML report is well-formed" xmllint --noout "$WORK/h.html"
check "no script element in the report" test "$(xmllint --xpath "count(//*[local-name()='script'])" "$WORK/h.html" 2>/dev/null)" = 0
check "the connector path is shown escaped" grep -q 'mut&lt;script&gt;alert(1)&lt;!--&amp;&quot;x&quot;' "$WORK/h.html"
failed_invariants=$(/usr/bin/python3 -c 'import json,sys; r=json.load(open(sys.argv[1])); print(sum(1 for i in r["invariants"] if int(i["runs_failed"]) > 0))' "$WORK/h.json")
timelines=$(xmllint --xpath "count(//*[local-name()='section'][@class='run'])" "$WORK/h.html" 2>/dev/null)
drawn=$(xmllint --xpath "count(//*[local-name()='section'][@class='run']//*[local-name()='svg'][@class='timeline'])" "$WORK/h.html" 2>/dev/null)
check "one timeline per failed invariant ($timelines sections, $drawn drawn, $failed_invariants failed)" \
  test "$failed_invariants" -gt 0 -a "$timelines" = "$failed_invariants" -a "$drawn" = "$failed_invariants"
rows=$(xmllint --xpath "count(//*[local-name()='table'][@class='invariants']//*[local-name()='td'][@class='failed'])" "$WORK/h.html" 2>/dev/null)
check "the summary table marks $failed_invariants failed invariants ($rows)" test "$rows" = "$failed_invariants"
check "the summary carries the replay line" grep -q '<code>[^ <]*weir run --scenario' "$WORK/h.html"
profile=$(mktemp -d "$WORK/chrome.XXXXXX")
timeout 90 chromium --headless --no-sandbox --disable-gpu --disable-quic --no-first-run \
  --disable-background-networking --disable-component-update --disable-sync --user-data-dir="$profile" \
  --enable-logging=stderr --v=0 --dump-dom "file://$WORK/h.html" >"$WORK/h.dom" 2>"$WORK/h.chrome"
check "chromium renders the report" grep -q 'class="timeline"' "$WORK/h.dom"
check "no script element in Chromium's DOM" bash -c "! grep -qi '<script' '$WORK/h.dom'"
check "no console messages" bash -c "! grep -Eq 'CONSOLE|Uncaught|Refused' '$WORK/h.chrome'"
"$WEIR" merge "$WORK/flag-0.json" "$WORK/flag-1.json" "$WORK/flag-2.json" --html "$WORK/merged.html" >/dev/null 2>&1
check "merge --html writes a well-formed summary" xmllint --noout "$WORK/merged.html"
check "the merged summary says CERTIFIED" grep -q 'CERTIFIED' "$WORK/merged.html"

if ((failures > 0)); then echo "--- reference output"; cat "$WORK/ref.out"; exit 1; fi
