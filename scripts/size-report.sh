#!/usr/bin/env bash
# Flash and static RAM of a firmware ELF, checked against the project's budget.
#
#   scripts/size-report.sh [ELF]    (default: the device-profile qemu_board image)
#
# flash      = .vector_table + .text + .rodata + .data (the initialised data's load image)
# static RAM = .data + .bss + .uninit + STACK_RESERVE_BYTES
# cortex-m-rt's link.x reserves no stack: the stack grows down from the top of RAM into what
# static data leaves free. STACK_RESERVE_BYTES (default 0) counts a stack allowance against
# the RAM budget; scripts/verify.sh passes the high-water mark the board itself measures
# (it paints its stack at boot and prints `stack: N bytes used` at exit).
# Budget (override with FLASH_BUDGET_BYTES / RAM_BUDGET_BYTES): flash <= 48 KiB,
# static RAM <= 12 KiB. Exit status 1 when over budget, 2 when the tools or ELF are missing.
# Sizes come from llvm-size (rustup component llvm-tools, which .ci/run installs); a
# llvm-size or arm-none-eabi-size on PATH is used if the component is absent.
set -euo pipefail
cd "$(dirname "$0")/.."

elf=${1:-target/thumbv7em-none-eabihf/device/qemu_board}
flash_budget=${FLASH_BUDGET_BYTES:-$((48 * 1024))}
ram_budget=${RAM_BUDGET_BYTES:-$((12 * 1024))}
stack=${STACK_RESERVE_BYTES:-0}

if [[ ! -f $elf ]]; then
    echo "size-report: no such ELF: $elf (build it first)" >&2
    exit 2
fi

size_tool=
host=$(rustc -vV | awk '/^host:/{print $2}')
candidate="$(rustc --print sysroot)/lib/rustlib/$host/bin/llvm-size"
if [[ -x $candidate ]]; then
    size_tool=$candidate
elif command -v llvm-size >/dev/null; then
    size_tool=llvm-size
elif command -v arm-none-eabi-size >/dev/null; then
    size_tool=arm-none-eabi-size
else
    echo "size-report: no llvm-size (rustup component add llvm-tools) or arm-none-eabi-size" >&2
    exit 2
fi

# `-A` lists "name size addr" per section in both tools.
sections=$("$size_tool" -A "$elf")
sec() { awk -v n="$1" '$1 == n {s += $2} END {print s + 0}' <<<"$sections"; }

vt=$(sec .vector_table)
text=$(sec .text)
rodata=$(sec .rodata)
data=$(sec .data)
bss=$(sec .bss)
uninit=$(sec .uninit)
flash=$((vt + text + rodata + data))
ram=$((data + bss + uninit + stack))

kib() { awk -v b="$1" 'BEGIN{printf "%.2f KiB", b/1024}'; }
echo "size report: $elf ($(basename "$size_tool"))"
printf '  %-14s %8d\n' .vector_table "$vt" .text "$text" .rodata "$rodata" .data "$data" \
    .bss "$bss" .uninit "$uninit" "stack allowance" "$stack"
printf '  flash      %8d bytes (%s) of %d (%s)\n' "$flash" "$(kib "$flash")" "$flash_budget" "$(kib "$flash_budget")"
printf '  static RAM %8d bytes (%s) of %d (%s)\n' "$ram" "$(kib "$ram")" "$ram_budget" "$(kib "$ram_budget")"

status=0
if ((flash > flash_budget)); then
    echo "size-report: FLASH OVER BUDGET: $flash bytes > $flash_budget bytes by $((flash - flash_budget))" >&2
    status=1
fi
if ((ram > ram_budget)); then
    echo "size-report: STATIC RAM OVER BUDGET: $ram bytes > $ram_budget bytes by $((ram - ram_budget))" >&2
    status=1
fi
if ((flash == 0)); then
    # An empty image is the symptom of a linker script that was never applied.
    echo "size-report: the image has no code: was link.x passed to the linker?" >&2
    status=1
fi
((status == 0)) && echo "  within budget"
exit "$status"
