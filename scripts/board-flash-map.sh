#!/usr/bin/env bash
# Link the two NUCLEO-F411RE builds (plain and field logger) and check their flash map
# (docs/firmware.md, "The field logger on the board"): every byte loaded into flash lies in
# sector 0 (the vector table, 0x0800_0000..0x0800_4000) or in sectors 4 and 5 (the code,
# 0x0801_0000..0x0804_0000), never in the settings store (sectors 1 to 3) or the field log
# (sectors 6 and 7), whose erases would otherwise erase code. Reads the ELF's program
# headers (readelf, binutils): a segment's load address and file size.
#
# Usage: bash scripts/board-flash-map.sh
set -euo pipefail
cd "$(dirname "$0")/.."
command -v readelf >/dev/null || { echo "board-flash-map: readelf (binutils) is needed" >&2; exit 2; }
fail=0
for features in board-stm32f4 board-stm32f4,field-logger; do
    (cd firmware-example && CARGO_TARGET_DIR=target/board cargo build --release -q \
        --no-default-features --features "$features")
    elf=firmware-example/target/board/thumbv7em-none-eabihf/release/frothline-firmware-example
    # LOAD segments: PhysAddr (load address) and FileSiz, hex.
    while read -r phys size; do
        start=$((phys)); end=$((phys + size))
        [ "$size" = "0x00000" ] && continue
        if [ $start -ge $((0x08000000)) ] && [ $end -le $((0x08004000)) ]; then zone="sector 0"
        elif [ $start -ge $((0x08010000)) ] && [ $end -le $((0x08040000)) ]; then zone="sectors 4-5"
        elif [ $start -ge $((0x20000000)) ]; then continue
        else zone="OUTSIDE"; fail=1; fi
        printf '%-28s load %#010x..%#010x  %s\n' "$features" "$start" "$end" "$zone"
    done < <(readelf -l -W "$elf" | awk '$1 == "LOAD" { print $4, $5 }')
done
if [ $fail -ne 0 ]; then
    echo "board-flash-map: a segment lies outside sector 0 and sectors 4-5 (memory-nucleo-f411re.x)" >&2
    exit 1
fi
echo "board-flash-map: both builds keep sectors 1-3 (settings) and 6-7 (field log) free"
