#!/usr/bin/env bash
# Measure `frothline replay` on a large synthetic capture (16 channels x 45 s x 40 kHz, made
# here, not committed) against reading the same file from the page cache, in one run.
# Prints both times and their ratio. Usage: bash bench/replay_vs_read.sh [WINDOW]
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
