#!/usr/bin/env bash
# A single-node Slurm cluster on loopback, for tests: munged, slurmctld and slurmd from the
# distribution's packages, run as plain background processes. Every pid, socket, log and state
# file lives in this script's own folder (default scripts/.local-slurm), never in /run.
#
#   scripts/local-slurm.sh install   # apt-get the packages if missing (needs root)
#   scripts/local-slurm.sh start     # prints: export SLURM_CONF=…
#   scripts/local-slurm.sh stop      # stops the daemons by their recorded pids
#
# Clients need SLURM_CONF pointing at the generated slurm.conf (start prints it).
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
state=${KILN_SLURM_DIR:-$here/.local-slurm}
conf=$state/slurm.conf

install() {
    if command -v slurmctld >/dev/null && command -v slurmd >/dev/null && command -v sbatch >/dev/null \
        && command -v munged >/dev/null; then
        return 0
    fi
    export DEBIAN_FRONTEND=noninteractive
    apt-get update -qq
    apt-get install -y -qq --no-install-recommends munge slurmctld slurmd slurm-client >/dev/null
}

write_conf() {
    local cpus mem
    cpus=$(nproc)
    mem=$(( $(awk '/MemTotal/ {print $2}' /proc/meminfo) / 1024 / 2 ))
    cat > "$conf" <<CONF
ClusterName=kilnlocal
SlurmctldHost=localhost(127.0.0.1)
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
CredType=cred/munge
AuthInfo=socket=$state/munge/munge.socket
StateSaveLocation=$state/ctld
SlurmdSpoolDir=$state/slurmd
SlurmctldPidFile=$state/slurmctld.pid
SlurmdPidFile=$state/slurmd.pid
SlurmctldLogFile=$state/slurmctld.log
SlurmdLogFile=$state/slurmd.log
SlurmctldPort=${KILN_SLURM_PORT:-6917}
SlurmdPort=$(( ${KILN_SLURM_PORT:-6917} + 1 ))
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
SchedulerType=sched/backfill
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
ReturnToService=2
MpiDefault=none
KillWait=5
MinJobAge=300
NodeName=localhost NodeAddr=127.0.0.1 CPUs=$cpus RealMemory=$mem State=UNKNOWN
PartitionName=local Nodes=localhost Default=YES MaxTime=INFINITE State=UP
CONF
}

start() {
    install
    mkdir -p "$state/ctld" "$state/slurmd" "$state/munge"
    chown munge:munge "$state/munge"
    chmod 0755 "$state/munge"
    rm -f "$state/munge/munge.socket" "$state/munge/munge.socket.lock"
    write_conf
    export SLURM_CONF=$conf
    runuser -u munge -- munged --foreground --force \
        --socket="$state/munge/munge.socket" --pid-file="$state/munge/munged.pid" \
        --log-file="$state/munge/munged.log" --seed-file="$state/munge/munged.seed" \
        </dev/null >>"$state/munged.out" 2>&1 &
    echo $! > "$state/munged.pids"
    for _ in $(seq 50); do [ -S "$state/munge/munge.socket" ] && break; sleep 0.1; done
    slurmctld -D -i -f "$conf" </dev/null >>"$state/slurmctld.out" 2>&1 &
    echo $! > "$state/slurmctld.pids"
    slurmd -D -N localhost -f "$conf" </dev/null >>"$state/slurmd.out" 2>&1 &
    echo $! > "$state/slurmd.pids"
    for _ in $(seq 120); do
        if sinfo -h -o %T 2>/dev/null | grep -qE '^(idle|mixed|allocated)'; then
            echo "export SLURM_CONF=$conf"
            return 0
        fi
        sleep 0.5
    done
    echo "local-slurm: the node did not come up; logs in $state" >&2
    tail -n 20 "$state"/*.out "$state"/*.log >&2 || true
    stop
    return 1
}

stop() {
    for d in slurmd slurmctld munged; do
        if [ -f "$state/$d.pids" ]; then
            pid=$(cat "$state/$d.pids")
            kill "$pid" 2>/dev/null || true
            for _ in $(seq 50); do kill -0 "$pid" 2>/dev/null || break; sleep 0.1; done
            kill -9 "$pid" 2>/dev/null || true
            rm -f "$state/$d.pids"
        fi
    done
}

case "${1:-}" in
    install) install ;;
    start) start ;;
    stop) stop ;;
    *) echo "usage: $0 install|start|stop" >&2; exit 2 ;;
esac
