#!/usr/bin/env bash
# How many threads were busy, per tenth of a second, in a `perf record` of a
# run: a stretch with one busy thread on a 2-thread run is serial work (how
# the tenth session found the decide steps' one-thread stretches;
# docs/performance.md).
#
#   perf record -F 499 -o run.data build/src/cli/prefsift run --plan P --out D --threads 2 --timings
#   bench/pipeline/busy_threads.sh run.data [FROM_S [TO_S]]
#
# Prints `second:threads` for each tenth of a second from FROM_S to TO_S
# (seconds from the first sample); a thread counts as busy with at least 40%
# of the samples it could have had (20 of 50 at 499 Hz). Set HZ for another
# sampling rate. Match the seconds to the phases with the --timings lines.
set -euo pipefail
[ $# -ge 1 ] || { sed -n '2,/^set -euo/p' "$0" | sed '$d; s/^# \{0,1\}//' >&2; exit 2; }
DATA=$1
FROM=${2:-0}
TO=${3:-1000000}
HZ=${HZ:-499}
perf script -i "$DATA" -F tid,time 2>/dev/null | awk -v from="$FROM" -v to="$TO" -v hz="$HZ" '
  NR == 1 { t0 = $2 + 0 }
  { slot = int(($2 - t0) * 10); count[slot " " $1]++; if (slot > last) last = slot }
  END {
    need = 0.4 * hz / 10
    for (k in count) { split(k, a, " "); if (count[k] >= need) busy[a[1]]++ }
    line = ""
    for (s = int(from * 10); s <= last && s <= to * 10; s++) line = line sprintf("%.1f:%d ", s / 10, busy[s] + 0)
    print line
  }'
