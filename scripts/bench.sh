#!/usr/bin/env bash
# Side-by-side speed of kiln's dense SK kernels and the minimal C references
# (../shared/perf-ref or $PERF_REF), built with gcc -O3 -march=native, in one run.
# Prints a table of ratios (kiln time / reference time; < 1 means kiln is faster) and writes
# it to results/bench/. Covers SK descent and dense annealing at n = 2048 so far; the sparse,
# matvec and eigenvector kernels come with the models and algorithms that need them.
set -euo pipefail
cd "$(dirname "$0")/.."
ref=${PERF_REF:-../shared/perf-ref}
[ -f "$ref/sk_greedy.c" ] || { echo "bench: no reference programs at $ref (set PERF_REF)"; exit 2; }
export CARGO_TARGET_DIR="${CARGO_TARGET_DIR:-$HOME/.cache/kiln-target}"
out=$(mktemp -d)
gcc -O3 -march=native "$ref/sk_greedy.c" -o "$out/sk_greedy" -lm
gcc -O3 -march=native "$ref/sa_dense.c" -o "$out/sa_dense" -lm
cargo build --release --quiet --example bench_kernels
get() { tr ' ' '\n' | sed -n "s/^$1=//p"; }
c_desc=$("$out/sk_greedy" 2048 5 1)
c_sa=$("$out/sa_dense" 2048 500 0.1 5.0 5 1)
k=$("$CARGO_TARGET_DIR/release/examples/bench_kernels" 2048 5)
k_desc=$(echo "$k" | grep kiln_descent)
k_sa=$(echo "$k" | grep kiln_anneal)
kd=$(echo "$k_desc" | get t_total_med_ms); cd_=$(echo "$c_desc" | get t_total_med_ms)
ka=$(echo "$k_sa" | get attempts_per_s_med); ca=$(echo "$c_sa" | get attempts_per_s_med)
mkdir -p results/bench
report=results/bench/bench-$(date -u +%Y%m%dT%H%M%SZ).txt
{
    echo "kernel                 kiln (median, min-max)                 reference (median)   ratio kiln/ref (time)"
    printf 'SK descent n=2048       %s ms (%s-%s)        %s ms              %.2f\n' "$kd" \
        "$(echo "$k_desc" | get t_total_min_ms)" "$(echo "$k_desc" | get t_total_max_ms)" "$cd_" \
        "$(python3 -c "print($kd/$cd_)")"
    printf 'dense anneal n=2048     %s attempts/s (%s-%s)   %s attempts/s   %.2f\n' "$ka" \
        "$(echo "$k_sa" | get attempts_per_s_min)" "$(echo "$k_sa" | get attempts_per_s_max)" "$ca" \
        "$(python3 -c "print($ca/$ka)")"
    echo
    echo "raw:"; echo "$c_desc"; echo "$c_sa"; echo "$k"
} | tee "$report"
echo "wrote $report"
rm -rf "$out"
