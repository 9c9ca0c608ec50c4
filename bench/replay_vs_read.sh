#!/usr/bin/env bash
# Measure `frothline replay` on a large synthetic capture (16 channels x 45 s x 40 kHz, made
# here, not committed) against reading the same file from the page cache, in one run.
# Prints both times and their ratio. With OLD=/path/to/an/older/frothline it also times
# that binary on the same capture, alternating runs (best of 5 each), and prints new / old.
# Usage: bash bench/replay_vs_read.sh [WINDOW]   (OLD=... bash bench/replay_vs_read.sh)
set -euo pipefail
cd "$(dirname "$0")/.."
window=${1:-50ms}
out=bench/out
mkdir -p "$out"
cargo build --release -p frothline-host >/dev/null 2>&1
bin=target/release/frothline
if [ ! -f "$out/big/capture.wav" ]; then
    $bin synth --out "$out/big" --probes 8 --duration 45 --rate 40000 --seed 3 >/dev/null
fi
wav="$out/big/capture.wav"
now() { date +%s.%N; }
cat "$wav" > /dev/null            # warm the page cache
t0=$(now); cat "$wav" > /dev/null; t1=$(now)
$bin replay "$wav" --layout "$out/big/layout.toml" --out "$out/replay" --window "$window" --quiet
t2=$(now)
python3 - "$t0" "$t1" "$t2" "$(stat -c %s "$wav")" <<'PY'
import sys
t0, t1, t2, size = map(float, sys.argv[1:])
read, replay = t1 - t0, t2 - t1
samples = (size - 44) / 2
print(f"file {size/1e6:.1f} MB, {samples/1e6:.1f} M channel-samples")
print(f"cat from page cache: {read:.3f} s")
print(f"frothline replay:    {replay:.3f} s  ({samples/replay/1e6:.0f} M channel-samples/s end to end)")
print(f"ratio replay / read: {replay/read:.2f}")
PY
if [ -n "${OLD:-}" ]; then
    best() { sort -g | head -1; }
    new_t=() old_t=()
    for _ in 1 2 3 4 5; do
        for which in new old; do
            b=$bin; [ $which = old ] && b=$OLD
            s=$(now)
            "$b" replay "$wav" --layout "$out/big/layout.toml" --out "$out/replay-$which" \
                --window "$window" --quiet
            e=$(now)
            if [ $which = new ]; then new_t+=("$s $e"); else old_t+=("$s $e"); fi
        done
    done
    n=$(for p in "${new_t[@]}"; do echo "$p" | awk '{print $2 - $1}'; done | best)
    o=$(for p in "${old_t[@]}"; do echo "$p" | awk '{print $2 - $1}'; done | best)
    echo "this binary: best of 5 $n s; OLD ($OLD): best of 5 $o s; ratio new / old: $(awk "BEGIN {printf \"%.3f\", $n / $o}")"
fi
