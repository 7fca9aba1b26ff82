#!/usr/bin/env bash
# A throwaway single-node Slurm cluster for tests: `cluster.sh start DIR` / `cluster.sh stop DIR`.
#
# Needs root and Debian's slurm-wlm and munge (installed by .ci/run). Everything Slurm writes
# goes under DIR (config, state, spool, logs, pid files); munged is started only when no
# running one answers, and then stopped again by `stop`. Recipe: GUIDE section 10 (no
# cgroup.conf: Slurm 22.05 refuses CgroupPlugin=disabled, so process tracking is linuxproc).
set -euo pipefail
cmd=${1:?start|stop}
dir=$(realpath -m "${2:?state directory}")
conf=$dir/slurm.conf

stop_pid() {
    local f=$1
    [ -s "$f" ] || return 0
    local pid
    pid=$(cat "$f")
    kill "$pid" 2>/dev/null || true
    for _ in $(seq 50); do kill -0 "$pid" 2>/dev/null || break; sleep 0.1; done
    kill -9 "$pid" 2>/dev/null || true
    rm -f "$f"
}

case $cmd in
start)
    mkdir -p "$dir/state" "$dir/spool"
    if ! (munge -n | unmunge) >/dev/null 2>&1; then
        [ -s /etc/munge/munge.key ] || mungekey -c
        mkdir -p /run/munge /var/log/munge /var/lib/munge
        chown -R munge:munge /etc/munge /run/munge /var/log/munge /var/lib/munge
        su -s /bin/sh munge -c "/usr/sbin/munged --pid-file=/run/munge/test-munged.pid"
        cp /run/munge/test-munged.pid "$dir/munged.pid"
        for _ in $(seq 50); do (munge -n | unmunge) >/dev/null 2>&1 && break; sleep 0.1; done
    fi
    host=$(hostname -s)
    mem=$(awk '/MemTotal/ {print int($2 / 1024 * 0.8)}' /proc/meminfo)
    cat >"$conf" <<CONF
ClusterName=ccmtest
SlurmctldHost=$host
AuthType=auth/munge
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
MpiDefault=none
SlurmUser=root
SlurmdUser=root
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
JobAcctGatherType=jobacct_gather/none
ReturnToService=2
StateSaveLocation=$dir/state
SlurmdSpoolDir=$dir/spool
SlurmctldPidFile=$dir/slurmctld.pid
SlurmdPidFile=$dir/slurmd.pid
SlurmctldLogFile=$dir/slurmctld.log
SlurmdLogFile=$dir/slurmd.log
NodeName=$host CPUs=$(nproc) RealMemory=$mem State=UNKNOWN
PartitionName=test Nodes=$host Default=YES MaxTime=INFINITE State=UP
CONF
    export SLURM_CONF=$conf
    slurmctld -f "$conf"
    slurmd -f "$conf"
    for _ in $(seq 300); do
        state=$(sinfo -h -o %T 2>/dev/null | head -1 || true)
        [ "$state" = idle ] && exit 0
        sleep 0.1
    done
    echo "the node never became idle (state: ${state:-none}); logs in $dir" >&2
    tail -n 20 "$dir/slurmctld.log" "$dir/slurmd.log" >&2 || true
    exit 1
    ;;
stop)
    stop_pid "$dir/slurmd.pid"
    stop_pid "$dir/slurmctld.pid"
    stop_pid "$dir/munged.pid"
    ;;
*)
    echo "usage: $0 start|stop DIR" >&2
    exit 2
    ;;
esac
