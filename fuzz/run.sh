#!/usr/bin/env bash
# Runs every fuzz target of hodos's outside-input parsers for a fixed number
# of executions (default 1,000,000) or seconds, one after the other, and
# prints one line per target: executions, time, and whether it crashed.
# Needs the nightly toolchain and cargo-fuzz (`cargo install cargo-fuzz`).
#
#   fuzz/run.sh [RUNS] [MAX_SECONDS]
#
# Not run by CI (it takes minutes per target); results go to BENCHMARKS.md.
set -uo pipefail
cd "$(dirname "$0")"
RUNS="${1:-1000000}"
MAX_S="${2:-900}"
targets=(request_json query_string historical_table live_batch dimacs osm_tags artifact config_file model_file)
cargo +nightly fuzz build --release >/dev/null 2>&1 || { echo "fuzz build failed"; exit 1; }
for t in "${targets[@]}"; do
    mkdir -p "corpus/$t"
    start=$(date +%s)
    log="artifacts/$t.log"
    mkdir -p artifacts
    cargo +nightly fuzz run --release "$t" "corpus/$t" -- \
        -runs="$RUNS" -max_total_time="$MAX_S" -rss_limit_mb=2048 -print_final_stats=1 \
        >"$log" 2>&1
    rc=$?
    end=$(date +%s)
    execs=$(grep -E '^stat::number_of_executed_units' "$log" | awk '{print $2}')
    crash=$( [ $rc -eq 0 ] && echo "no crash" || echo "FAILED (rc $rc, see $log)")
    echo "$t: ${execs:-?} executions in $((end - start)) s, $crash"
done
