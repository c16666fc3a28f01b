#!/usr/bin/env bash
# A single-node Slurm cluster on the host that runs it, for tests: munged, slurmctld and slurmd with
# their own configuration, key, sockets, ports and state under DIR (nothing in /etc is changed).
#   tests/scale/slurm_cluster.sh start DIR   prints "export SLURM_CONF=DIR/slurm.conf"
#   tests/scale/slurm_cluster.sh stop DIR    stops the three daemons
# Needs Debian's slurm-wlm and munge (scripts/test-scale.sh installs them) and root, as the
# daemons run as the user that starts them (SlurmUser = SlurmdUser = that user).
set -euo pipefail
cmd="${1:-}"
dir="${2:-}"
[ -n "$cmd" ] && [ -n "$dir" ] || { echo "usage: $0 start|stop DIR" >&2; exit 2; }
mkdir -p "$dir"
dir="$(cd "$dir" && pwd)"

stop_pidfile() {
  local f="$1" pid
  [ -f "$f" ] || return 0
  pid="$(cat "$f" 2>/dev/null || true)"
  if [ -n "$pid" ] && kill -0 "$pid" 2>/dev/null; then
    kill "$pid" 2>/dev/null || true
    for _ in $(seq 50); do kill -0 "$pid" 2>/dev/null || break; sleep 0.1; done
    kill -9 "$pid" 2>/dev/null || true
  fi
  rm -f "$f"
}

if [ "$cmd" = stop ]; then
  stop_pidfile "$dir/slurmd.pid"
  stop_pidfile "$dir/slurmctld.pid"
  stop_pidfile "$dir/munge/munged.pid"
  exit 0
fi
[ "$cmd" = start ] || { echo "usage: $0 start|stop DIR" >&2; exit 2; }

# Free TCP ports for slurmctld and slurmd (the defaults 6817/6818 may be taken).
free_port() { /usr/bin/python3 -c 'import socket; s=socket.socket(); s.bind(("127.0.0.1",0)); print(s.getsockname()[1])'; }
ctld_port="$(free_port)"
slurmd_port="$(free_port)"
while [ "$slurmd_port" = "$ctld_port" ]; do slurmd_port="$(free_port)"; done

mkdir -p "$dir/munge" "$dir/state" "$dir/spool" "$dir/log"
chmod 700 "$dir/munge"
# munge: its own key (1 KiB of random bytes, munge's own recommendation) and socket.
if [ ! -f "$dir/munge/munge.key" ]; then
  dd if=/dev/urandom of="$dir/munge/munge.key" bs=1024 count=1 status=none
  chmod 400 "$dir/munge/munge.key"
fi
munged --force --key-file="$dir/munge/munge.key" --socket="$dir/munge/munge.socket" \
  --pid-file="$dir/munge/munged.pid" --log-file="$dir/log/munged.log" \
  --seed-file="$dir/munge/munged.seed"

# The host as Slurm sees it (NodeName=<short hostname> CPUs=... RealMemory=...), reached on
# loopback whether or not its name resolves.
node="$(slurmd -C | head -1)"
host="$(hostname -s)"
user="$(id -un)"
cat >"$dir/slurm.conf" <<CONF
ClusterName=sightfix-test
SlurmctldHost=$host(127.0.0.1)
SlurmctldPort=$ctld_port
SlurmdPort=$slurmd_port
AuthType=auth/munge
AuthInfo=socket=$dir/munge/munge.socket
CredType=cred/munge
SlurmUser=$user
SlurmdUser=$user
StateSaveLocation=$dir/state
SlurmdSpoolDir=$dir/spool
SlurmctldPidFile=$dir/slurmctld.pid
SlurmdPidFile=$dir/slurmd.pid
SlurmctldLogFile=$dir/log/slurmctld.log
SlurmdLogFile=$dir/log/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
MpiDefault=none
SwitchType=switch/none
SchedulerType=sched/backfill
SelectType=select/cons_tres
SelectTypeParameters=CR_Core_Memory
ReturnToService=2
SlurmctldTimeout=30
SlurmdTimeout=30
InactiveLimit=0
KillWait=5
$node NodeAddr=127.0.0.1 State=UNKNOWN
PartitionName=main Nodes=ALL Default=YES MaxTime=INFINITE State=UP
CONF
export SLURM_CONF="$dir/slurm.conf"
slurmctld -f "$SLURM_CONF"
slurmd -f "$SLURM_CONF"
# Ready when the node answers idle (or mixed/allocated: someone was quick).
for _ in $(seq 60); do
  state="$(sinfo -h -N -o %t 2>/dev/null | head -1 || true)"
  case "$state" in idle*|mix*|alloc*) echo "export SLURM_CONF=$SLURM_CONF"; exit 0 ;; esac
  sleep 0.5
done
echo "slurm_cluster.sh: the node did not come up (state '${state:-none}'); logs in $dir/log:" >&2
tail -n 20 "$dir/log/"*.log >&2 || true
exit 1
