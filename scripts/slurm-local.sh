#!/usr/bin/env bash
# A one-node Slurm cluster on localhost for the job-array tests, and its shutdown.
#
#   scripts/slurm-local.sh start DIR   # starts munged, slurmctld and slurmd with all their
#                                      # files in DIR (made if missing); prints the slurm.conf
#   scripts/slurm-local.sh stop DIR    # cancels the cluster's jobs and stops the three daemons
#
# Runs as root and installs nothing: it needs the Debian packages slurmctld, slurmd and munge
# (.ci/run installs them). The cluster is private to DIR: a munge key generated there, its own
# munge socket, ports SLURM_LOCAL_PORT and SLURM_LOCAL_PORT + 1 (default 16817), one node with
# ProctrackType=proctrack/linuxproc, TaskPlugin=task/none, no cgroup plugin, and
# SLURM_LOCAL_CPUS CPUs (default 4, more than this machine may have: the node is
# oversubscribed). Commands reach it with SLURM_CONF=DIR/slurm.conf. The daemons are stopped by
# the process ids they wrote into DIR, nothing else.
set -euo pipefail

action=${1:-}
dir=${2:-}
if [[ -z "$action" || -z "$dir" ]]; then
  echo "usage: $0 start|stop DIR" >&2
  exit 2
fi

port=${SLURM_LOCAL_PORT:-16817}
cpus=${SLURM_LOCAL_CPUS:-4}
conf="$dir/slurm.conf"

# Stops the daemon whose pid file is $1 (if it runs), waiting up to 10 s.
stop_daemon() {
  local pidfile=$1 pid
  [[ -s "$pidfile" ]] || return 0
  pid=$(cat "$pidfile")
  if kill -0 "$pid" 2>/dev/null; then
    kill "$pid" 2>/dev/null || true
    for _ in $(seq 50); do
      kill -0 "$pid" 2>/dev/null || break
      sleep 0.2
    done
    kill -0 "$pid" 2>/dev/null && kill -9 "$pid" 2>/dev/null || true
  fi
  rm -f "$pidfile"
}

# Waits up to 30 s for `$@` to succeed.
await() {
  for _ in $(seq 150); do
    if "$@" >/dev/null 2>&1; then return 0; fi
    sleep 0.2
  done
  return 1
}

case "$action" in
start)
  for tool in munged slurmctld slurmd sinfo; do
    command -v "$tool" >/dev/null || { echo "$0: $tool not found (apt-get install slurmctld slurmd munge)" >&2; exit 3; }
  done
  if [[ $(id -u) -ne 0 ]]; then
    echo "$0: run as root (the daemons run as root here)" >&2
    exit 3
  fi
  mkdir -p "$dir/state" "$dir/spool" "$dir/munge"
  chmod 700 "$dir" "$dir/munge"
  dir=$(cd "$dir" && pwd)
  conf="$dir/slurm.conf"
  host=$(hostname -s)
  mem=$(awk '/MemTotal/ {print int($2 / 1024)}' /proc/meminfo)
  # The munge key: 1024 random bytes, readable by its owner only.
  head -c 1024 /dev/urandom >"$dir/munge/munge.key"
  chmod 600 "$dir/munge/munge.key"
  munged --force --key-file="$dir/munge/munge.key" --socket="$dir/munge/munge.socket" \
    --pid-file="$dir/munge/munged.pid" --log-file="$dir/munge/munged.log" \
    --seed-file="$dir/munge/munged.seed"
  await test -S "$dir/munge/munge.socket"
  cat >"$conf" <<EOF
# One-node test cluster written by scripts/slurm-local.sh; everything lives in $dir.
ClusterName=causewaytest
SlurmctldHost=$host(127.0.0.1)
SlurmctldPort=$port
SlurmdPort=$((port + 1))
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
AuthInfo=socket=$dir/munge/munge.socket
CredType=cred/munge
StateSaveLocation=$dir/state
SlurmdSpoolDir=$dir/spool
SlurmctldPidFile=$dir/slurmctld.pid
SlurmdPidFile=$dir/slurmd.pid
SlurmctldLogFile=$dir/slurmctld.log
SlurmdLogFile=$dir/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/filetxt
JobCompLoc=$dir/jobcomp.txt
MpiDefault=none
SwitchType=switch/none
SchedulerType=sched/backfill
SelectType=select/cons_tres
SelectTypeParameters=CR_CPU
SlurmdParameters=config_overrides
ReturnToService=2
SchedulerParameters=batch_sched_delay=0,sched_min_interval=0
MinJobAge=2
NodeName=$host NodeAddr=127.0.0.1 CPUs=$cpus RealMemory=$mem State=UNKNOWN
PartitionName=local Nodes=$host Default=YES MaxTime=INFINITE State=UP OverSubscribe=FORCE:4
EOF
  export SLURM_CONF="$conf"
  slurmctld -f "$conf"
  slurmd -f "$conf"
  # Ready when the node is idle (or mixed/allocated: already taking jobs).
  if ! await bash -c "sinfo -h -N -o %t | grep -Eq '^(idle|mix|alloc)'"; then
    echo "$0: the node did not come up; logs in $dir" >&2
    sinfo -N -l >&2 || true
    tail -n 20 "$dir/slurmctld.log" "$dir/slurmd.log" >&2 || true
    exit 1
  fi
  echo "$conf"
  ;;
stop)
  [[ -d "$dir" ]] || exit 0
  if [[ -f "$conf" ]] && command -v scancel >/dev/null && [[ -s "$dir/slurmctld.pid" ]]; then
    SLURM_CONF="$conf" scancel --full --quiet --partition=local 2>/dev/null || true
    sleep 0.5
  fi
  stop_daemon "$dir/slurmd.pid"
  stop_daemon "$dir/slurmctld.pid"
  stop_daemon "$dir/munge/munged.pid"
  ;;
*)
  echo "usage: $0 start|stop DIR" >&2
  exit 2
  ;;
esac
