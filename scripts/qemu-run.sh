#!/usr/bin/env bash
# Boots a firmware ELF on QEMU's mps2-an386 (Cortex-M4F) with semihosting and returns the
# firmware's exit status.
#
#   scripts/qemu-run.sh ELF [ARGS...]
#
# ARGS reach the firmware as its semihosting command line, after the program name (the ELF's
# file name), so the firmware sees argv = [name, ARGS...]. Host paths in ARGS are relative to
# the current directory. No argument may contain a space or a comma.
# Environment:
#   QEMU_TIMEOUT  seconds before the run is killed (default 60): a firmware started without
#                 semihosting, or stuck, would otherwise spin at 100 % CPU for ever.
#   QEMU_PLUGIN   a TCG plugin with its arguments, passed as `-plugin "$QEMU_PLUGIN"` (see
#                 scripts/qemu-icount.sh).
#   QEMU_LOG      file that receives the firmware's stdout/stderr and QEMU's messages, in
#                 addition to this script's stdout (default: none).
# Exit status: the firmware's; 124 on timeout; 2 on a usage error.
set -euo pipefail

if [[ $# -lt 1 ]]; then
    echo "usage: $0 ELF [ARGS...]" >&2
    exit 2
fi
elf=$1
shift
if [[ ! -f $elf ]]; then
    echo "$0: no such ELF: $elf" >&2
    exit 2
fi
if ! command -v qemu-system-arm >/dev/null; then
    echo "$0: qemu-system-arm not found (apt-get install -y qemu-system-arm; .ci/run does this)" >&2
    exit 2
fi

semi="enable=on,target=native,arg=$(basename "$elf")"
for a in "$@"; do
    if [[ $a == *[[:space:],]* ]]; then
        echo "$0: argument may not contain a space or a comma: '$a'" >&2
        exit 2
    fi
    semi+=",arg=$a"
done

cmd=(qemu-system-arm -machine mps2-an386 -cpu cortex-m4 -nographic -monitor none -serial none
    -semihosting-config "$semi" -kernel "$elf")
if [[ -n ${QEMU_PLUGIN:-} ]]; then
    cmd+=(-plugin "$QEMU_PLUGIN")
fi

log=$(mktemp)
trap 'rm -f "$log"' EXIT
status=0
timeout "${QEMU_TIMEOUT:-60}" "${cmd[@]}" </dev/null >"$log" 2>&1 || status=$?
cat "$log"
if [[ -n ${QEMU_LOG:-} ]]; then
    cp "$log" "$QEMU_LOG"
fi
if [[ $status -eq 124 ]]; then
    echo "$0: timed out after ${QEMU_TIMEOUT:-60} s: $elf" >&2
fi
exit "$status"
