#!/bin/sh
# A one-node SLURM cluster on localhost for tests, from Debian 12's packages (munge, slurmctld,
# slurmd), with no systemd: every daemon runs from a private directory and is stopped by its pid
# file, so nothing else on the machine is touched.
#
#   tools/slurm-cluster.sh up       install what is missing, start munged, slurmctld, slurmd
#   tools/slurm-cluster.sh down     stop the daemons this script started (by their pid files)
#   tools/slurm-cluster.sh status   show whether they run and what sinfo says
#   tools/slurm-cluster.sh env      print the line that points SLURM commands at this cluster
#
# Idempotent: `up` on a running cluster does nothing, `down` on a stopped one does nothing.
# The directory is $CX_SLURM_DIR (default /tmp/coexist-slurm). Needs root (the daemons run as
# root and munged as the munge user). The node offers CPUS=4 by default (config_overrides), so
# 4-rank jobs run on a 2-core machine; set CX_SLURM_CPUS to change it.
set -eu

dir=${CX_SLURM_DIR:-/tmp/coexist-slurm}
cpus=${CX_SLURM_CPUS:-4}
conf="$dir/slurm.conf"
msock="$dir/munge/munge.socket"

running() { # running PIDFILE
    [ -f "$1" ] && kill -0 "$(cat "$1")" 2>/dev/null
}

install_packages() {
    missing=""
    for p in slurmctld slurmd slurm-client munge; do
        dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" ||
            missing="$missing $p"
    done
    if [ -n "$missing" ]; then
        echo "slurm-cluster: installing$missing"
        export DEBIAN_FRONTEND=noninteractive
        apt-get update -qq
        # shellcheck disable=SC2086
        apt-get install -y -qq --no-install-recommends $missing
    fi
}

write_config() {
    mkdir -p "$dir/state" "$dir/spool" "$dir/log" "$dir/run"
    mem=$(awk '/MemTotal/ {print int($2 / 1024 * 0.8)}' /proc/meminfo)
    cat >"$conf" <<EOF
ClusterName=coexist-test
SlurmctldHost=localhost
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
CredType=cred/munge
AuthInfo=socket=$msock
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
MpiDefault=pmix
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
SlurmdParameters=config_overrides
StateSaveLocation=$dir/state
SlurmdSpoolDir=$dir/spool
SlurmctldPidFile=$dir/run/slurmctld.pid
SlurmdPidFile=$dir/run/slurmd.pid
SlurmctldLogFile=$dir/log/slurmctld.log
SlurmdLogFile=$dir/log/slurmd.log
SlurmctldPort=6817
SlurmdPort=6818
ReturnToService=2
MinJobAge=30
KillWait=10
NodeName=localhost NodeAddr=127.0.0.1 CPUs=$cpus RealMemory=$mem State=UNKNOWN
PartitionName=debug Nodes=localhost Default=YES MaxTime=INFINITE State=UP
EOF
}

start_munge() {
    if running "$dir/munge/munged.pid"; then
        return
    fi
    mkdir -p "$dir/munge"
    chown munge:munge "$dir/munge"
    chmod 0711 "$dir/munge" # munged refuses 0700 for its socket directory
    if [ ! -f "$dir/munge/munge.key" ]; then
        runuser -u munge -- mungekey --create --keyfile="$dir/munge/munge.key"
    fi
    runuser -u munge -- munged --socket="$msock" --key-file="$dir/munge/munge.key" \
        --pid-file="$dir/munge/munged.pid" --log-file="$dir/munge/munged.log" \
        --seed-file="$dir/munge/munged.seed"
}

wait_idle() {
    i=0
    while [ $i -lt 60 ]; do
        state=$(SLURM_CONF="$conf" sinfo -h -N -o "%T" 2>/dev/null | head -1 || true)
        case "$state" in
        idle* | mixed* | allocated*) return 0 ;;
        esac
        sleep 0.5
        i=$((i + 1))
    done
    echo "slurm-cluster: the node did not become idle (state '$state'); see $dir/log" >&2
    return 1
}

up() {
    [ "$(id -u)" -eq 0 ] || {
        echo "slurm-cluster: must run as root" >&2
        exit 1
    }
    install_packages
    mkdir -p "$dir"
    [ -f "$conf" ] || write_config
    start_munge
    if ! running "$dir/run/slurmctld.pid"; then
        slurmctld -f "$conf"
    fi
    if ! running "$dir/run/slurmd.pid"; then
        # -N: the machine's hostname is not "localhost", the node's name in slurm.conf
        slurmd -f "$conf" -N localhost
    fi
    wait_idle
    echo "slurm-cluster: up; use it with: export SLURM_CONF=$conf"
}

stop_pid() { # stop_pid PIDFILE NAME
    if running "$1"; then
        pid=$(cat "$1")
        kill "$pid" 2>/dev/null || true
        i=0
        while kill -0 "$pid" 2>/dev/null && [ $i -lt 50 ]; do
            sleep 0.2
            i=$((i + 1))
        done
        kill -9 "$pid" 2>/dev/null || true
        echo "slurm-cluster: stopped $2"
    fi
    rm -f "$1"
}

down() {
    stop_pid "$dir/run/slurmd.pid" slurmd
    stop_pid "$dir/run/slurmctld.pid" slurmctld
    stop_pid "$dir/munge/munged.pid" munged
}

status() {
    for d in "run/slurmctld.pid slurmctld" "run/slurmd.pid slurmd" "munge/munged.pid munged"; do
        set -- $d
        if running "$dir/$1"; then echo "$2: running (pid $(cat "$dir/$1"))"; else echo "$2: stopped"; fi
    done
    if running "$dir/run/slurmctld.pid"; then
        SLURM_CONF="$conf" sinfo
    fi
}

case "${1:-}" in
up) up ;;
down) down ;;
status) status ;;
env) echo "export SLURM_CONF=$conf" ;;
*)
    echo "usage: $0 up|down|status|env" >&2
    exit 2
    ;;
esac
