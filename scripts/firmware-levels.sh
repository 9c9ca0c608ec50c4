#!/usr/bin/env bash
# The levels round trip on the emulated firmware, across a reboot, as a user does it on a
# board's serial port:
#   1. the firmware boots as an instrument (mode instrument, on a pty) on a factory-fresh
#      settings store kept in a file; `frothline watch --start-run` starts a run (a device
#      reports its tips only from the windows of a run);
#   2. `frothline tipcheck --port PTY --set-levels` reads each tip's learnt levels from the
#      tip-health frames (kind 0x09) and fixes them with one SetLevels per tip: every one
#      must be acked, and the levels-in-use frame (kind 0x0A) the firmware sends after them
#      must show each tip fixed at the levels set (else tipcheck flags it not_kept);
#   3. the board is powered off (QEMU ends) and booted again on the same store; without a
#      run (no window closes, so no tip-health report comes) `frothline tipcheck --port
#      PTY` reads the levels in use back from the levels-in-use frame that follows the
#      description: every tip fixed, at the levels set.
# Needs the host tool (cargo build) and QEMU (scripts/fetch-qemu.sh). Exits non-zero on
# any failure.
set -uo pipefail
cd "$(dirname "$0")/.."
out=target/firmware/levels
rm -rf "$out"
mkdir -p "$out"
store=$out/settings.nor
layout=firmware-example/capture/layout.toml
cargo build -q -p frothline-host || exit 2
bin=target/debug/frothline
fail() { echo "firmware-levels: FAIL: $*"; exit 1; }

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

# Step 1 and 2: a run, then the levels it learnt fixed.
boot "$out/console-1.txt" 16
echo "instrument on $pts"
"$bin" watch --port "$pts" --plain --duration 2 --start-run levels1 \
    --archive "$out/session-1" > "$out/watch-1.txt" 2>&1 || fail "watch --start-run (first boot)"
"$bin" tipcheck --port "$pts" --layout "$layout" --listen 3 --set-levels > "$out/tipcheck-1.txt" 2>&1
rc=$?
wait "$boot_pid"
cat "$out/tipcheck-1.txt"
grep '^fw\.settings' "$out/console-1.txt"
[ $rc -eq 0 ] || fail "tipcheck --set-levels"

# Step 3: power cycle on the same store, no run, the levels read back.
boot "$out/console-2.txt" 8
"$bin" tipcheck --port "$pts" --layout "$layout" --listen 3 > "$out/tipcheck-2.txt" 2>&1
rc=$?
wait "$boot_pid"
cat "$out/tipcheck-2.txt"
grep '^fw\.settings' "$out/console-2.txt"
[ $rc -eq 0 ] || fail "tipcheck after the reboot"

python3 - "$out/tipcheck-1.txt" "$out/tipcheck-2.txt" <<'PY' || fail "levels round trip"
import sys

def tips(path):
    """probe, tip -> (air, water, rest of the row: levels, set, flags) from tipcheck's
    table."""
    rows = {}
    for line in open(path):
        f = line.split()
        if len(f) >= 6 and f[1] in ("leading", "trailing") and f[2].lstrip("-").isdigit():
            rows[(f[0], f[1])] = (int(f[2]), int(f[3]), f[6:])
    return rows

set_, back = tips(sys.argv[1]), tips(sys.argv[2])
assert set_, "the first tipcheck reported no tip"
for k, (air, water, rest) in sorted(set_.items()):
    assert rest[:2] == ["fixed", "ack"] and "not_kept" not in rest, \
        f"{k}: SetLevels not acked and kept ({' '.join(rest)})"
print(f"set, acked and reported fixed: {len(set_)} tips")
for k, (air, water, _) in sorted(set_.items()):
    assert k in back, f"{k}: no levels reported after the reboot"
    b = back[k]
    assert (b[0], b[1]) == (air, water), f"{k}: set air={air} water={water}, read back air={b[0]} water={b[1]}"
    assert b[2][:1] == ["fixed"], f"{k}: not reported fixed after the reboot ({' '.join(b[2])})"
    print(f"{k[0]} {k[1]}: air={air} water={water} set, read back fixed and equal after the reboot, no run")
PY
grep -q "fw.settings loaded store=true .*fixed_tips=$(grep -c ' ack ' "$out/tipcheck-1.txt")" \
    "$out/console-2.txt" || fail "the reboot did not load every fixed level"
echo "firmware-levels: pass"
