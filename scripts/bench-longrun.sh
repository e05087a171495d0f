#!/usr/bin/env bash
# The long-record benchmark of issue #5, timed (host-sim/BENCH.md): a century of 1-minute rain
# replayed with the controller every step, against the 10 s target, and the Python/numpy
# level-pool loop of the same routing as a baseline (its ratio to both Rust replays).
#
#   scripts/bench-longrun.sh [DWD_CSV] [YEARS] [RUNS]   # defaults: the shared DWD file, 100, 3
#
# CPU seconds (`/usr/bin/time`, user) of whole processes, best of RUNS; the baseline needs
# python3 with numpy and is skipped without it. Not part of verify.sh: it takes minutes.
#
# With llvm-profdata at hand (`rustup component add llvm-tools`) the controller replay is also
# timed from a profile-guided build (target/pgo). Its profile is trained on a record that is
# not the benchmark's: LONGRUN_QUIET's one synthetic storm and a dry year, both policies. PGO
# changes code layout and inlining only; the fingerprint must match the plain build's.
set -euo pipefail
cd "$(dirname "$0")/.."
csv=${1:-../shared/data/rain/dwd_01684_goerlitz_5min_1991-2020.csv}
years=${2:-100}
runs=${3:-3}
cargo build --release -p holdback-sim --example longrun >/dev/null 2>&1
bin=target/release/examples/longrun
out=$(mktemp -d)
trap 'rm -rf "$out"' EXIT

best_cpu() { # policy -> "cpu_s ns_per_step"
    local best=""
    for _ in $(seq "$runs"); do
        LONGRUN_POLICY=$1 /usr/bin/time -f '%U' -o "$out/t" "$bin" "$csv" "$years" >"$out/o" 2>/dev/null
        local cpu
        cpu=$(cat "$out/t")
        if [ -z "$best" ] || awk -v a="$cpu" -v b="$best" 'BEGIN{exit !(a < b)}'; then
            best=$cpu
            steps=$(sed -n 's/.*(\([0-9]*\) steps).*/\1/p' "$out/o")
            grep -o 'permit exceedance.*' "$out/o" >"$out/$1.exceed" || true
            grep -o 'fingerprint [0-9a-f]*' "$out/o" >"$out/$1.fp" || true
        fi
    done
    echo "$best $(awk -v c="$best" -v n="$steps" 'BEGIN{printf "%.0f", c * 1e9 / n}')"
}

read -r c_cpu c_ns <<<"$(best_cpu controller)"
read -r f_cpu f_ns <<<"$(best_cpu fixed)"
read -r t_cpu t_ns <<<"$(best_cpu threshold)"
plain_fp=$(cat "$out/controller.fp")
cp "$out/controller.exceed" "$out/plain.exceed"
printf '%-44s %10s %12s\n' run "CPU s" "ns per step"
printf '%-44s %10s %12s\n' "controller every step, $years years" "$c_cpu" "$c_ns"
printf '%-44s %10s %12s\n' "fixed outlet, $years years" "$f_cpu" "$f_ns"
# Diagnostics, not the benchmark: the same gate plant and sensor models under the
# level-threshold rule (the controller's share is the difference), and the controller
# forecasting every 300 s instead of the demo pond's 60 s.
printf '%-44s %10s %12s\n' "threshold rule (no controller), $years years" "$t_cpu" "$t_ns"
read -r p_cpu p_ns <<<"$(LONGRUN_FORECAST_S=300 best_cpu controller)"
printf '%-44s %10s %12s\n' "controller, forecast every 300 s" "$p_cpu" "$p_ns"

profdata=$(ls "$(rustc --print sysroot)"/lib/rustlib/*/bin/llvm-profdata 2>/dev/null | head -1 || true)
if [ -n "$profdata" ]; then
    raw=$(mktemp -d)
    RUSTFLAGS="-Cprofile-generate=$raw" CARGO_TARGET_DIR=target/pgo-train \
        cargo build --release -p holdback-sim --example longrun >/dev/null 2>&1
    for policy in controller fixed; do
        LONGRUN_QUIET=1 LONGRUN_POLICY=$policy target/pgo-train/release/examples/longrun \
            "$csv" 1 >/dev/null 2>&1
    done
    "$profdata" merge -o "$raw/merged.profdata" "$raw"/*.profraw
    RUSTFLAGS="-Cprofile-use=$raw/merged.profdata" CARGO_TARGET_DIR=target/pgo \
        cargo build --release -p holdback-sim --example longrun >/dev/null 2>&1
    rm -rf "$raw"
    bin=target/pgo/release/examples/longrun
    read -r g_cpu g_ns <<<"$(best_cpu controller)"
    printf '%-44s %10s %12s\n' "controller, profile-guided build" "$g_cpu" "$g_ns"
    pgo_fp=$(cat "$out/controller.fp")
    if [ "$pgo_fp" != "$plain_fp" ]; then
        echo "profile-guided build: $pgo_fp, the plain build: $plain_fp (must be equal)" >&2
        exit 1
    fi
    bin=target/release/examples/longrun
else
    echo "profile-guided build skipped: no llvm-profdata (rustup component add llvm-tools)"
fi
verdict() { # label cpu_s
    awk -v l="$1" -v c="$2" -v y="$years" 'BEGIN{t = c * 100 / y; printf "century with the controller (%s): %.1f s of CPU against the 10 s target: %s\n", l, t, (t < 10 ? "met" : "MISSED")}'
}
verdict "plain release build" "$c_cpu"
if [ -n "${g_cpu:-}" ]; then
    verdict "profile-guided build" "$g_cpu"
fi
if [ -s "$out/plain.exceed" ]; then
    echo "controller-logged permit exceedances:"
    cat "$out/plain.exceed"
fi

if python3 -c 'import numpy' 2>/dev/null; then
    "$bin" "$csv" 1 "$out/in" >/dev/null 2>&1
    p_ns=$(for _ in $(seq "$runs"); do python3 host-sim/bench/level_pool.py "$out/in" 1; done |
        sed -n 's/.*(\([0-9]*\) ns per step).*/\1/p' | sort -n | head -1)
    awk -v p="$p_ns" -v c="$c_ns" -v f="$f_ns" 'BEGIN{printf "python/numpy loop: %d ns per step; Rust is %.1fx faster (fixed outlet), %.1fx (controller)\n", p, p / f, p / c}'
else
    echo "python/numpy baseline skipped: no numpy (pip install numpy)"
fi
