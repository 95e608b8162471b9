#!/usr/bin/env bash
# End-to-end check of cluster runs on a real single-node Slurm cluster (scripts/local-slurm.sh):
#  1. `kiln slurm` + submit.sh: a 4-task job array and its dependent table job produce a table
#     bit-identical (provenance aside) to a single-process `kiln run` of the same spec;
#  2. one array task cancelled mid-run with scancel (SIGTERM): kiln releases its claims and
#     exits 143; resubmitted under another node name (KILN_HOST), the plan completes with no
#     lost or duplicated cell and the table is again identical;
#  3. one task killed with SIGKILL (claims left behind with a 5 s lease), resubmitted under
#     another node name: the stale leases are taken over with no manual step.
# Skips, saying so, only where the Slurm packages cannot be installed.
set -euo pipefail
cd "$(dirname "$0")/.."
export CARGO_TARGET_DIR="${CARGO_TARGET_DIR:-$HOME/.cache/kiln-target}"
kiln=${KILN:-$CARGO_TARGET_DIR/release/kiln}
[ -x "$kiln" ] || cargo build --release --locked --quiet
say() { printf 'slurm-e2e: %s\n' "$*"; }

if ! scripts/local-slurm.sh install >/tmp/kiln-slurm-install.log 2>&1; then
    say "SKIPPED: the Slurm packages cannot be installed on this machine ($(tail -n 1 /tmp/kiln-slurm-install.log))"
    exit 0
fi
t0=$(date +%s)
eval "$(scripts/local-slurm.sh start)"
trap 'scripts/local-slurm.sh stop' EXIT
work=$(mktemp -d)
cat > "$work/spec.toml" <<'SPEC'
[experiment]
name = "cluster-check"
note = "Does a run split into parts on a job array give the same table as one process?"
[model]
family = "sk"
couplings = "pm1"
[sweep]
sizes = [200, 400, 800]
seeds = 6
epsilons = [0.0, 0.1]
[[algorithm]]
kind = "descent"
order = "greedy"
[[algorithm]]
kind = "anneal"
sweeps = 16000
SPEC
spec=$work/spec.toml
name=cluster-check

"$kiln" run "$spec" --results "$work/single" --cache "$work/single-cache" --quiet
single=$work/single/$name/cells.parquet
t1=$(date +%s)

# 1. The whole plan as a job array with a dependent table job.
"$kiln" slurm "$spec" --parts 4 --results "$work/array" --cache "$work/array-cache" >/dev/null
bash "$work/array/$name/slurm/submit.sh" --wait
"$kiln" compare "$single" "$work/array/$name/cells.parquet"
t2=$(date +%s)
say "4-task job array + table job: table identical to one process ($((t2 - t1)) s on the cluster)"

# Waits until array task $1 is RUNNING and has claimed cells in cache $2.
wait_running() {
    for _ in $(seq 600); do
        state=$(squeue -h -r -j "$1" -o %T 2>/dev/null || true)
        [ "$state" = RUNNING ] && [ -n "$(claims "$2")" ] && return 0
        sleep 0.1
    done
    say "FAILED: task $1 never ran"; exit 1
}
claims() { find "$1/claims" -name '*.claim' 2>/dev/null; }
wait_gone() {
    for _ in $(seq 1200); do
        [ -z "$(squeue -h -j "$1" 2>/dev/null)" ] && return 0
        sleep 0.25
    done
}
not_done() {
    "$kiln" status "$spec" --cache "$1" --parts 4 --json \
        | python3 -c 'import json,sys; v=json.load(sys.stdin); s=[x for x in v["parts"] if x["part"]==sys.argv[1]][0]; print(s["missing"] + s["running"])' "$2"
}

# 2. scancel (SIGTERM) one task mid-run: kiln releases its claims and exits 143; the task is
#    resubmitted as if on another node (KILN_HOST) and the plan completes.
"$kiln" slurm "$spec" --parts 4 --results "$work/cancel" --cache "$work/cancel-cache" >/dev/null
dir=$work/cancel/$name/slurm
array=$(sbatch --parsable "$dir/array.sbatch"); array=${array%%;*}
wait_running "${array}_1" "$work/cancel-cache"
sleep 1
scancel "${array}_1"
wait_gone "$array"
left=$(not_done "$work/cancel-cache" 1/4)
if [ "$left" -eq 0 ]; then
    say "FAILED: the cancel did not land mid-run (part 1 had already finished)"
    exit 1
fi
grep -q "SIGTERM" "$dir/part-1.out" || { say "FAILED: part 1 did not see SIGTERM"; cat "$dir/part-1.out"; exit 1; }
if [ -n "$(claims "$work/cancel-cache")" ]; then
    say "FAILED: claims left after SIGTERM: $(claims "$work/cancel-cache")"; exit 1
fi
say "scancel of part 1: SIGTERM seen, claims released, $left cells not done; resubmitting it as node kiln-node-b"
sbatch --wait --array=1 --export=ALL,KILN_HOST=kiln-node-b "$dir/array.sbatch" >/dev/null
sbatch --wait "$dir/assemble.sbatch" >/dev/null
"$kiln" compare "$single" "$work/cancel/$name/cells.parquet"
t3=$(date +%s)
say "cancelled and resubmitted task: table identical, no lost or duplicated cell ($((t3 - t2)) s)"

# 3. SIGKILL one task mid-run (no chance to release) while it runs as node kiln-node-a with a
#    5 s lease: its claims stay behind. Resubmitted as node kiln-node-c, which cannot check
#    another node's processes, it takes the claims over once their lease expires, with no
#    manual step. (Tasks on the same node would have swept the dead process's claims at once.)
"$kiln" slurm "$spec" --parts 4 --results "$work/killed" --cache "$work/killed-cache" >/dev/null
dir=$work/killed/$name/slurm
array=$(sbatch --parsable --array=2 --export=ALL,KILN_HOST=kiln-node-a,KILN_LEASE=5 "$dir/array.sbatch")
array=${array%%;*}
wait_running "${array}_2" "$work/killed-cache"
sleep 1
scancel --batch --signal=KILL "${array}_2"
wait_gone "$array"
stale=$(claims "$work/killed-cache" | wc -l)
if [ "$stale" -eq 0 ]; then
    say "FAILED: the kill left no claim behind (it landed between cells)"; exit 1
fi
say "SIGKILL of part 2 (node kiln-node-a) left $stale claims; resubmitting it as node kiln-node-c"
sbatch --wait --array=2 --export=ALL,KILN_HOST=kiln-node-c "$dir/array.sbatch" >/dev/null
took=$(grep -c "took over cell" "$dir/part-2.out" || true)
if [ "$took" -eq 0 ]; then
    say "FAILED: the resubmitted task took over no claim"; cat "$dir/part-2.out"; exit 1
fi
sbatch --wait --array=1,3,4 "$dir/array.sbatch" >/dev/null
sbatch --wait "$dir/assemble.sbatch" >/dev/null
"$kiln" compare "$single" "$work/killed/$name/cells.parquet"
[ -z "$(claims "$work/killed-cache")" ] || { say "FAILED: claims left at the end"; exit 1; }
t4=$(date +%s)
say "killed task resubmitted as another node: took over $took expired leases, table identical ($((t4 - t3)) s)"
say "passed in $((t4 - t0)) s"
rm -rf "$work"
