#!/usr/bin/env bash
# Runs a prefsift command under a hard memory limit, to show that a run over a
# file larger than the limit completes (the input is streamed; memory is the
# fact table, not the text). Needs root and a cgroup memory controller (v1:
# /sys/fs/cgroup/memory, or v2: /sys/fs/cgroup with "memory" in
# cgroup.controllers). The page cache counts against a cgroup's limit too; the
# kernel reclaims it under pressure, so only the process's own memory must fit.
#
#   bench/pipeline/limited_memory.sh LIMIT_MB prefsift run --plan P --out D ...
#
# Prints the exit code, the wall time, and the cgroup's peak memory.
set -euo pipefail
limit_mb=$1; shift
name=prefsift-limit-$$
if [ -d /sys/fs/cgroup/memory ]; then
  cg=/sys/fs/cgroup/memory/$name
  mkdir "$cg"
  echo $((limit_mb * 1024 * 1024)) > "$cg/memory.limit_in_bytes"
  peak_file=$cg/memory.max_usage_in_bytes
  oom_file=$cg/memory.failcnt
elif grep -qw memory /sys/fs/cgroup/cgroup.controllers 2>/dev/null; then
  cg=/sys/fs/cgroup/$name
  mkdir "$cg"
  echo $((limit_mb * 1024 * 1024)) > "$cg/memory.max"
  peak_file=$cg/memory.peak
  oom_file=$cg/memory.events
else
  echo "no cgroup memory controller here" >&2
  exit 2
fi
trap 'rmdir "$cg" 2>/dev/null || true' EXIT
start=$(date +%s.%N)
set +e
bash -c 'echo $$ > "$1/cgroup.procs"; shift; exec "$@"' _ "$cg" "$@"
rc=$?
set -e
end=$(date +%s.%N)
echo "limit ${limit_mb} MB: exit $rc, $(echo "$end - $start" | bc) s, peak $(( $(cat "$peak_file") / 1048576 )) MB (page cache included)"
exit $rc
