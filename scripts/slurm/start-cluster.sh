#!/usr/bin/env bash
# Starts a throwaway single-node Slurm cluster on this machine, for the tests
# and for trying the job script (docs/scale.md). Needs root, munge and
# slurm-wlm (scripts/install-deps.sh). Everything lives in one folder: the
# munge key and socket, slurm.conf, the daemons' state, logs and pid files.
# Nothing under /etc or /var is touched; the daemons listen on free ports,
# and the node is this machine by its real host name with CPUs=2 and its
# real memory.
#
#   scripts/slurm/start-cluster.sh [DIR]    # DIR: a new folder (default: mktemp -d)
#   env PREFSIFT_CLUSTER_OWNER=PID: stop the cluster when process PID ends
#
# On success prints DIR on stdout and exits 0; then
#   export SLURM_CONF=DIR/slurm.conf   (or: source DIR/env)
# makes sbatch, squeue, sinfo talk to it. scripts/slurm/stop-cluster.sh DIR
# stops it and removes DIR. On failure the daemons started so far are
# stopped, the reason goes to stderr with the end of the daemons' logs, and
# the exit code is 3 (cannot start here: not root, a tool missing, a daemon
# that would not come up) or 1 (anything else).
set -uo pipefail

die() { echo "start-cluster: $*" >&2; exit "${2:-1}"; }
cannot() { echo "start-cluster: cannot start a cluster here: $*" >&2; exit 3; }

[ "$(id -u)" -eq 0 ] || cannot "needs root (the daemons run as root), running as uid $(id -u)"
for tool in munged slurmctld slurmd sbatch squeue sinfo scontrol python3; do
  command -v "$tool" >/dev/null || cannot "$tool is not installed (scripts/install-deps.sh installs munge and slurm-wlm)"
done

dir="${1:-}"
if [ -z "$dir" ]; then dir="$(mktemp -d /tmp/prefsift-slurm.XXXXXX)"; else mkdir -p "$dir" || die "cannot create $dir"; fi
dir="$(cd "$dir" && pwd)"
chmod 700 "$dir"
mkdir -p "$dir/munge" "$dir/state" "$dir/spool" "$dir/log"
chmod 700 "$dir/munge"

# From here on, a failure stops what was started.
fail() {
  echo "start-cluster: cannot start a cluster here: $*" >&2
  for f in "$dir"/log/*.log; do [ -f "$f" ] && { echo "--- end of $f" >&2; tail -n 15 "$f" >&2; }; done
  "$(dirname "$0")/stop-cluster.sh" --keep "$dir" >/dev/null 2>&1
  exit 3
}

# Munge: a fresh random key, its own socket.
head -c 1024 /dev/urandom > "$dir/munge/munge.key"
chmod 400 "$dir/munge/munge.key"
sock="$dir/munge/munge.socket"
munged --force --key-file="$dir/munge/munge.key" --socket="$sock" --pid-file="$dir/munge/munged.pid" \
  --log-file="$dir/log/munged.log" --seed-file="$dir/munge/munged.seed" 2>>"$dir/log/munged.log" \
  || fail "munged would not start"
for _ in $(seq 50); do [ -S "$sock" ] && break; sleep 0.1; done
[ -S "$sock" ] || fail "munged made no socket"

# Two free TCP ports on localhost (the kernel picks them).
read -r ctld_port slurmd_port < <(python3 - <<'PY'
import socket
socks = [socket.socket() for _ in range(2)]
for s in socks:
    s.bind(("127.0.0.1", 0))
print(*[s.getsockname()[1] for s in socks])
PY
)
[ -n "${slurmd_port:-}" ] || fail "no free ports"

host="$(hostname -s)"
mem="$(slurmd -C 2>/dev/null | sed -n 's/.*RealMemory=\([0-9]*\).*/\1/p' | head -n 1)"
[ -n "$mem" ] || mem="$(awk '/MemTotal/ {print int($2 / 1024)}' /proc/meminfo)"
: > "$dir/plugstack.conf"
cat > "$dir/slurm.conf" <<CONF
# A throwaway single-node cluster (scripts/slurm/start-cluster.sh); everything in $dir.
ClusterName=prefsift
SlurmctldHost=$host(127.0.0.1)
SlurmctldPort=$ctld_port
SlurmdPort=$slurmd_port
AuthType=auth/munge
AuthInfo=socket=$sock
CredType=cred/munge
SlurmUser=root
SlurmdUser=root
StateSaveLocation=$dir/state
SlurmdSpoolDir=$dir/spool
SlurmctldPidFile=$dir/slurmctld.pid
SlurmdPidFile=$dir/slurmd.pid
SlurmctldLogFile=$dir/log/slurmctld.log
SlurmdLogFile=$dir/log/slurmd.log
SlurmctldDebug=info
SlurmdDebug=info
PlugStackConfig=$dir/plugstack.conf
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SwitchType=switch/none
MpiDefault=none
SchedulerType=sched/backfill
SelectType=select/cons_tres
SelectTypeParameters=CR_CPU_Memory
DefMemPerCPU=1000
AccountingStorageType=accounting_storage/none
JobAcctGatherType=jobacct_gather/none
JobCompType=jobcomp/none
MailProg=/bin/true
ReturnToService=2
SlurmdParameters=config_overrides
SchedulerParameters=sched_interval=1
MinJobAge=600
SlurmctldTimeout=30
SlurmdTimeout=30
InactiveLimit=0
KillWait=5
NodeName=$host NodeAddr=127.0.0.1 CPUs=2 RealMemory=$mem State=UNKNOWN
PartitionName=local Nodes=$host Default=YES MaxTime=INFINITE State=UP
CONF
printf 'export SLURM_CONF=%q\n' "$dir/slurm.conf" > "$dir/env"
export SLURM_CONF="$dir/slurm.conf"

slurmctld -c -f "$SLURM_CONF" 2>>"$dir/log/slurmctld.log" || fail "slurmctld would not start"
slurmd -f "$SLURM_CONF" 2>>"$dir/log/slurmd.log" || fail "slurmd would not start"

# Wait (at most 30 s) until the node is idle and takes jobs.
state=""
for _ in $(seq 60); do
  state="$(sinfo -h -n "$host" -o %T 2>/dev/null | head -n 1)"
  case "$state" in idle*) break ;; esac
  sleep 0.5
done
case "$state" in
  idle*) ;;
  *) fail "the node did not become idle within 30 s (state: ${state:-no answer from slurmctld})" ;;
esac
# With PREFSIFT_CLUSTER_OWNER=PID (the tests pass their own pid), a watcher
# stops the cluster when that process ends without stopping it (a test killed
# by a timeout, say). It ends by itself once the folder is gone.
if [ -n "${PREFSIFT_CLUSTER_OWNER:-}" ]; then
  here="$(cd "$(dirname "$0")" && pwd)"
  setsid bash -c 'while [ -d "$1" ] && kill -0 "$2" 2>/dev/null; do sleep 2; done
                  [ -d "$1" ] && "$3/stop-cluster.sh" "$1"' watcher "$dir" "$PREFSIFT_CLUSTER_OWNER" "$here" \
    </dev/null >/dev/null 2>&1 &
fi
echo "$dir"
