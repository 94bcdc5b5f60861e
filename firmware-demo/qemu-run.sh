#!/usr/bin/env bash
# Cargo runner: qemu-run.sh BOARD ELF [ARGS...]
# Runs a firmware ELF under QEMU with semihosting (the firmware's stdout,
# host files and exit status all go through it). ARGS reach the firmware as
# its command line (SYS_GET_CMDLINE). The `live` binary logs with defmt; its
# stream is decoded with defmt-print when that is installed (set
# HEADROOM_RAW=1 to get the raw bytes instead).
# QEMU_TIMEOUT (seconds, default 60) bounds the run; QEMU_ICOUNT=1 makes
# virtual time count instructions (-icount shift=0), so runs repeat exactly.
set -euo pipefail
board=${1:?usage: qemu-run.sh BOARD ELF [ARGS...]}
elf=${2:?usage: qemu-run.sh BOARD ELF [ARGS...]}
shift 2
case "$board" in
    mps2-an386) machine=(-M mps2-an386 -cpu cortex-m4) ;;
    microbit) machine=(-M microbit) ;;
    *) echo "qemu-run.sh: unknown board '$board' (mps2-an386 or microbit)" >&2; exit 2 ;;
esac
extra=()
if [ "${QEMU_ICOUNT:-0}" = 1 ]; then extra+=(-icount shift=0); fi
if [ "$#" -gt 0 ]; then extra+=(-append "$*"); fi
run() {
    timeout "${QEMU_TIMEOUT:-60}" qemu-system-arm "${machine[@]}" -nographic \
        -semihosting-config enable=on,target=native "${extra[@]}" -kernel "$elf"
}
if [ "$(basename "$elf")" = live ] && [ "${HEADROOM_RAW:-0}" != 1 ] \
    && command -v defmt-print >/dev/null; then
    set -o pipefail
    run | defmt-print -e "$elf"
else
    run
fi
