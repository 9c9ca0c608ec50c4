#!/usr/bin/env bash
# Feed the wire decoder at least one million random and mutated inputs (no cargo-fuzz
# needed) and print how many ran, how many frames were accepted, and how long it took.
# Fails if any input made it panic or accept a corrupted frame. Coverage-guided fuzzing
# with libFuzzer: see fuzz/README.md.
set -euo pipefail
cd "$(dirname "$0")/.."
out=$(cargo test --release -q -p frothline-core --test wire -- --ignored soak --nocapture 2>&1)
echo "$out" | sed -n 's/^\(soak: .*\)$/\1/p'
echo "$out" | grep -q '^test result: ok' || { echo "$out"; exit 1; }
