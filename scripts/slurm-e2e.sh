#!/usr/bin/env bash
# End-to-end check of cluster runs on a real single-node Slurm cluster (scripts/local-slurm.sh):
#  1. `kiln slurm` + submit.sh: a 4-task job array and its dependent table job produce a table
#     bit-identical (provenance aside) to a single-process `kiln run` of the same spec;
#  2. one array task cancelled mid-run (scancel) and resubmitted: the plan completes with no
#     lost or duplicated cell, and the table is again identical.
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
note = "Does a sharded run on a job array give the same table as one process?"
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
"$kiln" slurm "$spec" --tasks 4 --results "$work/array" --cache "$work/array-cache" >/dev/null
bash "$work/array/$name/slurm/submit.sh" --wait
"$kiln" compare "$single" "$work/array/$name/cells.parquet"
t2=$(date +%s)
say "4-task job array + table job: table identical to one process ($((t2 - t1)) s on the cluster)"

# 2. Cancel one task mid-run, resubmit it, assemble.
"$kiln" slurm "$spec" --tasks 4 --results "$work/cancel" --cache "$work/cancel-cache" >/dev/null
dir=$work/cancel/$name/slurm
array=$(sbatch --parsable "$dir/array.sbatch"); array=${array%%;*}
for _ in $(seq 600); do
    state=$(squeue -h -r -j "${array}_1" -o %T 2>/dev/null || true)
    [ "$state" = RUNNING ] && break
    sleep 0.1
done
sleep 1
scancel "${array}_1"
for _ in $(seq 1200); do
    [ -z "$(squeue -h -j "$array" 2>/dev/null)" ] && break
    sleep 0.25
done
"$kiln" status "$spec" --cache "$work/cancel-cache" --shards 4
shard1_done=$("$kiln" status "$spec" --cache "$work/cancel-cache" --shards 4 --json \
    | python3 -c 'import json,sys; v=json.load(sys.stdin); s=[x for x in v["shards"] if x["shard"]=="1/4"][0]; print(s["missing"] + s["running"])')
if [ "$shard1_done" -eq 0 ]; then
    say "FAILED: the cancel did not land mid-run (shard 1 had already finished)"
    exit 1
fi
say "cancelled shard 1 with $shard1_done cells not done; resubmitting it"
sbatch --wait --array=1 "$dir/array.sbatch" >/dev/null
sbatch --wait "$dir/assemble.sbatch" >/dev/null
"$kiln" status "$spec" --cache "$work/cancel-cache" --shards 4
"$kiln" compare "$single" "$work/cancel/$name/cells.parquet"
t3=$(date +%s)
say "cancelled and resubmitted task: table identical, no lost or duplicated cell ($((t3 - t2)) s)"
say "passed in $((t3 - t0)) s"
rm -rf "$work"
