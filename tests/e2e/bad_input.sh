#!/usr/bin/env bash
# End-to-end: bad input files and bad flags. Every one must exit 2 with a
# message naming the file:line:column (or the flag) and what was expected, no
# crash, and no output file left behind (--trace, --save-plan, --json,
# --junit, --certificate). Files are under tests/e2e/bad_input/; the huge
# ones (50 MB) are made here.
# Usage: bad_input.sh WEIR REFERENCE_CONNECTOR BAD_INPUT_DIR SCENARIO_DIR
set -uo pipefail
WEIR=$1 REF=$2 BAD=$3 SCEN=$4
WORK=$(mktemp -d)
trap 'rm -rf "$WORK"' EXIT
source "$(dirname "${BASH_SOURCE[0]}")/lib.sh"
GOOD=$SCEN/steady_parcel_scanners.scenario
OUTS=("$WORK/out.jsonl" "$WORK/out.plan" "$WORK/out.json" "$WORK/out.xml" "$WORK/out.cert")
no_outputs() {
  for f in "${OUTS[@]}"; do
    if compgen -G "$f*" >/dev/null; then echo "     left behind: $f*"; return 1; fi
  done
  return 0
}

# bad NAME PATTERN -- COMMAND…: exit 2, PATTERN (extended regex) on stderr or
# stdout, no crash signature, no output file left.
bad() {
  local name=$1 pattern=$2; shift 3
  local out=$WORK/$name.out
  timeout 60 "$@" >"$out" 2>&1
  local rc=$?
  check "$name: exit 2 (got $rc)" test "$rc" -eq 2
  check "$name: says /$pattern/" grep -Eq -- "$pattern" "$out"
  check "$name: no output file left" no_outputs
  # The line for the issue note: what weir said.
  echo "     $name -> $(grep -v '^weir run: seed' "$out" | head -n 1 | cut -c1-220)"
}
# weir run and weir certify with every output flag; the input comes after.
RUN=("$WEIR" run --connector "$REF" --trace "$WORK/out.jsonl" --save-plan "$WORK/out.plan")
CERTIFY=("$WEIR" certify --connector "$REF"
  --json "$WORK/out.json" --junit "$WORK/out.xml" --certificate "$WORK/out.cert")

# Scenario files.
loc() { echo "$BAD/$1:[0-9]+:[0-9]+: .*$2"; }
bad scenario-empty "$(loc empty.scenario 'expected a workload')" -- "${RUN[@]}" --scenario "$BAD/empty.scenario"
bad scenario-truncated "$(loc truncated.scenario '')" -- "${RUN[@]}" --scenario "$BAD/truncated.scenario"
bad scenario-wrong-type "$BAD/wrong_type.scenario:2:[0-9]+: .*(integer|int)" -- "${RUN[@]}" --scenario "$BAD/wrong_type.scenario"
bad scenario-negative-rate "$BAD/negative_rate.scenario:6:3: .*unavailable_rate" -- "${RUN[@]}" --scenario "$BAD/negative_rate.scenario"
bad scenario-probability-above-1 "$BAD/probability_above_one.scenario:6:3: .*crash_rate" -- "${RUN[@]}" --scenario "$BAD/probability_above_one.scenario"
bad scenario-zero-messages "$BAD/zero_messages.scenario:2:3: workload.messages is 0; expected 1" -- "${RUN[@]}" --scenario "$BAD/zero_messages.scenario"
bad scenario-unknown-field "$BAD/unknown_field.scenario:4:[0-9]+: .*no field named \"colour\"" -- "${RUN[@]}" --scenario "$BAD/unknown_field.scenario"
bad scenario-negative-interval "$BAD/negative_interval.scenario:3:3: workload.publish_interval_ms is -5" -- "${RUN[@]}" --scenario "$BAD/negative_interval.scenario"
bad scenario-negative-timeout "$BAD/negative_interval.scenario:6:3: runtime.call_timeout_wall_ms is -1" -- "${RUN[@]}" --scenario "$BAD/negative_interval.scenario"
bad scenario-binary "$(loc binary.scenario '')" -- "${RUN[@]}" --scenario "$BAD/binary.scenario"
bad scenario-repeated-block "$(loc repeated_block.scenario 'workload')" -- "${RUN[@]}" --scenario "$BAD/repeated_block.scenario"
bad scenario-missing "$WORK/nope.scenario: cannot open file \(No such file" -- "${RUN[@]}" --scenario "$WORK/nope.scenario"
bad scenario-directory "$WORK: is a directory; expected a file" -- "${RUN[@]}" --scenario "$WORK"
head -c 50000000 /dev/zero | tr '\0' '#' >"$WORK/huge.scenario"
bad scenario-huge "$WORK/huge.scenario:1:1: file is 50000000 bytes; expected at most" -- "${RUN[@]}" --scenario "$WORK/huge.scenario"
bad lint-scenario "$BAD/zero_messages.scenario:2:3:" -- "$WEIR" lint "$BAD/zero_messages.scenario"
bad log-zero-partitions "$BAD/log_zero_partitions.scenario:3:3: log.partitions is 0; expected 1 ..1000" -- "${RUN[@]}" --scenario "$BAD/log_zero_partitions.scenario"
bad log-every-partition-idle "$BAD/log_every_partition_idle.scenario:4:3: .*names every partition" -- "${RUN[@]}" --scenario "$BAD/log_every_partition_idle.scenario"
bad readers-too-many "$BAD/readers_too_many.scenario:3:11: readers.count is 17; expected 1 ..16" -- "${RUN[@]}" --scenario "$BAD/readers_too_many.scenario"
bad readers-cut-on-queue "$BAD/readers_cut_on_queue.scenario:3:20: cuts and moves need spans" -- "${RUN[@]}" --scenario "$BAD/readers_cut_on_queue.scenario"
bad log-growth-without-count "$BAD/log_growth_without_count.scenario:4:3: log.growth\[0\].count is 0; expected at least 1" -- "${RUN[@]}" --scenario "$BAD/log_growth_without_count.scenario"

# Profile files.
bad profile-empty "$BAD/empty.profile:1:1: expected guarantee" -- "${RUN[@]}" --scenario "$GOOD" --profile "$BAD/empty.profile"
bad profile-unknown-enum "$BAD/unknown_enum.profile:[12]:[0-9]+: Unknown enumeration value of \"SOMETIMES\"" -- "${RUN[@]}" --scenario "$GOOD" --profile "$BAD/unknown_enum.profile"
bad profile-negative "$BAD/negative_lateness.profile:3:1: allowed_lateness_ms is -100" -- "${RUN[@]}" --scenario "$GOOD" --profile "$BAD/negative_lateness.profile"
bad profile-wrong-type "$BAD/wrong_type.profile:2:[0-9]+: .*(integer|int)" -- "${RUN[@]}" --scenario "$GOOD" --profile "$BAD/wrong_type.profile"

# Plan files.
bad plan-zero-position "$BAD/zero_position.plan:3:3: .*position of at least 1" -- "${RUN[@]}" --scenario "$GOOD" --plan "$BAD/zero_position.plan"
bad plan-log-site-mismatch "$BAD/log_site_mismatch.plan:2:[0-9]+: .*expected site SAVE_BOOKMARKS" -- "${RUN[@]}" --scenario "$GOOD" --plan "$BAD/log_site_mismatch.plan"
bad plan-negative-latency "$BAD/negative_latency.plan:4:3: .*latency_ms must be >= 0" -- "${RUN[@]}" --scenario "$GOOD" --plan "$BAD/negative_latency.plan"
bad plan-unknown-field "$BAD/unknown_field.plan:4:[0-9]+: .*no field named \"explode\"" -- "${RUN[@]}" --scenario "$GOOD" --plan "$BAD/unknown_field.plan"
bad plan-truncated "$(loc truncated.plan '')" -- "${RUN[@]}" --scenario "$GOOD" --plan "$BAD/truncated.plan"
bad lint-plan "$BAD/zero_position.plan:3:3:" -- "$WEIR" lint "$BAD/zero_position.plan"

# Suite files.
bad suite-empty "$BAD/empty.suite:1:1: expected at least one scenarios" -- "${CERTIFY[@]}" --suite "$BAD/empty.suite"
bad suite-zero-seeds "$BAD/zero_seeds.suite:3:1: seeds is 0; expected 1" -- "${CERTIFY[@]}" --suite "$BAD/zero_seeds.suite"
bad suite-missing-scenario "$BAD/missing_scenario.suite:4:3: scenario 'no_such.scenario' cannot be read" -- "${CERTIFY[@]}" --suite "$BAD/missing_scenario.suite"
bad suite-bad-member "zero_messages.scenario:2:3: workload.messages is 0" -- "${CERTIFY[@]}" --suite "$BAD/bad_member.suite"
bad suite-truncated "$(loc truncated.suite '')" -- "${CERTIFY[@]}" --suite "$BAD/truncated.suite"

# Trace files (replay and explain).
bad trace-empty "$BAD/empty.trace:1: empty file; expected a trace header" -- "$WEIR" explain "$BAD/empty.trace"
bad trace-truncated "$BAD/truncated.trace:1:[0-9]+: .*expected a trace header" -- "$WEIR" explain "$BAD/truncated.trace"
bad trace-wrong-type "$BAD/wrong_type.trace:1:[0-9]+: .*expected a trace header" -- "$WEIR" replay "$BAD/wrong_type.trace"
bad trace-garbage "$BAD/garbage.trace:1:[0-9]+: .*expected a trace header" -- "$WEIR" explain "$BAD/garbage.trace"
bad trace-missing "$WORK/nope.trace: cannot open" -- "$WEIR" explain "$WORK/nope.trace"
head -c 50000000 /dev/zero | tr '\0' 'x' >"$WORK/huge.trace"
bad trace-huge "$WORK/huge.trace:1: line longer than" -- "$WEIR" explain "$WORK/huge.trace"
# A real trace cut in the middle of its last line.
"$WEIR" run --scenario "$GOOD" --seed 1 --connector "$REF" --trace "$WORK/good.jsonl" >/dev/null 2>&1
head -c $(($(wc -c <"$WORK/good.jsonl") - 40)) "$WORK/good.jsonl" >"$WORK/cut.trace"
bad trace-cut "$WORK/cut.trace:[0-9]+: truncated" -- "$WEIR" explain "$WORK/cut.trace"
# A damaged event line: file:line:column of the damage (the column counted
# by hand in each line below, 1-based, bytes).
damaged() {  # damaged NAME LINE: the good trace with LINE as its 4th line
  { head -n 3 "$WORK/good.jsonl"; printf '%s\n' "$2"; tail -n +5 "$WORK/good.jsonl"; } >"$WORK/$1.trace"
}
damaged bad-token '{"event":{"seq":"2","kind":oops}}'
bad trace-bad-token "bad-token.trace:4:28: .*Unexpected token" -- "$WEIR" explain "$WORK/bad-token.trace"
damaged unknown-field '{"event":{"seq":"2","published":{"message_id":"1","nosuch":2}}}'
bad trace-unknown-field "unknown-field.trace:4:51: .*nosuch: Cannot find field" -- "$WEIR" explain "$WORK/unknown-field.trace"
damaged wrong-value '{"event":{"seq":"2","published":{"message_id":"abc"}}}'
bad trace-wrong-value "wrong-value.trace:4:34: .*invalid value" -- "$WEIR" explain "$WORK/wrong-value.trace"
damaged unclosed '{"event":{"seq":"2","published":{"message_id":"1"}}'
bad trace-unclosed "unclosed.trace:4:52: .*end of string" -- "$WEIR" replay "$WORK/unclosed.trace"
# NUL bytes are bytes of the line like any other: the decoder names the column
# (a line that began with one was read as empty and crashed the reader).
{ head -n 3 "$WORK/good.jsonl"; printf '\0{"seq":3}\n'; tail -n +5 "$WORK/good.jsonl"; } >"$WORK/nul-first.trace"
bad trace-nul-first "nul-first.trace:4:1: .*expected an event or the footer" -- "$WEIR" explain "$WORK/nul-first.trace"
{ head -n 3 "$WORK/good.jsonl"; printf '{"seq":\0 3}\n'; tail -n +5 "$WORK/good.jsonl"; } >"$WORK/nul-inside.trace"
bad trace-nul-inside "nul-inside.trace:4:8: .*expected an event or the footer" -- "$WEIR" explain "$WORK/nul-inside.trace"
rm -f "$WORK/good.jsonl"

# Flags.
bad flag-unknown "The following argument was not expected: --colour" -- "$WEIR" run --scenario "$GOOD" --colour red --connector "$REF"
bad flag-seed-not-a-number "--seed: 'twelve' is not a whole number" -- "${RUN[@]}" --scenario "$GOOD" --seed twelve
bad flag-seed-negative "--seed: '-4' is not a whole number" -- "${RUN[@]}" --scenario "$GOOD" --seed -4
bad flag-no-scenario "--scenario is required" -- "$WEIR" run --connector "$REF"
bad flag-no-connector "no connector command" -- "$WEIR" run --scenario "$GOOD" --trace "$WORK/out.jsonl"
bad flag-connector-missing "--connector: '/no/such/connector' is not an executable" -- "$WEIR" run --scenario "$GOOD" --connector /no/such/connector
bad flag-connector-quote "--connector column [0-9]+: unterminated '; expected a closing '" -- "$WEIR" run --scenario "$GOOD" --connector "$REF 'oops"
bad flag-transport "--transport is 'udp'; expected tcp or unix" -- "${RUN[@]}" --scenario "$GOOD" --transport udp
bad flag-trace-dir "--trace $WORK/no/such/dir/t.jsonl: directory '$WORK/no/such/dir' does not exist" -- \
  "$WEIR" run --scenario "$GOOD" --seed 1 --connector "$REF" --trace "$WORK/no/such/dir/t.jsonl"
bad flag-trace-is-dir "--trace $WORK: is a directory" -- "$WEIR" run --scenario "$GOOD" --seed 1 --connector "$REF" --trace "$WORK"
bad flag-jobs-zero "--jobs is 0; expected 1 \.\.1024" -- "${CERTIFY[@]}" --suite "$SCEN/../suites/quick.suite" --jobs 0
bad flag-jobs-negative "--jobs: '-3' is not a whole number" -- "${CERTIFY[@]}" --suite "$SCEN/../suites/quick.suite" --jobs -3
bad flag-jobs-word "--jobs: 'many' is not a whole number" -- "${CERTIFY[@]}" --suite "$SCEN/../suites/quick.suite" --jobs many
bad flag-shard-3-of-2 "--shard is '3/2'; expected I/N with 0 <= I < N" -- "${CERTIFY[@]}" --suite "$SCEN/../suites/quick.suite" --shard 3/2
bad flag-shard-garbage "--shard is 'x'; expected I/N" -- "${CERTIFY[@]}" --suite "$SCEN/../suites/quick.suite" --shard x
bad flag-shard-env "GTEST_TOTAL_SHARDS/GTEST_SHARD_INDEX are '2'/'5'" -- \
  env GTEST_TOTAL_SHARDS=2 GTEST_SHARD_INDEX=5 "$WEIR" certify --suite "$SCEN/../suites/quick.suite" --connector "$REF" --json "$WORK/out.json"
bad flag-max-failures "--max-failures: 'lots' is not a whole number" -- "${CERTIFY[@]}" --suite "$SCEN/../suites/quick.suite" --max-failures lots
bad flag-progress "--progress is 'loud'; expected auto, bar, lines or none" -- "${CERTIFY[@]}" --suite "$SCEN/../suites/quick.suite" --progress loud
bad flag-json-dir "--json $WORK/missing/r.json: directory '$WORK/missing' does not exist" -- \
  "$WEIR" certify --suite "$SCEN/../suites/quick.suite" --connector "$REF" --junit "$WORK/out.xml" --json "$WORK/missing/r.json"
# Every command checks every output path before any work starts.
bad flag-certify-html-dir "--html $WORK/missing/r.html: directory '$WORK/missing' does not exist" -- \
  "$WEIR" certify --suite "$SCEN/../suites/quick.suite" --connector "$REF" --html "$WORK/missing/r.html"
bad flag-merge-json-dir "--json $WORK/missing/m.json: directory '$WORK/missing' does not exist" -- \
  "$WEIR" merge /dev/null --json "$WORK/missing/m.json"
bad flag-explain-html-dir "--html $WORK/missing/e.html: directory '$WORK/missing' does not exist" -- \
  "$WEIR" explain /dev/null --html "$WORK/missing/e.html"
bad flag-search-html-dir "--html $WORK/missing/s.html: directory '$WORK/missing' does not exist" -- \
  "$WEIR" search --scenario "$GOOD" --connector "$REF" --out "$WORK/search" --html "$WORK/missing/s.html"
bad flag-shrink-out-dir "--out $WORK/missing/m.plan: directory '$WORK/missing' does not exist" -- \
  "$WEIR" shrink --scenario "$GOOD" --seed 1 --out "$WORK/missing/m.plan" -- "$REF"
# One parser for the connector and transport flags: every command says the same.
for cmd in certify search; do
  case $cmd in
    certify) args=(--suite "$SCEN/../suites/quick.suite") ;;
    search) args=(--scenario "$GOOD" --out "$WORK/search") ;;
  esac
  bad "flag-$cmd-transport" "--transport is 'udp'; expected tcp or unix" -- \
    "$WEIR" "$cmd" "${args[@]}" --connector "$REF" --transport udp
  bad "flag-$cmd-both-connectors" "give the connector either as --connector 'CMD ARGS' or after --, not both" -- \
    "$WEIR" "$cmd" "${args[@]}" --connector "$REF" -- "$REF"
  bad "flag-$cmd-connector-missing" "--connector: '/no/such/connector' is not an executable" -- \
    "$WEIR" "$cmd" "${args[@]}" --connector /no/such/connector
done
bad flag-replay-transport "--transport is 'udp'; expected tcp or unix" -- "$WEIR" replay /dev/null --transport udp
bad flag-shrink-transport "--transport is 'udp'; expected tcp or unix" -- \
  "$WEIR" shrink --scenario "$GOOD" --seed 1 --transport udp -- "$REF"
bad flag-no-subcommand "subcommand" -- "$WEIR"
bad flag-unknown-subcommand "frobnicate|subcommand" -- "$WEIR" frobnicate

if ((failures > 0)); then exit 1; fi
