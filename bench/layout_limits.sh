#!/usr/bin/env bash
# How fast oversized layouts are refused: a 10 MB layout (refused by its size before it is
# read), a layout of 10 000 probes just under the size limit and one of 1025 (refused by
# their probe count before their probes are checked) and one of 1024 probes (validated in
# full, then refused on the one-channel capture), each through `frothline replay`.
# Prints the wall time of each, measured in this one run.
# Usage: bash bench/layout_limits.sh
set -euo pipefail
cd "$(dirname "$0")/.."
out=bench/out/layouts
mkdir -p "$out"
cargo build --release -p frothline-host >/dev/null 2>&1
bin=target/release/frothline
python3 - "$out" <<'PY'
import sys, os
out = sys.argv[1]
def layout(n):
    parts = ['[flow]\nkind = "steady"\n']
    for i in range(n):
        parts.append(f'\n[[probe]]\nname = "P{i}"\nelevation_mm = 10.0\nleading = {2*i}\n'
                     f'trailing = {2*i+1}\ntip_spacing_mm = 5.0\n')
    return ''.join(parts)
for n in (1024, 1025, 10000):
    open(os.path.join(out, f'probes-{n}.toml'), 'w').write(layout(n))
big = layout(1)
big += '# ' + 'x' * 78 + '\n'
big = big * (10_000_000 // len(big) + 1)
open(os.path.join(out, 'ten-mb.toml'), 'w').write(big[:10_000_000])
PY
# A one-channel capture: every layout above is refused or fails on channels after validation.
if [ ! -f "$out/one.wav" ]; then
    python3 - "$out/one.wav" <<'PY'
import sys, struct
n = 100
data = struct.pack('<%dh' % n, *([1000] * n))
hdr = b'RIFF' + struct.pack('<I', 36 + len(data)) + b'WAVEfmt ' + struct.pack('<IHHIIHH', 16, 1, 1, 20000, 40000, 2, 16)
open(sys.argv[1], 'wb').write(hdr + b'data' + struct.pack('<I', len(data)) + data)
PY
fi
for f in ten-mb.toml probes-10000.toml probes-1025.toml probes-1024.toml; do
    size=$(stat -c %s "$out/$f")
    t0=$(date +%s.%N)
    msg=$("$bin" replay "$out/one.wav" --layout "$out/$f" --out "$out/replay" --quiet 2>&1 || true)
    t1=$(date +%s.%N)
    printf '%-18s %9d bytes  %.3f s  %s\n' "$f" "$size" "$(echo "$t1 - $t0" | bc -l)" \
        "$(echo "$msg" | head -1 | cut -c1-110)"
done
