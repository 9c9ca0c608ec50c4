#!/usr/bin/env bash
# Build the firmware example and run it in QEMU's mps2-an386 (Cortex-M4F), UART0 (the wire
# frames) routed to a file or to stdout, the semihosting console (fw.* summary lines) on
# stdout; exits with the firmware's own verdict (semihosting exit: 0 pass, 1 fail), or 124
# when the run hits the time limit.
#
# Usage: bash scripts/firmware-run.sh [MODE] [options]
#   MODE            run (default) | adc | overrun | measure | logger | commands | boot | instrument | field
#                   | erase | erase-inside (see firmware-example/src/mps2.rs);
#                   logger builds the field-logger firmware (surge capture, station chain) and
#                   writes the field log's flash image, sent out of UART1, to --log; erase and
#                   erase-inside do the same on a flash whose erases stall as a real part's
#   --uart PATH     UART0 to PATH (default target/firmware/uart-MODE.bin); `stdio` for stdout;
#                   `pty` for a pseudo-terminal a host tool opens (QEMU prints its path)
#   --uart-in PATH  UART0's receiver reads PATH (host commands; mode `commands`)
#   --icount SHIFT  QEMU -icount shift: one instruction = 2^SHIFT ns (default 0: 1000 MIPS;
#                   4 = 62.5 MIPS, a Cortex-M4F at 60-100 MHz, where this pipeline overruns);
#                   `off`: no instruction counting, the board's clock runs in host time
#                   (mode instrument, talking to a host tool in real time)
#   --timeout SEC   wall-clock limit (default 60)
#   --features F    extra cargo features (e.g. defmt-semihosting: decode stdout with defmt-print)
#   --log PATH      logger mode: the flash image (default target/firmware/fieldlog-image.bin)
#   --settings PATH the settings flash (3 x 4 KiB NOR, kept in a file) survives the run in
#                   PATH: loaded from it when it exists, written back after (a reboot of the
#                   emulated board keeps its settings); without it every run starts from a
#                   factory-fresh store
#   --verify        after the run, decode the UART file and check every window result
#                   against a host replay of the same capture (needs the host tool to build);
#                   logger and erase modes: the flash image too (frothline-capture-gen verify-log)
set -uo pipefail
cd "$(dirname "$0")/.."
mode=run uart="" uart_in="" settings="" shift_=0 secs=60 features="" verify=0 log=target/firmware/fieldlog-image.bin
while [ $# -gt 0 ]; do
    case "$1" in
        run|adc|overrun|measure|logger|commands|boot|instrument|field|erase|erase-inside) mode=$1 ;;
        --uart) uart=$2; shift ;;
        --uart-in) uart_in=$2; shift ;;
        --icount) shift_=$2; shift ;;
        --timeout) secs=$2; shift ;;
        --features) features=$2; shift ;;
        --log) log=$2; shift ;;
        --settings) settings=$2; shift ;;
        --verify) verify=1 ;;
        -h|--help) sed -n '2,29p' "$0"; exit 0 ;;
        *) echo "firmware-run: unknown argument $1" >&2; exit 2 ;;
    esac
    shift
done
mkdir -p target/firmware
[ -n "$uart" ] || uart=target/firmware/uart-$mode.bin
case "$uart" in
    stdio) serial=(-serial stdio) ;;
    pty) serial=(-serial pty) ;;
    *) serial=(-serial "file:$uart") ;;
esac
icount=(-icount "shift=$shift_,sleep=off")
[ "$shift_" = off ] && icount=()
fifo_dir=""
if [ -n "$uart_in" ] && [ "$uart" != stdio ]; then
    # A pipe chardev (QEMU 7 has no input file for a file chardev): QEMU reads UART0's
    # input from FIFO.in and writes its output to FIFO.out; cat feeds the one from
    # $uart_in and copies the other into $uart.
    fifo_dir=$(mktemp -d)
    mkfifo "$fifo_dir/uart.in" "$fifo_dir/uart.out"
    cat "$fifo_dir/uart.out" > "$uart" &
    out_pid=$!
    cat "$uart_in" > "$fifo_dir/uart.in" &
    in_pid=$!
    serial=(-chardev "pipe,id=uart0,path=$fifo_dir/uart" -serial chardev:uart0)
fi

capture=firmware-example/capture
second_serial=()
if [ "$mode" = field ]; then
    # The field-logger build; its log is read over UART0 (ReadLog), UART1 unused.
    features="field-logger${features:+,$features}"
    capture=firmware-example/capture-surge
fi
if [ "$mode" = logger ] || [ "$mode" = erase ] || [ "$mode" = erase-inside ]; then
    features="field-logger${features:+,$features}"
    capture=firmware-example/capture-surge
    rm -f "$log"
    second_serial=(-serial "file:$log")
fi

qemu=$(bash scripts/fetch-qemu.sh) || { echo "firmware-run: no QEMU" >&2; exit 2; }
(cd firmware-example && cargo build --release -q ${features:+--features "$features"}) \
    || { echo "firmware-run: build failed" >&2; exit 2; }
elf=firmware-example/target/thumbv7em-none-eabihf/release/frothline-firmware-example

# The firmware opens target/firmware/settings.nor (relative to QEMU's working directory).
rm -f target/firmware/settings.nor
[ -n "$settings" ] && [ -f "$settings" ] && cp "$settings" target/firmware/settings.nor
timeout "$secs" "$qemu" -machine mps2-an386 -nographic -monitor none \
    -semihosting-config "enable=on,target=native,arg=$mode" \
    "${icount[@]}" \
    "${serial[@]}" "${second_serial[@]}" -kernel "$elf"
rc=$?
# Moved back, not copied: a later run without --settings (or firmware-measure.sh, which
# starts QEMU itself) must not find this store and boot on its levels.
if [ -n "$settings" ] && [ -f target/firmware/settings.nor ]; then
    mv target/firmware/settings.nor "$settings"
fi
rm -f target/firmware/settings.nor
if [ -n "$fifo_dir" ]; then
    # The copier of the output ends at QEMU's end of file; give it 5 s at most (it would
    # wait for ever if QEMU never opened the pipe).
    kill "$in_pid" 2>/dev/null
    for _ in $(seq 50); do kill -0 "$out_pid" 2>/dev/null || break; sleep 0.1; done
    kill "$out_pid" 2>/dev/null
    wait 2>/dev/null
    rm -rf "$fifo_dir"
fi
if [ $rc -eq 124 ]; then
    echo "firmware-run: no exit within ${secs}s (killed)" >&2
    exit 124
fi
if [ $rc -eq 0 ] && [ $verify -eq 1 ] && [ "$uart" != stdio ]; then
    d=$capture
    # The logger build's device status frames must show the logger idle, armed, capturing.
    logger_flag=()
    { [ "$mode" = logger ] || [ "$mode" = erase ]; } && logger_flag=(--logger)
    cargo run --release -q --manifest-path firmware-example/capture-gen/Cargo.toml -- \
        verify-uart "$d/capture.wav" "$d/layout.toml" 10ms "$uart" "${logger_flag[@]}" || rc=1
    if [ "$mode" = logger ] || [ "$mode" = erase ]; then
        # PRE_TRIGGER: keep equal to firmware-example/src/field_log.rs PRE_TRIGGER_FRAMES.
        cargo run --release -q --manifest-path firmware-example/capture-gen/Cargo.toml -- \
            verify-log "$d/capture.wav" "$d/layout.toml" 10ms "$log" 6 || rc=1
    fi
fi
exit $rc
