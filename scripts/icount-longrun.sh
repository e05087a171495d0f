#!/usr/bin/env bash
# Exact host instruction counts per simulated step of the long-record benchmark
# (host-sim/examples/longrun.rs, see host-sim/BENCH.md) under valgrind callgrind: the whole
# `sim::run` (plant, sensor models, gauge, backlash, bookkeeping, and for `controller` the
# controller stepped every minute) counted with --toggle-collect, divided by the 1-minute
# steps simulated. Repeatable run to run (same binary, same record).
#
#   scripts/icount-longrun.sh [DWD_CSV] [YEARS]     # default: the shared DWD file, 1 year
set -euo pipefail
cd "$(dirname "$0")/.."
csv=${1:-../shared/data/rain/dwd_01684_goerlitz_5min_1991-2020.csv}
years=${2:-1}
cargo build --release -p holdback-sim --example longrun >/dev/null 2>&1
bin=target/release/examples/longrun
out=$(mktemp -d)
printf '%-12s %16s %12s %14s\n' policy instructions steps per_step
for policy in fixed controller; do
    LONGRUN_POLICY=$policy valgrind --tool=callgrind --callgrind-out-file="$out/$policy.out" \
        --toggle-collect='*sim::run*' "$bin" "$csv" "$years" >"$out/$policy.txt" 2>"$out/$policy.log"
    n=$(awk '/^summary:/{print $2}' "$out/$policy.out")
    steps=$(sed -n 's/.*(\([0-9]*\) steps).*/\1/p' "$out/$policy.txt")
    printf '%-12s %16s %12s %14.0f\n' "$policy" "$n" "$steps" "$(python3 -c "print($n / $steps)")"
done
rm -rf "$out"
