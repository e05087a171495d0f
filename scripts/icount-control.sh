#!/usr/bin/env bash
# Exact host instruction counts of the gate controller step (tests/benches/control.rs) under
# valgrind callgrind, counted with --toggle-collect on the bench's `kernel_*` wrappers (each
# `#[inline(never)]` around one `Controller::step`), so a count includes everything the step
# calls and nothing else. Repeatable run to run.
#
#   kernel_step_plain     one step mid-storm without a fresh forecast
#   kernel_step_forecast  one step mid-storm with a fresh forecast, low in the pond (the
#                         forecast's volume bound rules out any approach to the limit: no
#                         routing)
#   kernel_step_forecast_routed  the same 1.6 m above normal, where every view of the rain is
#                         routed at the permit target over a 3 h horizon at 180 s
#   kernel_storm_step     every step of a 10-year 60-min storm on the demo pond until back at
#                         normal + 2 h; divided by the number of steps = the storm average
#
# CPU share at 64 MHz and one step per second, taking one host (x86-64) instruction as one
# Cortex-M4 cycle (an estimate: the guest count differs; scripts/qemu-icount.sh measures the
# device): share = instructions / 64e6.
#
#   scripts/icount-control.sh
set -euo pipefail
cd "$(dirname "$0")/.."

bin=$(cargo bench -p holdback-tests --bench control --no-run --message-format=json 2>/dev/null |
    python3 -c 'import json,sys
for l in sys.stdin:
    m = json.loads(l)
    if m.get("reason") == "compiler-artifact" and m["target"]["name"] == "control" and m.get("executable"):
        print(m["executable"])')
out=$(mktemp -d)
printf '%-28s %14s %12s %14s\n' kernel instructions per_step "share@64MHz,1Hz"
for k in kernel_step_plain kernel_step_forecast kernel_step_forecast_routed kernel_storm_step; do
    CONTROL_ICOUNT=1 valgrind --tool=callgrind --callgrind-out-file="$out/$k.out" \
        --toggle-collect="*control::$k" "$bin" >/dev/null 2>"$out/$k.log"
    n=$(awk '/^summary:/{print $2}' "$out/$k.out")
    steps=1
    if [[ $k == kernel_storm_step ]]; then
        steps=$(awk '/^storm_steps/{print $2}' "$out/$k.log")
        fc=$(awk '/^storm_steps/{print $4}' "$out/$k.log")
    fi
    per=$((n / steps))
    share=$(awk -v p="$per" 'BEGIN{printf "%.4f %%", 100 * p / 64e6}')
    printf '%-28s %14s %12s %14s\n' "$k" "$n" "$per" "$share"
done
echo "storm: $steps steps, $fc forecasts"
rm -rf "$out"
