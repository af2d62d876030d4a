#!/usr/bin/env bash
# Stops a cluster started by scripts/slurm/start-cluster.sh and removes its
# folder (with --keep, the folder and its logs stay). Stops only the daemons
# named in that folder's pid files, never others. Safe to run twice.
#
#   scripts/slurm/stop-cluster.sh [--keep] DIR
set -uo pipefail
keep=0
if [ "${1:-}" = "--keep" ]; then keep=1; shift; fi
dir="${1:?usage: stop-cluster.sh [--keep] DIR}"
[ -d "$dir" ] || exit 0
[ -f "$dir/slurm.conf" ] || [ -d "$dir/munge" ] || { echo "stop-cluster: $dir is not a cluster folder" >&2; exit 2; }

# A pid from a pid file, if that process is still the daemon we started.
live_pid() {
  local file="$1" name="$2" pid
  [ -f "$file" ] || return 1
  pid="$(tr -dc 0-9 < "$file")"
  [ -n "$pid" ] && [ "$(cat "/proc/$pid/comm" 2>/dev/null)" = "$name" ] && echo "$pid"
}

# Cancel what is still queued, so no job step is left running.
if [ -f "$dir/slurm.conf" ] && live_pid "$dir/slurmctld.pid" slurmctld >/dev/null; then
  SLURM_CONF="$dir/slurm.conf" timeout 10 scancel --full --quiet -u root >/dev/null 2>&1 || true
fi
stop() {
  local pid
  pid="$(live_pid "$1" "$2")" || return 0
  kill -TERM "$pid" 2>/dev/null
  for _ in $(seq 100); do [ -e "/proc/$pid" ] || return 0; sleep 0.1; done
  kill -KILL "$pid" 2>/dev/null
}
stop "$dir/slurmd.pid" slurmd
stop "$dir/slurmctld.pid" slurmctld
stop "$dir/munge/munged.pid" munged
if [ "$keep" = 0 ]; then rm -rf "$dir"; fi
exit 0
