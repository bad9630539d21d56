#!/usr/bin/env bash
# A real single-node Slurm cluster on this machine, for testing the job-array recipe
# (tools/shards-slurm.sbatch, docs/scale-out.md): munge with a key generated here, slurmctld and
# slurmd from Debian's slurm-wlm, everything (config, key, sockets, state, logs) in one folder.
# No cgroups: ProctrackType=proctrack/linuxproc, TaskPlugin=task/none, so it runs in a container.
#
# Usage: tools/slurm-cluster.sh start   # prints `export SLURM_CONF=…` for the clients
#        tools/slurm-cluster.sh stop    # stops the daemons it started and removes the folder
#        tools/slurm-cluster.sh env     # the export line again
# The folder is $PERIODFIT_SLURM_DIR (default /tmp/periodfit-slurm-$UID); the ports are
# $PERIODFIT_SLURM_PORT and the next one (default 6917, 6918), bound to loopback only.
# Needs root (slurmd starts jobs as their user) and the packages slurm-wlm and munge.
set -euo pipefail
DIR=${PERIODFIT_SLURM_DIR:-/tmp/periodfit-slurm-$(id -u)}
PORT=${PERIODFIT_SLURM_PORT:-6917}
CONF=$DIR/slurm.conf
NODE=$(hostname -s)

stop_pidfile() {  # stops the process whose pid the file names, waiting up to 10 s
  local file=$1 pid i
  [ -s "$file" ] || return 0
  pid=$(cat "$file")
  kill "$pid" 2>/dev/null || return 0
  for i in $(seq 100); do kill -0 "$pid" 2>/dev/null || return 0; sleep 0.1; done
  kill -KILL "$pid" 2>/dev/null || true
}

case "${1:-}" in
start)
  for b in munged slurmctld slurmd sbatch; do
    command -v "$b" >/dev/null || { echo "periodfit: error: $b not found; install slurm-wlm and munge (tools/deps.sh)" >&2; exit 2; }
  done
  [ "$(id -u)" -eq 0 ] || { echo "periodfit: error: slurm-cluster.sh start needs root (slurmd runs jobs as their user)" >&2; exit 2; }
  if [ -e "$DIR" ]; then "$0" stop; fi
  mkdir -p "$DIR/state" "$DIR/spool" "$DIR/munge"
  chmod 700 "$DIR/munge"
  # munge's key: 1024 random bytes, readable by its owner only (munged refuses anything looser).
  head -c 1024 /dev/urandom >"$DIR/munge/munge.key"
  chmod 400 "$DIR/munge/munge.key"
  munged --force --socket="$DIR/munge/munge.socket" --key-file="$DIR/munge/munge.key" \
    --pid-file="$DIR/munge/munged.pid" --log-file="$DIR/munge/munged.log" --seed-file="$DIR/munge/munged.seed"
  cpus=$(nproc)
  cat >"$CONF" <<EOF
ClusterName=periodfit-test
SlurmctldHost=$NODE(127.0.0.1)
SlurmctldPort=$PORT
SlurmdPort=$((PORT + 1))
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
AuthInfo=socket=$DIR/munge/munge.socket
CredType=cred/munge
StateSaveLocation=$DIR/state
SlurmdSpoolDir=$DIR/spool
SlurmctldPidFile=$DIR/slurmctld.pid
SlurmdPidFile=$DIR/slurmd.pid
SlurmctldLogFile=$DIR/slurmctld.log
SlurmdLogFile=$DIR/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
SchedulerType=sched/backfill
# Start jobs as soon as they are submitted or their dependencies are met (the defaults batch
# them up to 3 s apart), so the tests take seconds.
SchedulerParameters=batch_sched_delay=0,sched_min_interval=0
SelectType=select/cons_tres
SelectTypeParameters=CR_CPU
MpiDefault=none
ReturnToService=2
SlurmctldTimeout=30
SlurmdTimeout=30
InactiveLimit=0
MinJobAge=300
KillWait=5
NodeName=$NODE NodeAddr=127.0.0.1 CPUs=$cpus State=UNKNOWN
PartitionName=periodfit Nodes=$NODE Default=YES MaxTime=INFINITE State=UP
EOF
  export SLURM_CONF=$CONF
  slurmctld -f "$CONF" -i
  slurmd -f "$CONF"
  # Ready when the node takes jobs (idle), at most 30 s.
  for i in $(seq 300); do
    state=$(sinfo -h -N -o %t 2>/dev/null | head -1 || true)
    case "$state" in idle*|mix*|alloc*) echo "export SLURM_CONF=$CONF"; exit 0 ;; esac
    sleep 0.1
  done
  echo "periodfit: error: the Slurm node did not come up within 30 s (state: ${state:-none}); logs in $DIR" >&2
  tail -n 5 "$DIR/slurmctld.log" "$DIR/slurmd.log" >&2 || true
  exit 2
  ;;
stop)
  [ -d "$DIR" ] || exit 0
  stop_pidfile "$DIR/slurmd.pid"
  stop_pidfile "$DIR/slurmctld.pid"
  stop_pidfile "$DIR/munge/munged.pid"
  rm -rf "$DIR"
  ;;
env)
  echo "export SLURM_CONF=$CONF"
  ;;
*)
  echo "usage: tools/slurm-cluster.sh start|stop|env" >&2
  exit 2
  ;;
esac
