#!/usr/bin/env bash
# replay_explain.sh (ctest, label e2e): weir replay and weir explain.
#   - replaying a failing run of every mutant reproduces it identically (same
#     digest as the run printed);
#   - the wall-clock mutant is reported as nondeterministic (exit 1) at a
#     stepped event whose resume time differs;
#   - explain names the violation and marks its proving events; a passing
#     trace says "no violations";
#   - bad trace files exit 2 naming file:line.
# Usage: replay_explain.sh WEIR CONNECTOR_BIN_DIR SCENARIO_DIR
set -euo pipefail
weir="${1:?weir}"
bin="${2:?connector bin dir}"
scenarios="${3:?scenario dir}"
tmp="$(mktemp -d)"
trap 'rm -rf "$tmp"' EXIT
fail() { echo "FAIL: $*" >&2; exit 1; }

# A failing run of every mutant (the detection matrix's first detection, or
# another failing pair), then its replay. The wall-clock mutant is below.
runs=(
  "mutant_ack_on_pull steady_parcel_scanners 1 ack-before-commit"
  "mutant_ack_on_checkpoint broker_restart_greenhouse 1 ack-before-commit"
  "mutant_drop_batch_on_error flaky_acks_orchard_sensors 2 lost-message"
  "mutant_exit_on_transient_error flaky_acks_orchard_sensors 1 unexpected-exit"
  "mutant_ignore_retry_after throttle_storm_toll_gantries 1 throttle-violation"
  "mutant_latest_event_time_watermark broker_restart_greenhouse 1 watermark-regression"
  "mutant_no_dedup_in_checkpoint crash_storm_weather_buoys 1 duplicate-output"
  "mutant_no_idle_watermark idle_watermark_beehive_scales 1 watermark-stall"
  "mutant_idle_watermark_to_now idle_delayed_pings_avalanche_beacons 1 late-record"
  "mutant_deep_forget_on_failed_ack rare_mixes_relay_huts 9 duplicate-output"
  "mutant_deep_retry_at_once_after_throttle rare_mixes_relay_huts 15 retry-storm"
  "mutant_no_redelivery_dedup heavy_redelivery_bike_docks 1 duplicate-output"
  "mutant_no_watermark_restore commit_failures_cold_chain 1 watermark-regression"
  "mutant_receipt_as_message_id broker_restart_greenhouse 1 protocol-error"
  "mutant_tight_retry_loop flaky_acks_orchard_sensors 1 retry-storm"
  "mutant_log_bookmark_on_read log_bookmark_crash_storm_seismographs 1 position-before-commit"
  "mutant_log_fastest_partition_watermark log_hot_partition_rail_axle_counters 1 late-record"
  "mutant_log_global_resume_point log_bookmark_crash_storm_seismographs 1 offset-gap"
  "mutant_log_idle_partition_stalls log_idle_partitions_snow_pillows 1 watermark-stall"
  "mutant_log_ignore_new_partitions log_partition_growth_wind_turbines 1 new-partition"
  "mutant_log_resume_after_checkpoint log_bookmark_crash_storm_seismographs 1 resume-exact"
  "mutant_log_resume_before_checkpoint log_bookmark_crash_storm_seismographs 1 resume-exact"
  "mutant_log_silent_skip log_retention_race_pollen_traps 1 silent-skip"
  "mutant_readers_checkpoint_forgets_assigned readers_frequent_cuts_seismographs 1 checkpoint-coverage"
  "mutant_readers_cut_drops_first readers_frequent_cuts_seismographs 1 cut-conservation"
  "mutant_readers_cut_overlap readers_frequent_cuts_seismographs 1 cut-conservation"
  "mutant_readers_keeps_revoked readers_hot_rebalance_wind_farms 1 record-outside-span"
  "mutant_readers_tail_emit readers_frequent_cuts_seismographs 1 record-outside-span"
  "mutant_readers_trusts_restored_state readers_frequent_cuts_seismographs 1 record-outside-span"
)
# Every mutant of the zoo but the wall-clock one is in the list.
for f in "$bin"/mutant_*; do
  m="$(basename "$f")"
  [[ -x "$f" && "$m" != mutant_wall_clock ]] || continue
  # A here-string, not a pipe: under pipefail, grep -q leaving early would
  # fail the pipeline with printf's SIGPIPE.
  grep -q "^$m " <<<"$(printf '%s\n' "${runs[@]}")" || fail "$m has no failing run in this test"
done
for r in "${runs[@]}"; do
  read -r m s n inv <<<"$r"
  rc=0
  "$weir" run --scenario "$scenarios/$s.scenario" --seed "$n" --connector "$bin/$m" \
    --trace "$tmp/$m.jsonl" >"$tmp/$m.run" 2>&1 || rc=$?
  [[ $rc == 1 ]] || fail "$m on $s seed $n: expected a failing run (exit 1), got $rc"
  digest="$(sed -n 's/^digest *//p' "$tmp/$m.run")"
  rc=0
  "$weir" replay "$tmp/$m.jsonl" >"$tmp/$m.replay" 2>&1 || rc=$?
  [[ $rc == 0 ]] || { cat "$tmp/$m.replay" >&2; fail "replay of $m: exit $rc, expected 0"; }
  grep -q "reproduced identically (digest $digest," "$tmp/$m.replay" ||
    { cat "$tmp/$m.replay" >&2; fail "replay of $m: no 'reproduced identically' with $digest"; }

  # explain: names the violation, marks proving events, exits 0.
  "$weir" explain "$tmp/$m.jsonl" >"$tmp/$m.explain" 2>&1 ||
    { cat "$tmp/$m.explain" >&2; fail "explain of $m exited non-zero"; }
  grep -q "^violation [0-9]* of [0-9]*: $inv: " "$tmp/$m.explain" ||
    { cat "$tmp/$m.explain" >&2; fail "explain of $m does not name $inv"; }
  grep -Eq '^    => #[0-9]+ ' "$tmp/$m.explain" || fail "explain of $m marks no proving event"
  grep -Eq '^  (reader [0-9]+, )?incarnation [0-9]' "$tmp/$m.explain" || fail "explain of $m shows no incarnation"
  if [[ "$m" == mutant_readers_* ]]; then
    # Several readers: events by reader, and what each held when it went wrong.
    grep -Eq '^  reader [0-9]+, incarnation [0-9]' "$tmp/$m.explain" || fail "explain of $m names no reader"
    grep -q '^    spans held then:' "$tmp/$m.explain" || fail "explain of $m shows no spans held"
  fi
  echo "ok   $m: replay identical ($digest), explain names $inv"
done

# The wall-clock mutant: passes the oracle, but replay diverges at a stepped event.
"$weir" run --scenario "$scenarios/steady_parcel_scanners.scenario" --seed 3 \
  --connector "$bin/mutant_wall_clock" --trace "$tmp/wc.jsonl" >"$tmp/wc.run" 2>&1 ||
  { cat "$tmp/wc.run" >&2; fail "wall-clock mutant run failed"; }
rc=0
"$weir" replay "$tmp/wc.jsonl" >"$tmp/wc.replay" 2>&1 || rc=$?
cat "$tmp/wc.replay"
[[ $rc == 1 ]] || fail "replay of the wall-clock mutant: exit $rc, expected 1"
k="$(sed -n 's/^weir replay: diverged at event #\([0-9]*\): .*/\1/p' "$tmp/wc.replay")"
[[ -n "$k" ]] || fail "no 'diverged at event #' line"
grep -q "the connector is nondeterministic" "$tmp/wc.replay" || fail "not named nondeterministic"
# The right event: the first event whose content depends on the wall clock is
# the first where the mutant's saved trace differs from the reference
# connector's trace of the same scenario and seed (the mutant is the reference
# plus the wall-clock jitter).
expected_line="$(sed -n 's/^  expected: //p' "$tmp/wc.replay")"
got_line="$(sed -n 's/^  got:      //p' "$tmp/wc.replay")"
[[ "$expected_line" == *'"stepped"'* && "$got_line" == *'"stepped"'* ]] ||
  fail "divergence is not at a stepped event"
[[ "$expected_line" == *"\"seq\":\"$k\""* ]] || fail "expected line is not event #$k"
"$weir" run --scenario "$scenarios/steady_parcel_scanners.scenario" --seed 3 \
  --connector "$bin/reference_connector" --trace "$tmp/ref.jsonl" >/dev/null 2>&1 ||
  fail "reference run failed"
want="$(paste -d '\n' <(tail -n +2 "$tmp/wc.jsonl") <(tail -n +2 "$tmp/ref.jsonl") |
  awk 'NR % 2 == 1 { a = $0; next } a != $0 && d == "" { d = (NR / 2) - 1 } END { print d }')"
[[ "$want" == "$k" ]] || fail "diverged at #$k, but the first wall-clock-dependent event is #$want"
"$weir" explain "$tmp/wc.jsonl" >"$tmp/wc.explain" 2>&1 || fail "explain of a passing trace exited non-zero"
grep -q '^no violations' "$tmp/wc.explain" || fail "explain of a passing trace: no 'no violations'"
echo "ok   mutant_wall_clock: nondeterministic at event #$k"

# Bad trace files: exit 2 with file:line.
good="$tmp/mutant_ack_on_pull.jsonl"
: >"$tmp/empty.jsonl"
head -c 3000 "$good" >"$tmp/truncated.jsonl"
head -n 50 "$good" >"$tmp/no_footer.jsonl"
echo 'not json' >"$tmp/not_json.jsonl"
tail -n +2 "$good" >"$tmp/no_header.jsonl"
sed '3s/"incarnation":"1"/"incarnation":"2"/' "$good" >"$tmp/bad_digest.jsonl"
cmp -s "$good" "$tmp/bad_digest.jsonl" && fail "could not alter the trace"
check_bad() {  # FILE LINE TEXT
  for cmd in replay explain; do
    rc=0
    "$weir" "$cmd" "$tmp/$1" >"$tmp/out" 2>&1 || rc=$?
    [[ $rc == 2 ]] || { cat "$tmp/out" >&2; fail "$cmd $1: exit $rc, expected 2"; }
    grep -q "$tmp/$1:$2: .*$3" "$tmp/out" || { cat "$tmp/out" >&2; fail "$cmd $1: no '$1:$2: …$3'"; }
  done
  echo "ok   $1 -> $(head -n 1 "$tmp/out")"
}
check_bad empty.jsonl 1 "empty file"
check_bad truncated.jsonl "[0-9]*" "truncated"
check_bad no_footer.jsonl 51 "expected more events or the trace footer"
check_bad not_json.jsonl 1:1 "not a trace line"
check_bad no_header.jsonl 1 "expected a trace header"
check_bad bad_digest.jsonl "[0-9]*" "does not match the event lines"
echo "PASSED: replay and explain"
