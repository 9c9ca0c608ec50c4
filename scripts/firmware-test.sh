#!/usr/bin/env bash
# The firmware example's tests, all in QEMU (mps2-an386):
#   run      paced replay of the embedded capture: records equal a host replay (digest)
#   adc      the same through the SPI ADC driver and a simulated device
#   overrun  a stalling main loop: the acquisition must count dropped samples and the
#            health frame must report them (the firmware exits 0 only then)
#   measure  unpaced, timed: records equal a host replay
#   expected regenerate capture/config.rs (chain configuration and expected digest) from a
#            host replay with the current core and host tool (skipped with --no-host)
#   wire     the UART output of `run` decodes to frames whose window results equal the
#            host replay's (needs the host tool; skipped with --no-host)
# Prints "N passed, N failed" and exits non-zero on any failure.
set -uo pipefail
cd "$(dirname "$0")/.."
host=1
[ "${1:-}" = "--no-host" ] && host=0
pass=0 fail=0
check() {
    local name=$1; shift
    if "$@" > "target/firmware/test-$name.log" 2>&1; then
        pass=$((pass + 1)); echo "ok    $name"
    else
        fail=$((fail + 1)); echo "FAIL  $name (target/firmware/test-$name.log)"; tail -5 "target/firmware/test-$name.log"
    fi
}
mkdir -p target/firmware
if [ $host -eq 1 ]; then
    # The digest the firmware checks itself against, from a host replay with today's core.
    check expected bash scripts/firmware-capture.sh --config-only
fi
for m in run adc overrun measure; do
    check "$m" bash scripts/firmware-run.sh "$m" --icount 0
done
if [ $host -eq 1 ]; then
    d=firmware-example/capture
    check wire cargo run --release -q --manifest-path firmware-example/capture-gen/Cargo.toml -- \
        verify-uart "$d/capture.wav" "$d/layout.toml" 10ms target/firmware/uart-run.bin
fi
echo "$pass passed, $fail failed"
[ $fail -eq 0 ]
