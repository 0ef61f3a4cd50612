#!/usr/bin/env bash
# Start (or stop) a real one-node Slurm on this machine for the tests of the batch scripts:
# munge, slurmctld and slurmd from Debian's slurm-wlm and munge packages, installed with apt-get
# when missing. The cluster is private to the tests: its configuration, state, logs and pid files
# live in one directory, its daemons listen on their own ports, and clients find it through
# SLURM_CONF.
#
# Usage (as root):  tests/cluster/start-slurm.sh start|stop|status [DIR]
#   DIR defaults to /var/lib/sweepcli-slurm. `start` prints the line `SLURM_CONF=DIR/slurm.conf`
#   last; export it before sbatch, squeue, scancel or sinfo. `stop` ends the daemons this script
#   started (by the pids in DIR), nothing else.
# Exit codes: 0 done; 3 Slurm cannot be installed here (not root, or no apt-get and no Slurm);
#   1 anything else (a daemon did not start; its log is printed).
set -euo pipefail
cmd=${1:-start}
dir=${2:-/var/lib/sweepcli-slurm}
conf=$dir/slurm.conf
export SLURM_CONF=$conf

stop() {
  for name in slurmd slurmctld munged; do
    f=$dir/$name.pid
    [ -s "$f" ] || continue
    pid=$(cat "$f")
    # Only a process of that name: a pid file left by an earlier boot may name someone else.
    if [ "$(cat /proc/"$pid"/comm 2>/dev/null)" = "$name" ]; then
      kill "$pid" 2>/dev/null || true
      for _ in $(seq 20); do kill -0 "$pid" 2>/dev/null || break; sleep 0.5; done
      kill -9 "$pid" 2>/dev/null || true
    fi
    rm -f "$f"
  done
}

case "$cmd" in
start)
  if ! command -v slurmctld >/dev/null || ! command -v slurmd >/dev/null \
      || ! command -v sbatch >/dev/null || ! command -v munged >/dev/null; then
    if [ "$(id -u)" != 0 ] || ! command -v apt-get >/dev/null; then
      echo "start-slurm: Slurm is not installed and cannot be: needs root and apt-get" \
           "(user $(id -un), apt-get $(command -v apt-get || echo missing))" >&2
      exit 3
    fi
    export DEBIAN_FRONTEND=noninteractive
    apt-get update -qq >/dev/null
    apt-get install -y -qq --no-install-recommends slurm-wlm munge >/dev/null
  fi
  if [ "$(id -u)" != 0 ]; then
    echo "start-slurm: the daemons need root (user $(id -un))" >&2
    exit 3
  fi
  stop
  rm -rf "$dir/ctld" "$dir/slurmd"
  mkdir -p "$dir/ctld" "$dir/slurmd" /run/munge /etc/munge /var/lib/munge /var/log/munge
  # munge: reuse a running daemon (its socket answers), else start one with a key of our own.
  if ! munge -n </dev/null 2>/dev/null | unmunge >/dev/null 2>&1; then
    if [ ! -s /etc/munge/munge.key ]; then
      dd if=/dev/urandom bs=1 count=1024 of=/etc/munge/munge.key 2>/dev/null
    fi
    chown -R munge: /etc/munge /run/munge /var/lib/munge /var/log/munge
    chmod 400 /etc/munge/munge.key
    runuser -u munge -- munged
    for _ in $(seq 20); do [ -s /run/munge/munged.pid ] && break; sleep 0.25; done
    cp /run/munge/munged.pid "$dir/munged.pid"
  fi
  host=$(hostname -s)
  cpus=$(nproc)
  mem=$(( $(awk '/MemTotal/ {print $2}' /proc/meminfo) * 9 / 10 / 1024 ))
  cat > "$conf" <<CONF
ClusterName=sweepcli-test
SlurmctldHost=$host(127.0.0.1)
SlurmctldPort=${SWEEPCLI_SLURMCTLD_PORT:-6917}
SlurmdPort=${SWEEPCLI_SLURMD_PORT:-6918}
SlurmUser=root
AuthType=auth/munge
StateSaveLocation=$dir/ctld
SlurmdSpoolDir=$dir/slurmd
SlurmctldPidFile=$dir/slurmctld.pid
SlurmdPidFile=$dir/slurmd.pid
SlurmctldLogFile=$dir/slurmctld.log
SlurmdLogFile=$dir/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
SchedulerType=sched/backfill
SelectType=select/cons_tres
SelectTypeParameters=CR_Core_Memory
ReturnToService=2
MpiDefault=none
KillWait=5
MinJobAge=600
NodeName=$host NodeAddr=127.0.0.1 CPUs=$cpus RealMemory=$mem State=UNKNOWN
PartitionName=debug Nodes=$host Default=YES MaxTime=INFINITE State=UP
CONF
  slurmctld -f "$conf" || { tail -20 "$dir/slurmctld.log"; exit 1; }
  slurmd -f "$conf" || { tail -20 "$dir/slurmd.log"; exit 1; }
  for _ in $(seq 60); do
    sinfo -h -o %t 2>/dev/null | grep -qE "idle|mix|alloc" && break
    sleep 0.5
  done
  scontrol update nodename="$host" state=resume >/dev/null 2>&1 || true
  if ! sinfo -h -o %t | grep -qE "idle|mix|alloc"; then
    echo "start-slurm: the node did not come up" >&2
    sinfo >&2 || true
    tail -20 "$dir/slurmctld.log" "$dir/slurmd.log" >&2 || true
    exit 1
  fi
  echo "SLURM_CONF=$conf"
  ;;
stop) stop ;;
status) sinfo; squeue ;;
*) echo "usage: $0 start|stop|status [DIR]" >&2; exit 2 ;;
esac
