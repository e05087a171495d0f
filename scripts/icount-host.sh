#!/usr/bin/env bash
# Exact host instruction counts of the forecast kernels (tests/benches/forecast.rs) under
# valgrind callgrind: one call of each `kernel_*`, counted with --toggle-collect, so the count
# includes everything the kernel calls and nothing else. Repeatable run to run.
#
#   scripts/icount-host.sh            # builds the bench binary (release profile) and counts
set -euo pipefail
cd "$(dirname "$0")/.."

bin=$(cargo bench -p holdback-tests --bench forecast --no-run --message-format=json 2>/dev/null |
    python3 -c 'import json,sys
for l in sys.stdin:
    m = json.loads(l)
    if m.get("reason") == "compiler-artifact" and m["target"]["name"] == "forecast" and m.get("executable"):
        print(m["executable"])')
out=$(mktemp -d)
printf '%-28s %14s\n' kernel instructions
for k in kernel_outlook kernel_one kernel_twenty kernel_hold kernel_reference_twenty \
    kernel_fast_one kernel_fast_twenty kernel_fast_twenty_kept kernel_fast_hold; do
    FORECAST_ICOUNT=1 valgrind --tool=callgrind --callgrind-out-file="$out/$k.out" \
        --toggle-collect="*forecast::$k" "$bin" >/dev/null 2>"$out/$k.log"
    n=$(awk '/^summary:/{print $2}' "$out/$k.out")
    printf '%-28s %14s\n' "$k" "$n"
done
rm -rf "$out"
