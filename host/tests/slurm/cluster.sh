#!/usr/bin/env bash
# A throw-away single-node Slurm cluster on loopback, for the Slurm tests.
#
#   cluster.sh start DIR   start munged, slurmctld and slurmd with their
#                          config, sockets, state and logs all inside DIR;
#                          prints the SLURM_CONF path to export
#   cluster.sh stop DIR    stop them by the pids recorded in DIR
#
# Non-default ports (so a real cluster on the machine is not touched),
# proctrack/linuxproc with task/none (no cgroups needed), munge with its
# own key and a socket directory of mode 755. Needs Debian's slurm-wlm and
# munge packages, and root (slurmd launches the jobs).
set -euo pipefail

cmd=${1:?usage: cluster.sh start|stop DIR}
dir=$(realpath -m "${2:?usage: cluster.sh start|stop DIR}")

stop() {
    for name in slurmd slurmctld munged; do
        pidfile="$dir/$name.pid"
        if [[ -f $pidfile ]]; then
            pid=$(cat "$pidfile")
            kill "$pid" 2>/dev/null || true
            for _ in $(seq 50); do kill -0 "$pid" 2>/dev/null || break; sleep 0.1; done
            kill -9 "$pid" 2>/dev/null || true
            rm -f "$pidfile"
        fi
    done
}

if [[ $cmd == stop ]]; then
    stop
    exit 0
fi
[[ $cmd == start ]] || { echo "usage: cluster.sh start|stop DIR" >&2; exit 2; }

mkdir -p "$dir"/{munge,state,spool,log}
chmod 755 "$dir/munge"
# A fresh munge key (1024 random bytes), readable by the owner only.
head -c 1024 /dev/urandom > "$dir/munge/munge.key"
chmod 400 "$dir/munge/munge.key"
sock="$dir/munge/munge.socket"
munged --force --socket="$sock" --key-file="$dir/munge/munge.key" \
    --pid-file="$dir/munged.pid" --log-file="$dir/log/munged.log" \
    --seed-file="$dir/munge/munged.seed"

# Ports from the pid of this script, in a range Slurm does not use by default.
base=$(( 20000 + ($$ % 5000) * 2 ))
cpus=$(nproc)
cat > "$dir/slurm.conf" <<CONF
ClusterName=exobound-test
SlurmctldHost=localhost
SlurmctldPort=$base
SlurmdPort=$(( base + 1 ))
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
AuthInfo=socket=$sock
CredType=cred/munge
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
MpiDefault=none
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
SchedulerType=sched/builtin
ReturnToService=2
StateSaveLocation=$dir/state
SlurmdSpoolDir=$dir/spool
SlurmctldPidFile=$dir/slurmctld.pid
SlurmdPidFile=$dir/slurmd.pid
SlurmctldLogFile=$dir/log/slurmctld.log
SlurmdLogFile=$dir/log/slurmd.log
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
NodeName=localhost NodeAddr=127.0.0.1 CPUs=$cpus State=UNKNOWN
PartitionName=test Nodes=localhost Default=YES MaxTime=INFINITE State=UP
CONF
export SLURM_CONF="$dir/slurm.conf"
slurmctld -i
slurmd -N localhost
# Wait (at most 30 s) for the node to be ready.
for _ in $(seq 60); do
    if sinfo -h -N -o '%T' 2>/dev/null | grep -qE '^(idle|mixed|allocated)'; then
        echo "$SLURM_CONF"
        exit 0
    fi
    sleep 0.5
done
echo "the test cluster did not come up; logs in $dir/log" >&2
sinfo >&2 || true
tail -n 20 "$dir"/log/*.log >&2 || true
stop
exit 1
