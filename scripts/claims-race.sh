#!/usr/bin/env bash
# Racing takeovers, many times over: four runners killed with kill -9 mid-run, four more
# resuming at once over their stale claims; each repetition checks that the resumers'
# computed counts add up to the cells that were missing (no cell computed twice) and that the
# table equals an undisturbed run's.
#   scripts/claims-race.sh [REPETITIONS]   (default 100)
set -euo pipefail
cd "$(dirname "$0")/.."
reps=${1:-100}
export CARGO_TARGET_DIR="${CARGO_TARGET_DIR:-$HOME/.cache/kiln-target}"
start=$(date +%s)
KILN_RACE_REPETITIONS=$reps cargo test --release --test cli \
    leases::four_runners_resuming_after_kill_9_compute_each_cell_once 2>&1 | grep -E "test result"
echo "claims-race: $reps repetitions of 4 killed + 4 resuming runners, 0 cells computed twice, $(( $(date +%s) - start )) s"
