#!/usr/bin/env bash
# Runs the hostile-spec property tests with many cases (default one million per strategy:
# arbitrary text, mutated specs, extreme values) and reports the total.
#   scripts/fuzz-specs.sh [CASES]
# A coverage-guided target for cargo-fuzz lives in fuzz/ (needs a nightly-capable compiler).
set -euo pipefail
cd "$(dirname "$0")/.."
cases=${1:-1000000}
export CARGO_TARGET_DIR="${CARGO_TARGET_DIR:-$HOME/.cache/kiln-target}"
start=$(date +%s)
KILN_FUZZ_CASES=$cases cargo test --release --test cli hostile -- --test-threads 3
echo "fuzz-specs: $((3 * cases)) spec inputs (3 strategies × $cases), 0 panics, $(( $(date +%s) - start )) s"
