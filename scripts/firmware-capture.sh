#!/usr/bin/env bash
# Regenerate the capture compiled into the firmware example, and the constants that make
# the firmware's chain configuration equal to the host's:
#   1. `frothline synth` of firmware-example/capture/scenario.toml (8 dual-tip probes,
#      16 channels, 20 kHz, 60 ms) -> capture.wav, layout.toml, truth.csv;
#   2. the layout is adapted to the short capture and to the firmware's memory:
#      learn_period_s = 0.02 (levels learnt after 10 ms and every 20 ms, instead of the
#      default 0.2 s that 60 ms would never reach) and max_lag_ms = 3.0 per dual-tip probe
#      (60 lags at 20 kHz: velocities down to 2 m/s at 6 mm spacing; the firmware's chain
#      has 64 lag slots, the host's 256, and both must search the same lags);
#   3. frothline-capture-gen (firmware-example/capture-gen) reads the layout and capture
#      with the host tool's own code and writes capture/config.rs: the chain configuration
#      of `frothline replay --window 10ms --levels device`, the probe layout in wire
#      units, and the count and digest of the records that replay gives. The replay uses
#      the device's causal level rule (`--levels device`: learnt during the record, as the
#      firmware learns them), not the default record rule, so firmware and host agree
#      record for record.
# The firmware's build script turns capture.wav into the raw i16 block it embeds.
# With --surge, the same for the field-logger build's capture, firmware-example/capture-surge
# (a surge front reaching one station of 8 dual-tip probes, 20 kHz, 120 ms, fixed levels:
# no learning period to adapt; the chain is a station chain with front-relative windows).
# Usage: bash scripts/firmware-capture.sh [--surge] [--config-only]
#   --config-only  keep capture.wav and layout.toml, only rewrite config.rs (after a change
#                  of the core or the host changed the records: the expected digest follows)
set -euo pipefail
cd "$(dirname "$0")/.."
dir=firmware-example/capture
config_only=0
for a in "$@"; do
    case "$a" in
        --surge) dir=firmware-example/capture-surge ;;
        --config-only) config_only=1 ;;
        *) echo "firmware-capture: unknown argument $a" >&2; exit 2 ;;
    esac
done
window=10ms
lags=64    # keep equal to firmware-example/src/config.rs LAGS

gen() {
    cargo run --release -q --manifest-path firmware-example/capture-gen/Cargo.toml -- \
        "$dir/capture.wav" "$dir/layout.toml" "$window" "$lags" "$dir/config.rs"
}
if [ $config_only -eq 1 ]; then
    gen
    exit 0
fi
cargo build --release -q -p frothline-host
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
./target/release/frothline synth "$dir/scenario.toml" --out "$tmp" >/dev/null
cp "$tmp/capture.wav" "$tmp"/truth*.csv "$dir/"
python3 - "$tmp/layout.toml" "$dir/layout.toml" <<'PY'
import sys
src, dst = sys.argv[1], sys.argv[2]
out = []
for line in open(src):
    out.append(line)
    key = line.split("=")[0].strip()
    if key == "hysteresis" and "capture-surge" not in dst:
        out.append("learn_period_s = 0.02           # firmware example: a 60 ms capture\n")
    elif key == "tip_spacing_mm":
        out.append("max_lag_ms = 3.0                 # firmware example: 60 of 64 lag slots\n")
text = "".join(out).replace(
    "# Layout of a synthetic capture written by `frothline synth`.",
    "# Layout of the firmware example's capture: written by `frothline synth`, adapted by\n"
    "# scripts/firmware-capture.sh (learn_period_s, max_lag_ms).", 1)
open(dst, "w").write(text)
PY
gen
