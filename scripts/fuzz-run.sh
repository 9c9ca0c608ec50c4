#!/usr/bin/env bash
# Run each fuzz target for a fixed time, one after the other (the machines have two cores),
# with libFuzzer's coverage instrumentation on the stable toolchain (no cargo-fuzz needed;
# see fuzz/README.md), and print the inputs each ran. New inputs go to a scratch folder, so
# the committed seed corpus stays as it is.
# Usage: bash scripts/fuzz-run.sh [SECONDS_PER_TARGET] [TARGET...]
#        (default 60 s; targets: decoder wav_reader layout archive)
set -euo pipefail
cd "$(dirname "$0")/../fuzz"
secs=${1:-60}
shift || true
targets=("$@")
[ ${#targets[@]} -gt 0 ] || targets=(decoder wav_reader layout archive)
export RUSTFLAGS="--cfg fuzzing -Cpasses=sancov-module -Cllvm-args=-sanitizer-coverage-level=4 \
-Cllvm-args=-sanitizer-coverage-inline-8bit-counters \
-Cllvm-args=-sanitizer-coverage-pc-table -Cllvm-args=-sanitizer-coverage-trace-compares \
-Cdebug-assertions -Coverflow-checks"
triple=x86_64-unknown-linux-gnu
cargo build --release --target "$triple" --target-dir target/sancov "${targets[@]/#/--bin=}"
scratch=$(mktemp -d)
trap 'rm -rf "$scratch"' EXIT
for t in "${targets[@]}"; do
    mkdir -p "$scratch/$t"
    log="$scratch/$t.log"
    # -rss_limit_mb bounds memory per run, -timeout the time of one input.
    "target/sancov/$triple/release/$t" "$scratch/$t" "corpus/$t" \
        -max_total_time="$secs" -print_final_stats=1 -rss_limit_mb=512 -timeout=10 \
        >"$log" 2>&1 || { tail -40 "$log"; echo "fuzz target $t FAILED" >&2; exit 1; }
    runs=$(awk '/stat::number_of_executed_units/ {print $2}' "$log")
    peak=$(awk '/stat::peak_rss_mb/ {print $2}' "$log")
    printf '%-11s %4d s  %10d inputs  peak RSS %s MB  no failure\n' "$t" "$secs" "$runs" "$peak"
done
