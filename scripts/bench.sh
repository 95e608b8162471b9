#!/usr/bin/env bash
# Side-by-side speed of kiln's kernels and their references, measured in one run on this machine.
#
#   scripts/bench.sh [RUNS=5]
#
# References: the minimal C programs in ../shared/perf-ref (or $PERF_REF), built here with
# gcc -O3 -march=native; numpy/OpenBLAS (gemv) and scipy eigsh (ARPACK) from a virtual
# environment this script creates under $HOME/.cache/kiln-bench-venv (system site packages;
# numpy, scipy and threadpoolctl are pip-installed into it when missing; skipped with a
# message if that is impossible). kiln's side is examples/bench_kernels.rs plus the kiln
# binary itself (no-op rerun, 2 vs 1 core, peak memory).
#
# The C programs and kiln's loops run in RUNS alternating rounds (descent and dense
# annealing: three new instances a side per round; sparse annealing: one run; bandwidth: the
# stream sum and kiln's product back to back); BLAS and eigsh run RUNS repetitions in one
# process. The table shows medians over rounds with min–max, and the ratio kiln time /
# reference time (< 1: kiln faster). Written to results/bench/bench-<UTC>.txt.
# Machines are shared and noisy: read the ratios, not the absolute figures.
set -euo pipefail
cd "$(dirname "$0")/.."
runs=${1:-5}
ref=${PERF_REF:-../shared/perf-ref}
[ -f "$ref/sk_greedy.c" ] || { echo "bench: no reference programs at $ref (set PERF_REF)"; exit 2; }
export CARGO_TARGET_DIR="${CARGO_TARGET_DIR:-$HOME/.cache/kiln-target}"
out=$(mktemp -d)
trap 'rm -rf "$out"' EXIT
CF="-O3 -march=native"
gcc $CF -fopenmp "$ref/stream.c" -o "$out/stream"
gcc $CF "$ref/sk_greedy.c" -o "$out/sk_greedy" -lm
gcc $CF "$ref/sa_dense.c" -o "$out/sa_dense" -lm
gcc $CF "$ref/sa_sparse.c" -o "$out/sa_sparse" -lm
cargo build --release --quiet --example bench_kernels
cargo build --release --quiet
kiln="$CARGO_TARGET_DIR/release/kiln"
kb="$CARGO_TARGET_DIR/release/examples/bench_kernels"

get() { tr ' ' '\n' | sed -n "s/^$1=//p" | head -1; }
# median/min/max of numbers on stdin -> "med min max"
stats() { sort -g | awk '{v[NR]=$1} END {printf "%s %s %s", v[int((NR+1)/2)], v[1], v[NR]}'; }
calc() { awk "BEGIN {printf \"%.3f\", $1}"; }

echo "bench: C references and kiln kernels, interleaved ($runs rounds)" >&2
c_stream=$(OMP_NUM_THREADS=1 "$out/stream" 1 10)
read_bw=$(echo "$c_stream" | get sum_median_GBs)
# One reference run and one kiln run per round, alternating, so that a change in the load of
# the (shared) machine hits both sides alike.
c_d=""; c_a=""; c_s=""; k_d=""; k_a=""; k_s=""; bw_4096=""; bw_8192=""; bw_s=""
bw32_4096=""; bw32_8192=""
for r in $(seq 1 "$runs"); do
    # Three instances a side per round (descent takes only milliseconds); new ones each round.
    c_d+=" $("$out/sk_greedy" 2048 3 $((3 * r)) | get t_total_med_ms)"
    c_a+=" $("$out/sa_dense" 2048 500 0.1 5.0 3 $((3 * r)) | get attempts_per_s_med)"
    c_s+=" $("$out/sa_sparse" 1000000 200 0.1 3.0 "$r" | get ns_per_attempt)"
    kd1=$(RAYON_NUM_THREADS=1 "$kb" 2048 3 dense $((3 * r)))
    k_d+=" $(echo "$kd1" | grep kiln_descent | get t_total_med_ms)"
    k_a+=" $(echo "$kd1" | grep kiln_anneal | get attempts_per_s_med)"
    k_s+=" $(RAYON_NUM_THREADS=1 "$kb" 2048 1 sparse | get ns_per_attempt_med)"
    # Bandwidth, paired: the stream sum and kiln's product in the same round; the ratio of
    # each round's pair is what the table reports (their median, with min-max).
    bw=$(OMP_NUM_THREADS=1 "$out/stream" 1 5 | get sum_median_GBs)
    km=$(RAYON_NUM_THREADS=1 "$kb" 2048 1 matvec)
    g4=$(echo "$km" | grep "kiln_matvec n=4096 dtype=float64" | get GBs_med)
    g8=$(echo "$km" | grep "kiln_matvec n=8192 dtype=float64" | get GBs_med)
    bw_4096+=" $(calc "$g4 / 2 / $bw")"; bw_8192+=" $(calc "$g8 / 2 / $bw")"
    # storage = "f32": the bytes of the triangle, all of which the product reads.
    f4=$(echo "$km" | grep "kiln_matvec n=4096 dtype=float32" | get GBs_med)
    f8=$(echo "$km" | grep "kiln_matvec n=8192 dtype=float32" | get GBs_med)
    bw32_4096+=" $(calc "$f4 / $bw")"; bw32_8192+=" $(calc "$f8 / $bw")"
    bw_s+=" $bw"
done
col() { echo "$1" | tr ' ' '\n' | grep . | stats; }
c_desc=$(col "$c_d"); c_sa=$(col "$c_a"); c_sp=$(col "$c_s")
k_desc=$(col "$k_d"); k_sa=$(col "$k_a"); k_sp=$(col "$k_s")
read -r bw_m bw_lo bw_hi <<<"$(col "$bw_s")"
k=$(RAYON_NUM_THREADS=1 "$kb" 2048 "$runs" matvec,eigen)
# Bandwidth again after the products; the larger median is the reference (the conservative
# choice on a machine whose load drifts).
c_stream2=$(OMP_NUM_THREADS=1 "$out/stream" 1 10)
read_bw=$(printf '%s\n%s\n' "$read_bw" "$(echo "$c_stream2" | get sum_median_GBs)" | sort -g | tail -1)
kc=$("$kb" 2048 "$runs" couplings)
ki=$("$kb" 2048 "$runs" implicit)

py=""
venv="$HOME/.cache/kiln-bench-venv"
if [ ! -x "$venv/bin/python" ]; then
    /usr/bin/python3 -m venv --system-site-packages "$venv" 2>/dev/null \
        || python3 -m venv --system-site-packages "$venv" 2>/dev/null || true
fi
if [ -x "$venv/bin/python" ]; then
    if ! "$venv/bin/python" -c 'import numpy, scipy, threadpoolctl' 2>/dev/null; then
        "$venv/bin/python" -m pip install --quiet numpy scipy threadpoolctl 2>/dev/null || true
    fi
    "$venv/bin/python" -c 'import numpy, scipy, threadpoolctl' 2>/dev/null && py="$venv/bin/python"
fi
if [ -n "$py" ]; then
    echo "bench: numpy/scipy references" >&2
    # A core-type override (set on some machines for old OpenBLAS builds) slows a current
    # numpy: the fair reference runs with OPENBLAS_CORETYPE and OPENBLAS_L2_SIZE unset
    # together, its kernel printed by threadpoolctl (the blasinfo line); when the environment
    # sets an override, the reference also runs under it and both rows are reported.
    p_mv=$(env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE OPENBLAS_NUM_THREADS=1 \
        "$py" "$ref/dense_matvec.py" --n 4096 8192 --dtype float64 float32 --threads 1)
    p_eig=$(env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE OPENBLAS_NUM_THREADS=1 \
        "$py" "$ref/top_eig.py" --n 2048 4096 --reps "$runs" --seed 1)
    p_mv_env=""; p_eig_env=""
    if [ -n "${OPENBLAS_CORETYPE:-}${OPENBLAS_L2_SIZE:-}" ]; then
        p_mv_env=$(OPENBLAS_NUM_THREADS=1 "$py" "$ref/dense_matvec.py" --n 4096 8192 --dtype float64 float32 --threads 1)
        p_eig_env=$(OPENBLAS_NUM_THREADS=1 "$py" "$ref/top_eig.py" --n 2048 4096 --reps "$runs" --seed 1)
    fi
    kernel=$(echo "$p_mv" | grep "prog=blasinfo" | head -1 | sed 's/.*architecture=\([^ ]*\).*/\1/')
    # No override in the environment: no second run, and no kernel to name (grep finds
    # nothing; under `set -e -o pipefail` that must not end the script).
    kernel_env=$(echo "$p_mv_env" | { grep "prog=blasinfo" || true; } | head -1 | sed 's/.*architecture=\([^ ]*\).*/\1/')
else
    echo "bench: numpy/scipy/threadpoolctl unavailable (no venv or pip): BLAS and eigsh rows skipped" >&2
    p_mv=""; p_eig=""; p_mv_env=""; p_eig_env=""; kernel=""; kernel_env=""
fi
# reference fair|env FAIR ENV: sets $src to that run's output and $tag to its kernel; fails
# when that run did not happen (no override in the environment).
reference() {
    if [ "$1" = fair ]; then src=$2; tag="$kernel"; else src=$3; tag="$kernel_env, override"; fi
    [ -n "$src" ]
}

echo "bench: kiln runs (no-op rerun, cores, memory)" >&2
work="$out/work"; mkdir -p "$work"
cat > "$work/noop.toml" <<'EOF'
[experiment]
name = "bench-noop"
[model]
family = "sk"
[sweep]
sizes = [8, 10, 12, 14, 16]
seeds = 1000
epsilons = [0.0, 0.5]
[[algorithm]]
kind = "descent"
EOF
"$kiln" run "$work/noop.toml" --cache "$work/c0" --results "$work/r0" --quiet
noop=$(for i in $(seq 1 "$runs"); do
    s=$(date +%s.%N); "$kiln" run "$work/noop.toml" --cache "$work/c0" --results "$work/r0" --quiet
    e=$(date +%s.%N); calc "$e - $s"; echo; done | stats)
cat > "$work/cores.toml" <<'EOF'
[experiment]
name = "bench-cores"
[model]
family = "sk"
[sweep]
sizes = [1024]
seeds = 64
epsilons = [0.0, 0.01]
[[algorithm]]
kind = "anneal"
sweeps = 300
EOF
# The same sweep shape with small instances (cache-resident: compute-bound).
sed -e 's/1024/128/; s/"anneal"/"tempering"/; s/bench-cores/bench-cores-small/' \
    "$work/cores.toml" > "$work/cores-small.toml"
# Fastest of 5 runs, each from an empty cache (the machine is shared: the minimum is the
# least disturbed measurement).
t_cores() { local s e r; for r in 1 2 3 4 5; do s=$(date +%s.%N)
    "$kiln" run "$work/$1.toml" --cache "$work/c$1-$2-$r" --results "$work/rc$1-$2-$r" \
        --jobs "$2" --quiet
    e=$(date +%s.%N); calc "$e - $s"; echo; done | sort -g | head -1; }
t1=$(t_cores cores 1); t2=$(t_cores cores 2)
# The machine's own 2-vs-1 scaling at this moment, for comparison: the C annealer on 16
# instances of the same size, in one process or split over two processes (fastest of 5).
t_c() { local s e r; for r in 1 2 3 4 5; do s=$(date +%s.%N)
    if [ "$1" = 1 ]; then "$out/sa_dense" 1024 300 0.1 5.0 16 1 >/dev/null
    else "$out/sa_dense" 1024 300 0.1 5.0 8 1 >/dev/null & "$out/sa_dense" 1024 300 0.1 5.0 8 9 >/dev/null; wait; fi
    e=$(date +%s.%N); calc "$e - $s"; echo; done | sort -g | head -1; }
m1=$(t_c 1); m2=$(t_c 2)
u1=$(t_cores cores-small 1); u2=$(t_cores cores-small 2)
cat > "$work/mem.toml" <<'EOF'
[experiment]
name = "bench-memory"
[model]
family = "sk"
[sweep]
sizes = [8192]
seeds = 1
epsilons = [0.0]
[[algorithm]]
kind = "descent"
EOF
rss_kib=$( { /usr/bin/time -f "maxrss_kib=%M" "$kiln" run "$work/mem.toml" --cache "$work/cm" \
    --results "$work/rm" --quiet --jobs 1; } 2>&1 | get maxrss_kib)
coupling_mib=$(calc "8 * 8192 * 8192 / 1048576")
sed -e 's/^family = "sk"/family = "sk"\nstorage = "f32"/' "$work/mem.toml" > "$work/mem32.toml"
rss32_kib=$( { /usr/bin/time -f "maxrss_kib=%M" "$kiln" run "$work/mem32.toml" --cache "$work/cm32" \
    --results "$work/rm32" --quiet --jobs 1; } 2>&1 | get maxrss_kib)
triangle_mib=$(calc "4 * 8192 * 8191 / 2 / 1048576")

mkdir -p results/bench
report=results/bench/bench-$(date -u +%Y%m%dT%H%M%SZ).txt
read -r cd_m cd_lo cd_hi <<<"$c_desc"; read -r ca_m ca_lo ca_hi <<<"$c_sa"; read -r cs_m cs_lo cs_hi <<<"$c_sp"
read -r kd_m kd_lo kd_hi <<<"$k_desc"; read -r ka_m ka_lo ka_hi <<<"$k_sa"; read -r ks_m ks_lo ks_hi <<<"$k_sp"
read -r no_m no_lo no_hi <<<"$noop"
{
    echo "kiln benchmark $(date -u +%FT%TZ) on $(hostname), $(nproc) cores, git $(git describe --always --dirty 2>/dev/null || echo '?')"
    echo "runs: $runs; medians (min-max); ratio = kiln time / reference time (target in brackets)"
    echo
    printf '%-34s %-34s %-34s %s\n' kernel kiln reference ratio
    printf '%-34s %-34s %-34s %s\n' "SK descent n=2048 (ms, total)" "$kd_m ($kd_lo-$kd_hi)" \
        "C $cd_m ($cd_lo-$cd_hi)" "$(calc "$kd_m / $cd_m") [<= 1.2]"
    printf '%-34s %-34s %-34s %s\n' "dense anneal n=2048 (attempts/s)" "$ka_m ($ka_lo-$ka_hi)" \
        "C $ca_m ($ca_lo-$ca_hi)" "$(calc "$ca_m / $ka_m") [<= 1.2]"
    printf '%-34s %-34s %-34s %s\n' "sparse anneal 3-reg n=1e6 (ns/att)" "$ks_m ($ks_lo-$ks_hi)" \
        "C $cs_m ($cs_lo-$cs_hi)" "$(calc "$ks_m / $cs_m") [<= 1.2]"
    for n in 4096 8192; do
        km=$(echo "$k" | grep "kiln_matvec n=$n dtype=float64")
        kt=$(echo "$km" | get t_med_ms)
        if [ -n "$p_mv" ]; then
            # A @ x (gemv, what a user writes) and the symmetric product (symv, which reads
            # one triangle, as kiln does).
            for op in gemv symv; do
                for which in fair env; do
                    reference "$which" "$p_mv" "$p_mv_env" || continue
                    pm=$(echo "$src" | grep "op=$op n=$n dtype=float64 threads=1 ")
                    pt=$(echo "$pm" | get t_med_ms)
                    printf '%-34s %-34s %-34s %s\n' "matvec f64 n=$n 1 thread (ms)" \
                        "$kt ($(echo "$km" | get t_min_ms)-$(echo "$km" | get t_max_ms))" \
                        "numpy $op [$tag] $pt" "$(calc "$kt / $pt") [<= 1.0]"
                done
            done
        fi
        # kiln reads only the upper triangle: physical bytes are half the effective ones.
        gbe=$(echo "$km" | get GBs_med)
        printf '%-34s %-34s %-34s %s\n' "  bandwidth n=$n (GB/s)" "eff. $gbe, read $(calc "$gbe / 2")" \
            "stream sum $read_bw" "read $(calc "$gbe / 2 / $read_bw") of bandwidth [>= 0.8]"
        if [ "$n" = 4096 ]; then pr=$bw_4096; else pr=$bw_8192; fi
        read -r b_m b_lo b_hi <<<"$(col "$pr")"
        printf '%-34s %-34s %-34s %s\n' "  same, paired per round" "-" "stream sum $bw_m ($bw_lo-$bw_hi)" \
            "read $b_m ($b_lo-$b_hi) of bandwidth [>= 0.8]"
    done
    for n in 4096 8192; do
        km=$(echo "$k" | grep "kiln_matvec n=$n dtype=float32")
        kt=$(echo "$km" | get t_med_ms)
        if [ -n "$p_mv" ]; then
            for which in fair env; do
                reference "$which" "$p_mv" "$p_mv_env" || continue
                pm=$(echo "$src" | grep "op=symv n=$n dtype=float32 threads=1 ")
                printf '%-34s %-34s %-34s %s\n' "matvec f32 n=$n 1 thread (ms)" \
                    "$kt ($(echo "$km" | get t_min_ms)-$(echo "$km" | get t_max_ms))" \
                    "numpy symv f32 [$tag] $(echo "$pm" | get t_med_ms)" \
                    "$(calc "$kt / $(echo "$pm" | get t_med_ms)") (sums in f64 here, f32 there)"
            done
        fi
        if [ "$n" = 4096 ]; then pr=$bw32_4096; else pr=$bw32_8192; fi
        read -r b_m b_lo b_hi <<<"$(col "$pr")"
        printf '%-34s %-34s %-34s %s\n' "  f32 triangle read, paired" "$(echo "$km" | get GBs_med) GB/s" \
            "stream sum $bw_m ($bw_lo-$bw_hi)" "read $b_m ($b_lo-$b_hi) of bandwidth [>= 0.8]"
    done
    for n in 2048 4096; do
        ke=$(echo "$k" | grep "kiln_eigen n=$n ")
        kt=$(echo "$ke" | get t_med_s)
        if [ -n "$p_eig" ]; then
            for which in fair env; do
                reference "$which" "$p_eig" "$p_eig_env" || continue
                pe=$(echo "$src" | grep "n=$n ")
                pt=$(echo "$pe" | get t_med_s)
                printf '%-34s %-34s %-34s %s\n' "top eigenvector n=$n (s)" \
                    "$kt ($(echo "$ke" | get matvecs) prod., res. $(echo "$ke" | get residual))" \
                    "eigsh [$tag] $pt ($(echo "$pe" | get matvecs) prod.)" \
                    "$(calc "$kt / $pt") [<= 1.0]"
            done
        else
            printf '%-34s %-34s %-34s %s\n' "top eigenvector n=$n (s)" "$kt" "skipped" "-"
        fi
    done
    printf '%-34s %-34s %-34s %s\n' "coupling generation n=4096 (1/s)" \
        "$(echo "$kc" | get couplings_per_s_med) ($(echo "$kc" | get threads) threads)" "-" "-"
    printf '%-34s %-34s %-34s %s\n' "implicit couplings, product n=4096" \
        "$(echo "$ki" | get couplings_per_s) /s ($(echo "$ki" | get threads) threads)" "-" \
        "$(echo "$ki" | get ns_per_coupling_core) ns per coupling and core"
    printf '%-34s %-34s %-34s %s\n' "10k-cell no-op rerun (s)" "$no_m ($no_lo-$no_hi)" "-" "[< 1 s]"
    printf '%-34s %-34s %-34s %s\n' "128 anneal cells n=1024, 1|2 jobs" "$t1 / $t2 s" "-" \
        "speed-up $(calc "$t1 / $t2") [>= 1.8]"
    printf '%-34s %-34s %-34s %s\n' "128 tempering cells n=128, 1|2 jobs" "$u1 / $u2 s" "-" \
        "speed-up $(calc "$u1 / $u2") [>= 1.8]"
    printf '%-34s %-34s %-34s %s\n' "machine: C annealer 1|2 processes" "-" "$m1 / $m2 s" \
        "speed-up $(calc "$m1 / $m2") (reference)"
    printf '%-34s %-34s %-34s %s\n' "peak RSS, SK n=8192 descent (MiB)" "$(calc "$rss_kib / 1024")" \
        "couplings $coupling_mib" "$(calc "$rss_kib / 1024 / $coupling_mib") [<= 1.2 + const]"
    printf '%-34s %-34s %-34s %s\n' "peak RSS, same with storage f32" "$(calc "$rss32_kib / 1024")" \
        "f32 triangle $triangle_mib" "$(calc "$rss32_kib / 1024 / $triangle_mib") [<= 1.2]"
    echo
    echo "raw:"; echo "$c_stream"; echo "$c_stream2"
    echo "paired read/stream per round: n=4096:$bw_4096; n=8192:$bw_8192; stream sum GB/s:$bw_s"
    echo "paired f32 read/stream per round: n=4096:$bw32_4096; n=8192:$bw32_8192"
    echo "C descent t_total_ms (med min max): $c_desc"
    echo "C dense attempts/s: $c_sa"; echo "C sparse ns/attempt: $c_sp"
    echo "kiln descent t_total_ms: $k_desc"; echo "kiln dense attempts/s: $k_sa"
    echo "kiln sparse ns/attempt: $k_sp"
    echo "$k"; echo "$kc"; echo "$ki"; echo "$p_mv"; echo "$p_eig"
    if [ -n "$p_mv_env" ]; then
        echo "under the environment's override (OPENBLAS_CORETYPE=${OPENBLAS_CORETYPE:-unset} OPENBLAS_L2_SIZE=${OPENBLAS_L2_SIZE:-unset}):"
        echo "$p_mv_env"; echo "$p_eig_env"
    else
        echo "the environment sets no OpenBLAS core-type override: the reference rows above ran without one"
    fi
} | tee "$report"
echo "wrote $report"
