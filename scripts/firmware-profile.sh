#!/usr/bin/env bash
# Where the emulated firmware's instructions go, function by function: QEMU logs every
# translated block (its instructions) and every execution of one (`-d nochain,exec,in_asm`,
# block chaining off so that each execution is logged); the log is read as it is written
# (a FIFO: it would take a gigabyte on disk) and each block's executions times its length
# are summed per function. Inlined code counts in the function it was inlined into.
#
# Counts are those of `-icount` runs (one instruction each, whatever it costs in cycles).
# The figures the budget quotes come from scripts/firmware-measure.sh; this tells which
# part of them a change should look at.
#
# Usage: bash scripts/firmware-profile.sh [MODE] [ROWS]
#   MODE: the firmware's semihosting argument (`measure`, the default: the measurement
#         passes; `run`: the paced pipeline with its records and link), ROWS: 40.
# A measure run takes about a minute here.
set -euo pipefail
cd "$(dirname "$0")/.."
mode=${1:-measure}
rows=${2:-40}
qemu=$(bash scripts/fetch-qemu.sh) || exit 2
(cd firmware-example && cargo build --release -q) || exit 2
elf=firmware-example/target/thumbv7em-none-eabihf/release/frothline-firmware-example
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
mkfifo "$work/log"
# Blocks: "IN: symbol" then one "0x...: ..." line per instruction; executions:
# "Trace N: host [cpu/PC/flags/...] symbol".
awk '
    /^IN: / { inblk = 1; n = 0; pc = ""; next }
    inblk && /^0x[0-9a-f]+:/ {
        if (n == 0) { pc = substr($1, 3, length($1) - 3); sub(/^0+/, "", pc) }
        n++; next
    }
    inblk { if (n > 0) len[pc] = n; inblk = 0 }
    /^Trace / {
        split($0, a, "/"); p = a[2]; sub(/^0+/, "", p)
        s = $0; sub(/^[^]]*\] /, "", s)
        runs[p]++; sym[p] = s
    }
    END {
        for (p in runs) { k = (p in len) ? len[p] : 1; cost[sym[p]] += runs[p] * k; total += runs[p] * k }
        for (f in cost) printf "%12d %6.2f%%  %s\n", cost[f], 100 * cost[f] / total, f
        printf "%12d total\n", total > "/dev/stderr"
    }' < "$work/log" > "$work/by_function" 2> "$work/total" &
reader=$!
rm -f target/firmware/settings.nor
timeout 600 "$qemu" -machine mps2-an386 -nographic -monitor none \
    -semihosting-config "enable=on,target=native,arg=$mode" -icount shift=0,sleep=off \
    -serial "file:$work/uart.bin" -kernel "$elf" -d nochain,exec,in_asm -D "$work/log" > /dev/null
wait "$reader"
cat "$work/total"
# Rust's symbol hashes cut off for reading.
sort -rn "$work/by_function" | head -n "$rows" | sed -E 's/17h[0-9a-f]{16}E$//'
