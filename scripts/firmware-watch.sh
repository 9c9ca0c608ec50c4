#!/usr/bin/env bash
# The emulated firmware as an instrument on a pseudo-terminal, driven by `frothline watch`
# as a user drives a board on a serial port:
#   1. the firmware boots (mode instrument: the capture replayed in a loop, no run until a
#      host starts one) on a factory-fresh settings store kept in a file;
#   2. `frothline watch PTY --start-run bench1 --set-window 100ms` sets the window (stored
#      in flash), starts the labelled run (the host's UTC in the StartRun and a SetClock
#      at connect), and records the session;
#   3. the board is powered off (QEMU ends) and booted again on the same store: it reports
#      the stored 100 ms window (2000 frames at 20 kHz) at power-on without being told;
#   4. the field-logger build, left powered after its surge run (mode field), has its log
#      read over the link by `frothline logbook --port` (ReadLog / LogChunk), as from a
#      board: the same windows.csv as from the flash image of the logger check.
# Checks: windows.csv of step 2 has rows of run 1 labelled bench1 in 0.1 s windows, the
# firmware dated the run (a UTC clock set), and the reboot reports the stored window.
# Needs the host tool (cargo build) and QEMU (scripts/fetch-qemu.sh). Exits non-zero on
# any failure.
set -uo pipefail
cd "$(dirname "$0")/.."
out=target/firmware/watch
rm -rf "$out"
mkdir -p "$out"
store=$out/settings.nor
cargo build -q -p frothline-host || exit 2
bin=target/debug/frothline
fail() { echo "firmware-watch: FAIL: $*"; exit 1; }

# Boot the instrument in the background on a pty; its console goes to $1. QEMU ends by
# itself after $2 seconds (the power-off). Sets boot_pid and pts.
boot() {
    local console=$1 secs=$2
    bash scripts/firmware-run.sh instrument --icount off --uart pty --timeout "$secs" \
        --settings "$store" > "$console" 2>&1 &
    boot_pid=$!
    pts=""
    for _ in $(seq 600); do
        pts=$(grep -o '/dev/pts/[0-9]*' "$console" | head -1)
        [ -n "$pts" ] && break
        sleep 0.1
    done
    [ -n "$pts" ] || { cat "$console"; fail "QEMU gave no pty"; }
}

boot "$out/console-1.txt" 14
echo "instrument on $pts"
"$bin" watch --port "$pts" --plain --duration 5 --start-run bench1 --set-window 100ms \
    --archive "$out/session" > "$out/watch-1.txt" 2>&1
echo "watch exit $?"
wait "$boot_pid"
cat "$out/console-1.txt" | grep '^fw\.'
csv=$(find "$out/session" -name windows.csv | head -1)
[ -n "$csv" ] || fail "no windows.csv"
python3 - "$csv" <<'EOF' || fail "windows.csv"
import csv, sys
rows = list(csv.DictReader(open(sys.argv[1])))
runs = [r for r in rows if r.get("run_label") == "bench1"]
print(f"windows.csv: {len(rows)} rows, {len(runs)} of run bench1")
assert runs, "no rows of run bench1"
durs = sorted({round(float(r["window_end_s"]) - float(r["window_start_s"]), 4) for r in runs})
print(f"window lengths of run bench1, s: {durs}")
assert 0.1 in durs, "no 0.1 s window"
assert max(durs) <= 0.1 + 1e-9, "a window longer than 0.1 s"
EOF
grep -q "fw.settings stored store=true .*window=frames window_frames=2000" "$out/console-1.txt" \
    || fail "the window was not stored"
grep -q "fw.run run=1 .*utc_set=true" "$out/console-1.txt" || fail "the run was not dated"

# Power cycle: boot again on the same store.
boot "$out/console-2.txt" 6
"$bin" watch --port "$pts" --plain --duration 2 --archive "$out/session-2" > "$out/watch-2.txt" 2>&1
wait "$boot_pid"
grep '^fw\.settings' "$out/console-2.txt"
grep -q "fw.settings loaded store=true records=1 .*window=frames window_frames=2000" \
    "$out/console-2.txt" || fail "the reboot did not load the stored window"
grep -q "window 100 ms" "$out/watch-2.txt" || fail "the reboot did not report the stored window"
echo "firmware-watch: instrument pass"

# The field-logger build left powered after its run (mode field): its log read over the
# link, as from a board, into the same CSV a flash image gives.
console=$out/console-field.txt
bash scripts/firmware-run.sh field --icount 0 --uart pty --timeout 60 > "$console" 2>&1 &
field_pid=$!
pts=""
for _ in $(seq 1200); do
    grep -q '^fw.field' "$console" && pts=$(grep -o '/dev/pts/[0-9]*' "$console" | head -1)
    [ -n "$pts" ] && break
    sleep 0.1
done
[ -n "$pts" ] || { cat "$console"; fail "the field build did not finish its run"; }
"$bin" logbook --port "$pts" --out "$out/fieldlog" --page-bytes 4096 --write-unit 4 \
    --layout firmware-example/capture-surge/layout.toml > "$out/logbook.txt" 2>&1
rc=$?
kill "$field_pid" 2>/dev/null
cat "$out/logbook.txt"
[ $rc -eq 0 ] || fail "logbook --port"
grep '^fw\.logger\|^fw\.result' "$console"
rows=$(($(wc -l < "$out/fieldlog/windows.csv") - 1))
echo "field log over the link: $rows window rows"
[ "$rows" -gt 0 ] || fail "no window rows in the log read over the link"
# The same log as the image the logger check sent out of UART1 (firmware-test.sh runs it
# first): the same CSV, byte for byte.
ref=target/firmware/fieldlog-csv/windows.csv
if [ -f "$ref" ]; then
    cmp "$ref" "$out/fieldlog/windows.csv" || fail "the log read over the link differs from the image's"
    echo "field log over the link: windows.csv equal to the flash image's ($ref)"
fi
echo "firmware-watch: field log pass"
