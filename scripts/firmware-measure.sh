#!/usr/bin/env bash
# Measure the firmware example against its budget (docs/firmware.md) for 8 dual-tip probes
# (16 channels at 20 kHz): <= 20 instructions per channel-sample for the full pipeline at
# practical settings (50 ms windows, levels learnt and tracked), <= 40 at the example's
# short-window settings, RAM <= 48 KiB, flash <= 96 KiB; and the fraction of time awake
# (the main loop sleeps in WFI between blocks).
#
# - Instructions: QEMU with `-icount shift=0` (one instruction = 1 ns of virtual time; the
#   DWT cycle counter reads 0 under QEMU), the firmware times its own stages with the
#   CMSDK TIMER0 (25 MHz: one tick = 40 instructions, checked by a calibration loop of
#   known length) and prints the tick counts (mode `measure`: unpaced, the chain alone,
#   three streaming variants and the chain at practical settings (50 ms windows, 0.2 s
#   learning period, the capture played 17 times); mode `run`: paced, for the interrupt's
#   share and the idle time).
# - RAM: .data + .bss + .uninit of the ELF, plus the stack high-water mark the firmware
#   measures itself (stack painted at boot, scanned at the end; the start-up peak, before the
#   chain runs, is reported apart; the chain is configured in place in its static).
# - Flash: .vector_table + .text + .rodata + .data, of the emulated build (which embeds the
#   capture: reported with and without it) and of the NUCLEO-F411RE build (no capture).
# Section sizes come from llvm-size (or readelf -S from binutils).
#
# Usage: bash scripts/firmware-measure.sh [--strict]   (--strict: exit 1 when a target is missed)
set -uo pipefail
cd "$(dirname "$0")/.."
strict=0
[ "${1:-}" = "--strict" ] && strict=1
out=target/firmware
mkdir -p "$out"
qemu=$(bash scripts/fetch-qemu.sh) || exit 2

echo "building the emulated firmware (mps2-an386) and the board firmware (NUCLEO-F411RE)..." >&2
(cd firmware-example && cargo build --release -q) || exit 2
(cd firmware-example && CARGO_TARGET_DIR=target/board cargo build --release -q \
    --no-default-features --features board-stm32f4) || exit 2
emu=firmware-example/target/thumbv7em-none-eabihf/release/frothline-firmware-example
board=firmware-example/target/board/thumbv7em-none-eabihf/release/frothline-firmware-example

sections() { # ELF -> "name size" lines (decimal)
    if command -v llvm-size >/dev/null 2>&1; then
        llvm-size -A -d "$1" | awk 'NR > 2 && NF >= 2 { print $1, $2 }'
    else
        readelf -S -W "$1" | awk '/^ *\[ *[0-9]+\]/ { sub(/^ *\[ *[0-9]+\] */, ""); print $1, strtonum("0x" $5) }'
    fi
}
sections "$emu" > "$out/sections-emulated.txt"
sections "$board" > "$out/sections-board.txt"

# The firmware opens target/firmware/settings.nor when it exists: measure on a
# factory-fresh store (no fixed levels or window left by another check).
rm -f target/firmware/settings.nor
for m in measure run; do
    timeout 120 "$qemu" -machine mps2-an386 -nographic -monitor none \
        -semihosting-config "enable=on,target=native,arg=$m" -icount shift=0,sleep=off \
        -serial "file:$out/uart-measure-$m.bin" -kernel "$emu" > "$out/measure-$m.txt"
    rc=$?
    if [ $rc -ne 0 ]; then
        echo "firmware-measure: the $m run failed (exit $rc):" >&2
        cat "$out/measure-$m.txt" >&2
        exit 1
    fi
done

python3 - "$out" "$strict" <<'PY'
import re, sys
out, strict = sys.argv[1], sys.argv[2] == "1"

def kv(path):
    d = {}
    for line in open(path):
        parts = line.split()
        if not parts or not parts[0].startswith("fw."):
            continue
        tag = parts[0][3:]
        if tag == "streaming":
            fields = dict(p.split("=", 1) for p in parts[1:] if "=" in p)
            d.setdefault("streaming", {})[fields["variant"]] = fields
            continue
        if tag == "profile_fit":
            fields = dict(p.split("=", 1) for p in parts[1:] if "=" in p)
            d.setdefault("profile_fit", {})[fields["points"]] = fields
            continue
        for p in parts[1:]:
            if "=" in p:
                k, v = p.split("=", 1)
                d[f"{tag}.{k}"] = v
    return d

def secs(path):
    return {n: int(s) for n, s in (l.split() for l in open(path)) if s.isdigit()}

m, r = kv(f"{out}/measure-measure.txt"), kv(f"{out}/measure-run.txt")
ipt = int(m["calibration.instructions"]) / int(m["calibration.ticks"])
frames, ch = int(m["acquisition.frames_pushed"]), int(m["timing.channels"])
samples = frames * ch
per = lambda ticks, n=samples: int(ticks) * ipt / n
cfg = open("firmware-example/capture/config.rs").read()
cap_frames = int(re.search(r"FRAMES: usize = (\d+)", cfg).group(1))
cap_ch = int(re.search(r"CHANNELS: u8 = (\d+)", cfg).group(1))
window = int(re.search(r"WindowPolicy::Frames\((\d+)\)", cfg).group(1))
capture_bytes = cap_frames * cap_ch * 2

push = per(m["timing.push_ticks"])
# The self-check digest (emulated test builds only: a board runs none) is timed apart and
# left out of the pipeline's figures.
digest = per(m.get("timing.digest_ticks", "0"))
records = per(m["timing.records_ticks"]) - digest
st = m["streaming"]
whole = per(st["whole"]["push_ticks"])
fixed = per(st["whole-fixed"]["push_ticks"])
lead_only = per(st["whole-fixed-leading"]["push_ticks"])
pr = st["practical"]
# Learning done: the blocks after the first learning period (timed apart by the firmware).
practical = (int(pr["push_ticks"]) + int(pr["finish_ticks"])) * ipt / (int(pr["frames"]) * int(pr["channels"]))
pr_first_frames = int(pr.get("first_period_frames", "0"))
practical_first = (int(pr.get("first_period_ticks", "0")) * ipt / (pr_first_frames * int(pr["channels"]))
                   if pr_first_frames else 0.0)
practical_all = ((int(pr["push_ticks"]) + int(pr["finish_ticks"]) + int(pr.get("first_period_ticks", "0"))) * ipt
                 / ((int(pr["frames"]) + pr_first_frames) * int(pr["channels"])))
# The same practical run with fixed levels (no learners): learning done, after the first period.
pf = st.get("practical-fixed")
practical_fixed = ((int(pf["push_ticks"]) + int(pf["finish_ticks"])) * ipt / (int(pf["frames"]) * int(pf["channels"]))
                   if pf else None)
# Records and wire work scale with the windows: the example's share, per window, at 50 ms.
practical_records = records * window / 1000.0
nrec = int(m["result.records"])
per_window = (int(m["timing.push_ticks"]) - int(st["whole"]["push_ticks"])) * ipt / max(nrec, 1)
rframes = int(r["acquisition.frames_pushed"]) * int(r["timing.channels"])
isr = int(r["timing.isr_ticks"]) * ipt / rframes
busy_ticks = int(r["timing.total_ticks"]) - int(r["timing.idle_ticks"])
busy = busy_ticks * ipt / rframes
pipeline = push + records + isr

e, b = secs(f"{out}/sections-emulated.txt"), secs(f"{out}/sections-board.txt")
flash = lambda s: sum(s.get(k, 0) for k in (".vector_table", ".text", ".rodata", ".data"))
static = lambda s: sum(s.get(k, 0) for k in (".data", ".bss", ".uninit"))
stack_run, stack_init = int(m["memory.stack_run_bytes"]), int(m["memory.stack_init_bytes"])
KiB = 1024

print("firmware example, 8 dual-tip probes (16 channels), 20 kHz, %d-frame (%.0f ms) windows" % (window, window / 20.0))
print("\n# instructions per channel-sample (QEMU -icount shift=0; %.0f instructions per timer tick)" % ipt)
rows = [
    ("chain push, as configured (learnt levels, %d-frame windows)" % window, push),
    ("  of which streaming: one whole window, learnt levels", whole),
    ("  of which streaming: one whole window, fixed levels", fixed),
    ("  per-window work (closing %d probe-windows: %.0f instructions each)" % (nrec, per_window), push - whole),
    ("  learning (400-frame period)", whole - fixed),
    ("  trailing tips' statistics + pair correlation (fixed levels, whole window)", fixed - lead_only),
    ("  phase detection + leading-tip statistics (fixed levels, whole window)", lead_only),
    ("records: wire results, health, link", records),
    ("  (not counted: the self-check digest of the emulated test build)", digest),
    ("acquisition interrupt (32-frame bursts as from the board's DMA, paced run)", isr),
    ("full pipeline (chain + records + interrupt)", pipeline),
    ("main loop busy time in the paced run (all of it)", busy),
]
for name, v in rows:
    print("  %-82s %8.1f" % (name, v))
print("  at practical settings: 50 ms windows, 0.2 s learning period, learnt levels")
print("    (the capture played %d times: %d frames after the first learning period, %d in it)"
      % ((int(pr["frames"]) + pr_first_frames) // cap_frames, int(pr["frames"]), pr_first_frames))
for name, v in [
    ("    chain push during the first learning period (no levels yet, every 4th frame learnt)", practical_first),
    ("    chain push over the whole run, the first learning period included", practical_all),
    ("    chain push, learning done (after the first period)", practical),
    ("    + records scaled to 50 ms windows + interrupt", practical + practical_records + isr),
]:
    print("  %-82s %8.1f" % (name, v))
cpu = pipeline * samples / frames * 20000 / 1e6
print("  -> at 20 kHz x 16 channels the pipeline needs %.0f million instructions per second" % (cpu))

# The parts at practical settings: the streaming of fixed levels, the per-window work at one
# window per 1000 frames, and what the learner adds (the rest of the measured push).
pw_frames = 1000
practical_windows = per_window * (ch // 2) / (pw_frames * ch)
practical_learning = practical - fixed - practical_windows
practical_full = practical + practical_records + isr
print("  parts at practical settings (per channel-sample):")
for name, v in [
    ("    streaming, fixed levels (phase detection, tip statistics, pair correlation)", fixed),
    ("    per-window work (%.0f instructions per probe-window, one per %d frames)" % (per_window, pw_frames), practical_windows),
    ("    level learner (tracking the levels it learnt; the rest of the push)", practical_learning),
] + ([
    ("      of which the learners themselves (learnt against fixed levels, same settings)", practical - practical_fixed),
    ("      of which the rest (the fixed-level practical run against streaming + per-window work)", practical_learning - (practical - practical_fixed)),
] if practical_fixed is not None else []) + [
    ("    records scaled to 50 ms windows", practical_records),
    ("    acquisition interrupt", isr),
    ("    full pipeline at practical settings", practical_full),
]:
    print("  %-82s %8.1f" % (name, v))

def line_of(tag):
    for l in open(f"{out}/measure-measure.txt"):
        if l.startswith("fw." + tag + " "):
            return {a: int(b) for a, b in (p.split("=", 1) for p in l.split()[1:])}
    return None
la, le = line_of("lag_analysis"), line_of("learning")
if la and le:
    print("\n# costs of single parts (instructions)")
    closes = max(la["closes"], 1)
    print("  %-82s %8.0f" % ("one probe's window close with its lag analysis (61 lags, 1000 frames, 20 bubbles)", la["ticks"] * ipt / closes))
    print("  %-82s %8.0f" % ("  closing the sums alone (clip, prefix sums, a copy of the sums, restart)", la["close_ticks"] * ipt / closes))
    print("  %-82s %8.0f" % ("  analysing such a copy (the coefficients and the derived results)", la["analyse_ticks"] * ipt / closes))
    fed = le["reps"] * ((le["frames"] + 3) // 4)
    print("  %-82s %8.1f" % ("level learner: one fed sample (histogram bin, offset, min/max)", le["observe_ticks"] * ipt / fed))
    print("  %-82s %8.0f" % ("level learner: one period's decision (Otsu split, modes)", le["decide_ticks"] * ipt / le["reps"]))
    print("  %-82s %8.1f" % ("one tip's detector over the capture, per sample: learning (400-frame period)",
                             le["detect_learnt_ticks"] * ipt / cap_frames))
    print("  %-82s %8.1f" % ("  ... with fixed levels", le["detect_fixed_ticks"] * ipt / cap_frames))

total_run = int(r["timing.total_ticks"])
awake = busy_ticks / total_run if total_run else 0.0
mips_practical = practical_full * samples / frames * 20000 / 1e6
print("\n# sleep (WFI between blocks), paced run of the capture at 20 kHz x 16 channels")
print("  awake %.1f %% of the run (the emulated core runs 1000 million instructions per second)" % (100 * awake))
print("  on a 100 MHz Cortex-M4 at one instruction per cycle: awake %.0f %% at the example's settings, %.0f %% at practical settings"
      % (cpu, mips_practical))

pf = m.get("profile_fit", {})
if pf:
    print("\n# profile fit, once per slice of a station chain (instructions per fit)")
    for key, name in [("weighted_6", "six probes 11 mm apart, three below Y90, standard errors (3 passes per model)"),
                      ("plain_8", "eight probes, no standard errors (1 pass per model)")]:
        if key in pf:
            per_fit = int(pf[key]["ticks"]) * ipt / int(pf[key]["fits"])
            # A 50 ms slice at 20 kHz of 16 channels holds 16 000 channel-samples.
            print("  %-82s %8.0f  (%.2f per channel-sample at 50 ms slices)" % (name, per_fit, per_fit / 16000))

print("\n# RAM (bytes)")
print("  emulated build: static %d (.data %d + .bss %d), stack while running %d -> %d (%.1f KiB)"
      % (static(e), e.get(".data", 0), e.get(".bss", 0), stack_run, static(e) + stack_run, (static(e) + stack_run) / KiB))
print("  of the static RAM: the chain GenericChain<8, 64> (no raw sums kept) %s, one record %s, acquisition blocks 2 x %s"
      % (m["memory.chain_bytes"], m["memory.record_bytes"], m["memory.block_bytes"]))
print("  stack at start-up (the chain is configured in place, in its static): %d" % stack_init)
print("  board build (NUCLEO-F411RE, 128 KiB SRAM): static %d (.bss %d)" % (static(b), b.get(".bss", 0)))

print("\n# flash (bytes)")
print("  emulated build: %d with the capture (%d bytes), %d without" % (flash(e), capture_bytes, flash(e) - capture_bytes))
print("  board build (no capture, no self-check digest): %d" % flash(b))

ram = static(e) + stack_run
targets = [
    ("<= 20 instructions per channel-sample (full pipeline, practical)", practical_full <= 20, "%.1f" % practical_full),
    ("<= 40 instructions per channel-sample (full pipeline, example)", pipeline <= 40, "%.1f" % pipeline),
    ("RAM <= 48 KiB (static + running stack)", ram <= 48 * KiB, "%d" % ram),
    ("flash <= 96 KiB without the capture", flash(e) - capture_bytes <= 96 * KiB, "%d" % (flash(e) - capture_bytes)),
    ("flash <= 96 KiB with the capture", flash(e) <= 96 * KiB, "%d" % flash(e)),
]
print("\n# targets")
missed = 0
for name, ok, val in targets:
    print("  %-66s %-6s %s" % (name, "met" if ok else "MISSED", val))
    missed += not ok
if missed:
    print("\n  largest costs: per-window work %.0f, streaming %.0f (learning %.0f) instructions per"
          " channel-sample; RAM: the chain's %s bytes" % (push - whole, whole, whole - fixed, m["memory.chain_bytes"]))
sys.exit(1 if (strict and missed) else 0)
PY
