#!/usr/bin/env bash
# Peak memory of `frothline replay` on a 120 s, 16-channel (8 dual-tip probes), 40 kHz
# synthetic capture (made here, not committed), at 10 ms and 1 ms windows, measured with
# /usr/bin/time -v (maximum resident set size). A replay keeps running totals, not its
# records, so the peak should not grow with the number of windows. Then the same for a
# transient replay (a two-station surge of the same length, 12 channels): its window records
# and profile slices go through a temporary file sorted in runs, so its peak should not grow
# either.
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
surge="$out/mem-surge-$duration"
if [ ! -f "$surge/capture.wav" ]; then
    $bin synth fixtures/scenarios/surge_b2.toml --out "$surge" --duration "$duration" \
        --rate 40000 >/dev/null
fi
printf 'transient capture: %s (%s MB)\n' "$surge/capture.wav" \
    "$(( $(stat -c %s "$surge/capture.wav") / 1000000 ))"
for window in 10ms 1ms; do
    log="$out/mem-surge-$window.txt"
    /usr/bin/time -v "$bin" replay "$surge/capture.wav" --layout "$surge/layout.toml" \
        --out "$out/mem-surge-replay-$window" --window "$window" --quiet 2>"$log"
    rss_kb=$(awk -F: '/Maximum resident set size/ {gsub(/ /, "", $2); print $2}' "$log")
    wall=$(awk -F': ' '/Elapsed \(wall clock\)/ {print $2}' "$log")
    rows=$(($(wc -l <"$out/mem-surge-replay-$window/windows.csv") - 1))
    slices=$(($(wc -l <"$out/mem-surge-replay-$window/profile.csv") - 1))
    printf 'transient window %-5s rows %8d  slices %7d  peak RSS %6.1f MB  wall %s\n' \
        "$window" "$rows" "$slices" "$(echo "$rss_kb / 1000" | bc -l)" "$wall"
done
