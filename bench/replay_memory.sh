#!/usr/bin/env bash
# Peak memory of `frothline replay` on a 120 s, 16-channel (8 dual-tip probes), 40 kHz
# synthetic capture (made here, not committed), at 10 ms and 1 ms windows, measured with
# /usr/bin/time -v (maximum resident set size). A replay keeps running totals, not its
# records, so the peak should not grow with the number of windows.
# Usage: bash bench/replay_memory.sh [DURATION_S]
set -euo pipefail
cd "$(dirname "$0")/.."
duration=${1:-120}
out=bench/out
mkdir -p "$out"
if [ ! -x /usr/bin/time ]; then
    echo "needs GNU time: apt-get install time" >&2
    exit 1
fi
cargo build --release -p frothline-host >/dev/null 2>&1
bin=target/release/frothline
cap="$out/mem-$duration"
if [ ! -f "$cap/capture.wav" ]; then
    $bin synth --out "$cap" --probes 8 --duration "$duration" --rate 40000 --seed 5 >/dev/null
fi
printf 'capture: %s (%s MB)\n' "$cap/capture.wav" "$(( $(stat -c %s "$cap/capture.wav") / 1000000 ))"
for window in 10ms 1ms; do
    log="$out/mem-$window.txt"
    /usr/bin/time -v "$bin" replay "$cap/capture.wav" --layout "$cap/layout.toml" \
        --out "$out/mem-replay-$window" --window "$window" --quiet 2>"$log"
    rss_kb=$(awk -F: '/Maximum resident set size/ {gsub(/ /, "", $2); print $2}' "$log")
    wall=$(awk -F': ' '/Elapsed \(wall clock\)/ {print $2}' "$log")
    rows=$(($(wc -l <"$out/mem-replay-$window/windows.csv") - 1))
    printf 'window %-5s rows %8d  peak RSS %6.1f MB  wall %s\n' \
        "$window" "$rows" "$(echo "$rss_kb / 1000" | bc -l)" "$wall"
done
