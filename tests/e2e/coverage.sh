#!/usr/bin/env bash
# End-to-end: coverage. A rule that had no chance to fail reads "not
# exercised" in every report (summary, JSON, JUnit, HTML, certificate, verify),
# --require-coverage refuses such a suite (exit 5), and a connector that
# ignores retry-after is CERTIFIED by a suite that never throttles (coverage
# names the gap) but refused by one that does. Every bundled scenario that
# weir names as one that "would exercise" a rule gives that rule chances.
# --profile judges every scenario by the connector's claimed profile and the
# reports and the certificate say so.
# Usage: coverage.sh WEIR REFERENCE LOG_REFERENCE IGNORE_RETRY_AFTER_MUTANT SOURCE_DIR
set -uo pipefail
WEIR=$1 REF=$2 LOG_REF=$3 MUTANT=$4 SRC=$5
HERE=$(cd "$(dirname "$0")" && pwd)
source "$HERE/lib.sh"
WORK=$(mktemp -d)
trap 'rm -rf "$WORK"' EXIT
QUIET=$HERE/coverage_quiet.suite
THROTTLED=$HERE/coverage_throttled.suite
certify() { "$WEIR" certify --progress none --jobs 2 "$@"; }

# 1. A suite that never throttles: CERTIFIED, but throttle-violation is named
#    "not exercised" everywhere.
certify --suite "$QUIET" --connector "$REF" --json "$WORK/q.json" --junit "$WORK/q.xml" \
  --certificate "$WORK/q.cert" --html "$WORK/q.html" >"$WORK/q.out" 2>&1
rc=$?
check "quiet suite: exit 0 (got $rc)" test $rc -eq 0
check "quiet suite: CERTIFIED, with the gap named" grep -q '^CERTIFIED.*cannot vouch for' "$WORK/q.out"
check "summary: throttle-violation not exercised" grep -qE '^throttle-violation +not exercised' "$WORK/q.out"
check "summary: step-timeout held with chances" grep -qE '^step-timeout +held +[0-9]+ +0 +[1-9][0-9]*' "$WORK/q.out"
check "summary: says what would exercise throttle-violation" \
  grep -q 'would exercise it: .*throttle_storm_toll_gantries' "$WORK/q.out"
check "JSON: throttle-violation judged in 2 runs, exercised in none" /usr/bin/python3 -c '
import json, sys
r = json.load(open(sys.argv[1]))
row = [i for i in r["invariants"] if i["invariant"] == "throttle-violation"][0]
runs = r["runs"]
ok = int(row["runs_judged"]) == 2 and int(row["runs_exercised"]) == 0 and int(row["chances"]) == 0
ok = ok and all(any(c["name"] == "step-timeout" and int(c["count"]) > 0 for c in run["chances"]) for run in runs)
sys.exit(0 if ok else 1)' "$WORK/q.json"
check "JUnit: not_exercised property names throttle-violation" \
  grep -qE '<property name="not_exercised" value="[^"]*throttle-violation' "$WORK/q.xml"
check "JUnit: coverage property per judged rule" grep -q '<property name="coverage.step-timeout" value="held; ' "$WORK/q.xml"
check "HTML: not exercised in the verdict column" grep -q 'class="verdict unexercised">not exercised<' "$WORK/q.html"
check "certificate lists throttle-violation as not exercised" /usr/bin/python3 -c '
import json, sys
c = json.load(open(sys.argv[1]))
sys.exit(0 if "throttle-violation" in c["not_exercised"] and c["certified"] else 1)' "$WORK/q.cert"
"$WEIR" verify "$WORK/q.cert" --connector-binary "$REF" >"$WORK/v.out" 2>&1
check "verify: VERIFIED and names what was not exercised" \
  bash -c "grep -q '^VERIFIED' '$WORK/v.out' && grep -q '^not exercised.*throttle-violation' '$WORK/v.out'"
# The not-exercised list is under the seal.
/usr/bin/python3 -c '
import json, sys
c = json.load(open(sys.argv[1])); c["not_exercised"] = []
json.dump(c, open(sys.argv[2], "w"), indent=1)' "$WORK/q.cert" "$WORK/edited.cert"
"$WEIR" verify "$WORK/edited.cert" --connector-binary "$REF" >"$WORK/v2.out" 2>&1
check "verify rejects a certificate whose not-exercised list was emptied" test $? -ne 0

# 2. --require-coverage turns the gap into a refusal.
certify --suite "$QUIET" --connector "$REF" --require-coverage --certificate "$WORK/rq.cert" >"$WORK/rq.out" 2>&1
rc=$?
check "--require-coverage: exit 5 (got $rc)" test $rc -eq 5
check "--require-coverage: NOT CERTIFIED" grep -q '^NOT CERTIFIED (--require-coverage)' "$WORK/rq.out"
check "--require-coverage: the certificate says not certified, and why" /usr/bin/python3 -c '
import json, sys
c = json.load(open(sys.argv[1]))
sys.exit(0 if not c["certified"] and c["coverage_required"] and "throttle-violation" in c["not_exercised"] else 1)' "$WORK/rq.cert"
"$WEIR" verify "$WORK/rq.cert" --connector-binary "$REF" >"$WORK/rqv.out" 2>&1
check "--require-coverage: verify refuses that certificate (exit 1)" test $? -eq 1

# 3. Why it matters: a connector that ignores retry-after passes the quiet
#    suite — with the gap named — and fails the suite that throttles.
certify --suite "$QUIET" --connector "$MUTANT" >"$WORK/mq.out" 2>&1
rc=$?
check "ignore-retry-after mutant: the quiet suite cannot catch it (exit $rc)" test $rc -eq 0
check "…and coverage names the gap" grep -qE '^throttle-violation +not exercised' "$WORK/mq.out"
certify --suite "$QUIET" --connector "$MUTANT" --require-coverage >/dev/null 2>&1
check "…and --require-coverage refuses that certificate" test $? -eq 5
certify --suite "$THROTTLED" --connector "$MUTANT" >"$WORK/mt.out" 2>&1
rc=$?
check "ignore-retry-after mutant: refused by the throttling suite (exit $rc)" test $rc -eq 1
check "…with throttle-violation FAILED" grep -qE '^throttle-violation +FAILED' "$WORK/mt.out"
certify --suite "$THROTTLED" --connector "$REF" >"$WORK/rt.out" 2>&1
check "reference on the throttling suite: throttle-violation held with chances" \
  grep -qE '^throttle-violation +held +1 +0 +[1-9]' "$WORK/rt.out"

# 4. --profile: every scenario judged by the connector's claim.
certify --suite "$QUIET" --connector "$REF" --profile "$SRC/fixtures/profiles/event_time_strict.profile" \
  --json "$WORK/p.json" --junit "$WORK/p.xml" --certificate "$WORK/p.cert" >"$WORK/p.out" 2>&1
rc=$?
check "--profile: exit 0 (got $rc)" test $rc -eq 0
check "--profile: the summary says so" grep -q '^profile .*event_time_strict.profile (--profile, applied to every scenario)' "$WORK/p.out"
check "--profile: late-record now judged" grep -qE '^late-record +(held|not exercised)' "$WORK/p.out"
check "--profile: replay lines carry it" /usr/bin/python3 -c '
import json, sys
r = json.load(open(sys.argv[1]))
sys.exit(0 if r["profile"].endswith("event_time_strict.profile") and all("--profile" in x["replay"] for x in r["runs"]) else 1)' "$WORK/p.json"
check "--profile: JUnit records it" grep -q '<property name="profile" value="[^"]*event_time_strict.profile"' "$WORK/p.xml"
want_sha=$(sha256sum "$SRC/fixtures/profiles/event_time_strict.profile" | cut -d' ' -f1)
check "--profile: the certificate records the profile and its sha256" /usr/bin/python3 -c '
import json, sys
c = json.load(open(sys.argv[1]))
sys.exit(0 if c["profile"].endswith("event_time_strict.profile") and c["profile_sha256"] == "sha256:" + sys.argv[2] else 1)' "$WORK/p.cert" "$want_sha"
certify --suite "$QUIET" --connector "$REF" --profile "$WORK/missing.profile" >"$WORK/pm.out" 2>&1
check "--profile: a missing file is a usage error (exit 2)" test $? -eq 2

# 5. Every "would exercise it" claim holds: the scenario gives the rule chances
#    with the bundled reference (seed 1, else 2). Lines: scenario connector
#    profile-or-- rules…
S=$SRC/fixtures/scenarios
while read -r scen conn prof rules; do
  [[ -z $scen || $scen == \#* ]] && continue
  connector=$REF; [[ $conn == log ]] && connector=$LOG_REF
  pflag=(); [[ $prof != - ]] && pflag=(--profile "$SRC/fixtures/profiles/$prof")
  for rule in $rules; do
    ok=0
    for seed in 1 2; do
      out=$WORK/hint.$scen.$seed.out
      [[ -f $out ]] || "$WEIR" run --scenario "$S/$scen.scenario" --seed "$seed" "${pflag[@]}" --connector "$connector" >"$out" 2>&1
      if grep -qE "^$rule +held +[1-9]" "$out"; then ok=1; break; fi
    done
    check "$scen gives $rule chances (as certify's hint says)" test $ok -eq 1
  done
done <<'LIST'
crash_storm_weather_buoys queue - ack-before-commit lost-message watermark-regression bad-checkpoint duplicate-output
commit_failures_cold_chain queue - ack-before-commit lost-message
heavy_redelivery_bike_docks queue - duplicate-output
idle_watermark_beehive_scales queue - watermark-stall
idle_delayed_pings_avalanche_beacons queue - late-record watermark-stall
steady_parcel_scanners queue - step-timeout unexpected-exit protocol-error connector-error livelock watermark-ahead
throttle_storm_toll_gantries queue - throttle-violation
flaky_network_vineyard_probes queue - retry-storm
log_idle_partitions_snow_pillows log - watermark-stall
log_hot_partition_rail_axle_counters log - late-record
log_partition_outage_lighthouse_beacons log - retry-storm
log_bookmark_crash_storm_seismographs log - offset-gap resume-exact
log_steady_river_gauges log - position-before-commit
log_retention_race_pollen_traps log - silent-skip
log_partition_growth_wind_turbines log - new-partition
readers_frequent_cuts_seismographs log - record-outside-span cut-conservation
readers_hot_rebalance_wind_farms log - double-holding checkpoint-coverage
LIST
exit $((failures > 0))
