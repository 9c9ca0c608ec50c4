#!/usr/bin/env bash
# Time `frothline unpack` on archives whose body is nothing but false chunk starts: sync
# pairs each claiming a 64 KiB chunk (the worst case of the reader's resynchronisation:
# a CRC over up to 64 KiB per candidate), at 1 MB and 10 MB, made here with Python (not
# committed). The time should grow linearly with the size.
# Usage: bash bench/archive_resync.sh
set -euo pipefail
cd "$(dirname "$0")/.."
out=bench/out
mkdir -p "$out"
cargo build --release -p frothline-host >/dev/null 2>&1
bin=target/release/frothline
for mb in 1 10; do
    f="$out/false-syncs-$mb.frothwire"
    python3 - "$f" "$mb" <<'PY'
import struct, sys, zlib
path, mb = sys.argv[1], int(sys.argv[2])
head = bytes([0x89]) + b"FRW\r\n\x1a\n" + struct.pack("<HHQ", 2, 0, 1_700_000_000_000_000)
head += struct.pack("<I", zlib.crc32(head))
with open(path, "wb") as f:
    f.write(head + b"\xc5\x57\x00\x00\x00\xff\xff\x03" * (mb << 17))
PY
    start=$(date +%s.%N)
    "$bin" unpack "$f" --out "$out/false-syncs-$mb" >/dev/null 2>&1 || true
    end=$(date +%s.%N)
    printf '%3d MB of false sync pairs: unpack %.2f s\n' "$mb" "$(echo "$end - $start" | bc -l)"
done
