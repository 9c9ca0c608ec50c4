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
#   logger   the field-logger build (surge capture, station chain): records equal a host
#            replay, a front triggered the capture, the log mounts afresh with every logged
#            record; with the host: the UART frames and the flash image (sent out of UART1)
#            checked against a host replay (verify-uart, verify-log)
#   logbook  `frothline logbook` reads the image back into CSV (skipped with --no-host)
#   erase    the field-logger build on a never-erased flash whose erases stall the main loop
#            45 ms per 4 KiB sector (a serial NOR's typical sector erase): with the room of a
#            capture erased ahead at arm time, no sample is dropped, the capture erases
#            nothing, and the image reads back (verify-uart, verify-log, `frothline logbook`);
#            the control (`erase-inside`: the log erases when it needs a page, inside the
#            capture) must drop samples and report them in health. Prints both drop counts.
#   commands host commands fed to UART0's receiver from a file (one of every answer of
#            docs/wire-protocol.md section 8: repeats, already running, unknown kind,
#            version, malformed, bad argument, busy, not running, an echo and line noise
#            unanswered) and every command carried out; every answer checked in order on the
#            host (skipped with --no-host); the settings store kept in a file
#   watch    the firmware as an instrument on a pty (real time), driven by `frothline watch
#            --start-run bench1 --set-window 100ms`, powered off and booted again: labelled
#            0.1 s windows, a dated run, the window stored and reported after the reboot
#            (scripts/firmware-watch.sh; skipped with --no-host)
#   reboot   the firmware booted again on that store: the window and levels the commands
#            set are loaded, reported (Describe, fw.settings) and used (skipped with --no-host)
#   levels   the instrument on a pty: `frothline tipcheck --port --set-levels` fixes the
#            levels the tip-health frames report, every SetLevels acked; booted again on the
#            same store, `frothline tipcheck --port` reads the same levels back from the
#            tip-health frames (scripts/firmware-levels.sh; skipped with --no-host)
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
    check expected-surge bash scripts/firmware-capture.sh --surge --config-only
fi
for m in run adc overrun measure; do
    check "$m" bash scripts/firmware-run.sh "$m" --icount 0
done
if [ $host -eq 1 ]; then
    d=firmware-example/capture
    check wire cargo run --release -q --manifest-path firmware-example/capture-gen/Cargo.toml -- \
        verify-uart "$d/capture.wav" "$d/layout.toml" 10ms target/firmware/uart-run.bin
fi
if [ $host -eq 1 ]; then
    check logger bash scripts/firmware-run.sh logger --icount 0 --verify
    logbook() {
        rm -rf target/firmware/fieldlog-csv
        cargo run -q -p frothline-host -- logbook target/firmware/fieldlog-image.bin \
            --page-bytes 4096 --write-unit 4 \
            --out target/firmware/fieldlog-csv --layout firmware-example/capture-surge/layout.toml \
            && [ "$(wc -l < target/firmware/fieldlog-csv/windows.csv)" -gt 1 ]
    }
    check logbook logbook
    erase() {
        local img=target/firmware/fieldlog-erase.bin out=target/firmware/erase-console.txt
        local ctl=target/firmware/erase-inside-console.txt
        bash scripts/firmware-run.sh erase --icount 0 --verify --log "$img" \
            --uart target/firmware/uart-erase.bin > "$out" 2>&1 || { cat "$out"; return 1; }
        grep -E "fw\.(arm|acquisition|erase) " "$out"
        grep -q "dropped_samples=0 " "$out" && grep -q "health_samples_dropped=0" "$out" || return 1
        rm -rf target/firmware/fieldlog-erase-csv
        cargo run -q -p frothline-host -- logbook "$img" --page-bytes 4096 --write-unit 4 \
            --out target/firmware/fieldlog-erase-csv --layout firmware-example/capture-surge/layout.toml \
            && [ "$(wc -l < target/firmware/fieldlog-erase-csv/windows.csv)" -gt 1 ] || return 1
        bash scripts/firmware-run.sh erase-inside --icount 0 --log target/firmware/fieldlog-erase-inside.bin \
            --uart target/firmware/uart-erase-inside.bin > "$ctl" 2>&1 || { cat "$ctl"; return 1; }
        grep -E "fw\.(arm|acquisition|erase) " "$ctl"
    }
    check erase erase
    # The measured drop counts of both runs.
    for f in target/firmware/erase-console.txt target/firmware/erase-inside-console.txt; do
        [ -f "$f" ] && echo "      $(grep -o 'schedule=[a-z-]*' "$f") $(grep -o 'dropped_samples=[0-9]*' "$f") $(grep -o 'dropped_samples_in_capture=[0-9]*' "$f") $(grep -o 'arm_ms=[0-9]*' "$f")"
    done
    commands() {
        local gen=(cargo run --release -q --manifest-path firmware-example/capture-gen/Cargo.toml --)
        rm -f target/firmware/settings-kept.nor
        "${gen[@]}" commands-in target/firmware/commands-in.bin \
            && bash scripts/firmware-run.sh commands --icount 0 --settings target/firmware/settings-kept.nor \
                --uart target/firmware/uart-commands.bin --uart-in target/firmware/commands-in.bin \
            && "${gen[@]}" verify-commands target/firmware/uart-commands.bin
    }
    check commands commands
    # Reboot on the settings the commands left in flash: they are loaded, reported, used.
    reboot() {
        local gen=(cargo run --release -q --manifest-path firmware-example/capture-gen/Cargo.toml --)
        local out=target/firmware/boot-console.txt
        bash scripts/firmware-run.sh boot --icount 0 --settings target/firmware/settings-kept.nor \
                --uart target/firmware/uart-boot.bin > "$out" 2>&1
        local rc=$?
        cat "$out"
        [ $rc -eq 0 ] \
            && grep -q "fw.settings loaded store=true records=2 device_id=0x0f1e window=frames window_frames=1000 fixed_tips=1 probe0_leading_air=26000 probe0_leading_water=3000" "$out" \
            && "${gen[@]}" verify-boot target/firmware/uart-boot.bin
    }
    check reboot reboot
    check watch bash scripts/firmware-watch.sh
    check levels bash scripts/firmware-levels.sh
else
    check logger bash scripts/firmware-run.sh logger --icount 0
fi
echo "$pass passed, $fail failed"
[ $fail -eq 0 ]
