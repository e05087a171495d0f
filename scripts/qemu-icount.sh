#!/usr/bin/env bash
# Exact guest instruction counts for the firmware under QEMU, with the qemu-icount TCG plugin
# (tools/qemu-icount).
#
#   scripts/qemu-icount.sh count ELF [ARGS...]   instructions of one whole run
#   scripts/qemu-icount.sh bench ELF [N]         per-iteration cost of each bench kernel
#
# Method for `bench`: the board's `bench KERNEL N` command runs N passes of KERNEL over 64
# stages and does nothing else that depends on N. count(2N) - count(N) is therefore the cost
# of exactly N passes: start-up, argument parsing, the loop's one-time set-up and exit cancel
# out (count(0) would not cancel the set-up, which N = 0 skips). Divided by N it is an exact
# integer per pass; divided again by 64 it is the cost of one loop iteration, including the
# outer loop's per-pass share. The `none` kernel is the bare loop (with the black_box store
# and load), so `KERNEL - none` is the kernel's own inlined cost. Counts are identical run to
# run (one vCPU, no interrupts, no time source); the script checks that too.
set -euo pipefail
cd "$(dirname "$0")/.."

plugin=target/tools/release/libqemu_icount.so
cargo build --quiet --release --manifest-path tools/qemu-icount/Cargo.toml --target-dir target/tools

count() { # ELF ARGS... -> prints the instruction count of one run
    local out
    out=$(mktemp)
    QEMU_PLUGIN="$plugin,outfile=$out" bash scripts/qemu-run.sh "$@" >/dev/null
    awk '/^insns /{print $2}' "$out"
    rm -f "$out"
}

case ${1:-} in
count)
    shift
    count "$@"
    ;;
bench)
    elf=${2:?usage: $0 bench ELF [N]}
    n=${3:-100}
    per=64
    printf '%-8s %12s %12s %10s %14s %12s\n' kernel "count($n)" "count($((2 * n)))" "per pass" \
        "per iteration" "minus none"
    none=
    for k in none sqrt pow1_5 pow2_5 powf1_5; do
        c1=$(count "$elf" bench "$k" "$n")
        c2=$(count "$elf" bench "$k" $((2 * n)))
        again=$(count "$elf" bench "$k" $((2 * n)))
        if [[ $c2 != "$again" ]]; then
            echo "$0: counts differ run to run for $k: $c2 vs $again" >&2
            exit 1
        fi
        diff=$((c2 - c1))
        if ((diff % n != 0)); then
            echo "$0: $k: count(2N) - count(N) = $diff is not a whole number of passes" >&2
            exit 1
        fi
        pass=$((diff / n))
        it=$(awk -v p="$pass" -v i="$per" 'BEGIN{printf "%.3f", p/i}')
        [[ -z $none ]] && none=$it
        rel=$(awk -v a="$it" -v b="$none" 'BEGIN{printf "%.3f", a-b}')
        printf '%-8s %12s %12s %10s %14s %12s\n' "$k" "$c1" "$c2" "$pass" "$it" "$rel"
    done
    ;;
*)
    echo "usage: $0 count ELF [ARGS...] | bench ELF [N]" >&2
    exit 2
    ;;
esac
