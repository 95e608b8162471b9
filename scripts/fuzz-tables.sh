#!/usr/bin/env bash
# Damaged tables, many times over: mutated copies of a cells.parquet (a bit flipped in the
# footer or anywhere, a byte changed, a truncation) read through the reader fit, plot and
# compare use, with its manifest beside it and without. Passes only with no panic, no abort
# and no mutated file read with changed numbers.
#   scripts/fuzz-tables.sh [MUTATIONS]     (per mode; default 10000)
set -euo pipefail
cd "$(dirname "$0")/.."
n=${1:-10000}
export CARGO_TARGET_DIR="${CARGO_TARGET_DIR:-$HOME/.cache/kiln-target}"
start=$(date +%s)
KILN_TABLE_MUTATIONS=$n cargo test --release --test cli damage::mutated -- --nocapture 2>&1 \
    | grep -E "mutations with|test result"
echo "fuzz-tables: $((2 * n)) mutated tables, 0 panics, $(( $(date +%s) - start )) s"
