#!/usr/bin/env bash
# Speed of kiln's heat-bath sampler (`glauber`) beside a minimal C heat-bath loop
# (scripts/perf/heatbath.c, built here with the shared references' common.h and
# gcc -O3 -march=native), measured in one run on this machine.
#
#   scripts/bench-samplers.sh [RUNS=3]
#
# Both sides: sequential sweeps at β = 1, one uniform per attempt, 200 sweeps; dense SK
# n = 2048 (attempts/s, median over instances) and a ±1 3-regular graph with n = 10⁶ (ns per
# attempt). The C program and kiln alternate, RUNS rounds; the table shows medians with
# min–max and the ratio kiln time / C time (< 1: kiln faster). Written to
# results/bench/samplers-<UTC>.txt. Machines are shared and noisy: read the ratios.
set -euo pipefail
cd "$(dirname "$0")/.."
runs=${1:-3}
ref=${PERF_REF:-../shared/perf-ref}
[ -f "$ref/common.h" ] || { echo "bench-samplers: no common.h at $ref (set PERF_REF)"; exit 2; }
export CARGO_TARGET_DIR="${CARGO_TARGET_DIR:-$HOME/.cache/kiln-target}"
out=$(mktemp -d)
trap 'rm -rf "$out"' EXIT
gcc -O3 -march=native -I"$ref" scripts/perf/heatbath.c -o "$out/heatbath" -lm
cargo build --release --quiet --example bench_kernels
kb="$CARGO_TARGET_DIR/release/examples/bench_kernels"
get() { tr ' ' '\n' | sed -n "s/^$1=//p" | head -1; }
stats() { sort -g | awk '{v[NR]=$1} END {printf "%s %s %s", v[int((NR+1)/2)], v[1], v[NR]}'; }
calc() { awk "BEGIN {printf \"%.3f\", $1}"; }
c_d=""; c_s=""; k_d=""; k_s=""
for r in $(seq 1 "$runs"); do
    c_d+=" $("$out/heatbath" dense 2048 200 1.0 3 $((3 * r)) | get attempts_per_s_med)"
    c_s+=" $("$out/heatbath" sparse 1000000 200 1.0 "$r" | get ns_per_attempt)"
    k=$(RAYON_NUM_THREADS=1 "$kb" 2048 3 glauber $((3 * r)))
    k_d+=" $(echo "$k" | grep kiln_glauber_dense | get attempts_per_s_med)"
    k_s+=" $(echo "$k" | grep kiln_glauber_sparse | get ns_per_attempt)"
done
col() { echo "$1" | tr ' ' '\n' | grep . | stats; }
read -r cd_m cd_lo cd_hi <<<"$(col "$c_d")"; read -r cs_m cs_lo cs_hi <<<"$(col "$c_s")"
read -r kd_m kd_lo kd_hi <<<"$(col "$k_d")"; read -r ks_m ks_lo ks_hi <<<"$(col "$k_s")"
mkdir -p results/bench
report=results/bench/samplers-$(date -u +%Y%m%dT%H%M%SZ).txt
{
    echo "kiln sampler benchmark $(date -u +%FT%TZ) on $(hostname), $(nproc) cores, git $(git describe --always --dirty 2>/dev/null || echo '?')"
    echo "runs: $runs; medians (min-max); ratio = kiln time / C time (target in brackets)"
    echo
    printf '%-38s %-30s %-30s %s\n' kernel kiln "C heat-bath" ratio
    printf '%-38s %-30s %-30s %s\n' "glauber SK n=2048 (attempts/s)" "$kd_m ($kd_lo-$kd_hi)" \
        "$cd_m ($cd_lo-$cd_hi)" "$(calc "$cd_m / $kd_m") [<= 1.3]"
    printf '%-38s %-30s %-30s %s\n' "glauber 3-reg n=1e6 (ns/attempt)" "$ks_m ($ks_lo-$ks_hi)" \
        "$cs_m ($cs_lo-$cs_hi)" "$(calc "$ks_m / $cs_m") [<= 1.3]"
    echo
    echo "raw: C dense attempts/s:$c_d; C sparse ns/attempt:$c_s"
    echo "raw: kiln dense attempts/s:$k_d; kiln sparse ns/attempt:$k_s"
} | tee "$report"
echo "wrote $report"
