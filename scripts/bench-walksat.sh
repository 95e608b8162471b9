#!/usr/bin/env bash
# Speed of kiln's `walksat` beside a minimal C loop of the same rule and the same clause state
# (scripts/perf/walksat.c, built here with the shared references' common.h and
# gcc -O3 -march=native), measured in one run on this machine.
#
#   scripts/bench-walksat.sh [RUNS=3] [FLIPS_PER_VARIABLE=2]
#
# Both sides: random 3-SAT with n = 10⁶ variables at α = 4.0 (each its own formula of the same
# law), noise 0.567, FLIPS_PER_VARIABLE·n flips from a random assignment, one thread; ns per
# flip with the initial clause state included. The walk is bound by random reads of clause
# state (a few hundred MiB), so the ratio measures the inner loop and its memory layout. The C
# program and kiln alternate, RUNS rounds; the table shows medians with min–max and the ratio
# kiln time / C time (< 1: kiln faster). Written to results/bench/walksat-<UTC>.txt.
set -euo pipefail
cd "$(dirname "$0")/.."
runs=${1:-3}
flips=${2:-2}
ref=${PERF_REF:-../shared/perf-ref}
[ -f "$ref/common.h" ] || { echo "bench-walksat: no common.h at $ref (set PERF_REF)"; exit 2; }
export CARGO_TARGET_DIR="${CARGO_TARGET_DIR:-$HOME/.cache/kiln-target}"
out=$(mktemp -d)
trap 'rm -rf "$out"' EXIT
gcc -O3 -march=native -I"$ref" scripts/perf/walksat.c -o "$out/walksat" -lm
cargo build --release --quiet --example bench_kernels
kb="$CARGO_TARGET_DIR/release/examples/bench_kernels"
get() { tr ' ' '\n' | sed -n "s/^$1=//p" | head -1; }
stats() { sort -g | awk '{v[NR]=$1} END {printf "%s %s %s", v[int((NR+1)/2)], v[1], v[NR]}'; }
calc() { awk "BEGIN {printf \"%.3f\", $1}"; }
c=""; k=""
for r in $(seq 1 "$runs"); do
    c+=" $("$out/walksat" 1000000 4.0 0.567 "$flips" "$r" | get ns_per_flip)"
    k+=" $(RAYON_NUM_THREADS=1 "$kb" 0 "$flips" walksat "$r" | grep kiln_walksat | get ns_per_flip)"
done
col() { echo "$1" | tr ' ' '\n' | grep . | stats; }
read -r c_m c_lo c_hi <<<"$(col "$c")"; read -r k_m k_lo k_hi <<<"$(col "$k")"
mkdir -p results/bench
report=results/bench/walksat-$(date -u +%Y%m%dT%H%M%SZ).txt
{
    echo "kiln walksat benchmark $(date -u +%FT%TZ) on $(hostname), $(nproc) cores, git $(git describe --always --dirty 2>/dev/null || echo '?')"
    echo "runs: $runs; $flips flips per variable; medians (min-max); ratio = kiln time / C time (target in brackets)"
    echo
    printf '%-40s %-30s %-30s %s\n' kernel kiln "C walk" ratio
    printf '%-40s %-30s %-30s %s\n' "walksat 3-SAT n=1e6 a=4.0 (ns/flip)" "$k_m ($k_lo-$k_hi)" \
        "$c_m ($c_lo-$c_hi)" "$(calc "$k_m / $c_m") [<= 1.3]"
    echo
    echo "raw: C ns/flip:$c; kiln ns/flip:$k"
} | tee "$report"
echo "wrote $report"
