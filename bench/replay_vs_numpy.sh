#!/usr/bin/env bash
# frothline replay against a plain numpy/scipy implementation of the same analysis
# (bench/reference_numpy.py) on one 16-channel x 45 s x 40 kHz synthetic capture, in one run.
# Installs numpy and scipy with pip if they are missing. Prints both times, their ratio and
# ns per channel-sample. Usage: bash bench/replay_vs_numpy.sh
set -euo pipefail
cd "$(dirname "$0")/.."
python3 -c 'import numpy, scipy' 2>/dev/null || python3 -m pip install --quiet numpy scipy
out=bench/out
mkdir -p "$out"
cargo build --release -p frothline-host >/dev/null 2>&1
bin=target/release/frothline
[ -f "$out/big/capture.wav" ] || $bin synth --out "$out/big" --probes 8 --duration 45 --rate 40000 --seed 3 >/dev/null
wav="$out/big/capture.wav"; layout="$out/big/layout.toml"
now() { date +%s.%N; }
cat "$wav" > /dev/null
t0=$(now)
$bin replay "$wav" --layout "$layout" --out "$out/replay-whole" --window whole --quiet
t1=$(now)
python3 bench/reference_numpy.py "$wav" "$layout" 256 > "$out/numpy.txt"
t2=$(now)
python3 - "$t0" "$t1" "$t2" "$(stat -c %s "$wav")" <<'PY'
import sys
t0, t1, t2, size = map(float, sys.argv[1:])
ours, ref = t1 - t0, t2 - t1
samples = (size - 44) / 2
print(f"{samples/1e6:.1f} M channel-samples")
print(f"frothline replay:  {ours:.3f} s  ({ours/samples*1e9:.2f} ns per channel-sample)")
print(f"numpy/scipy:       {ref:.3f} s  ({ref/samples*1e9:.2f} ns per channel-sample)")
print(f"speed-up: {ref/ours:.1f}x")
PY
