#!/usr/bin/env bash
# Resident memory per phase of one whole-pipeline run (docs/performance.md, "Memory").
# Runs `prefsift run --timings` on the plan, samples the process's RssAnon
# (/proc/PID/status) every 0.2 s, and prints each phase's timing line with the
# highest sample taken during that phase, then the run's highest sample.
#
#   bench/pipeline/rss_by_phase.sh PREFSIFT PLAN OUT_DIR [THREADS=2]
#
# Outputs go to OUT_DIR (replaced). SOURCE_DATE_EPOCH=1, so two builds' outputs
# can be compared with scripts/compare-outputs.sh.
set -euo pipefail
BIN=$1 PLAN=$2 OUT=$3 THREADS=${4:-2}
LOG=$(mktemp -d)
trap 'rm -rf "$LOG"' EXIT
now() { date +%s.%N; }
T0=$(now)
SOURCE_DATE_EPOCH=1 "$BIN" run --plan "$PLAN" --out "$OUT" --overwrite -q --threads "$THREADS" --timings \
  2>"$LOG/stderr" &
PID=$!
: >"$LOG/rss"
: >"$LOG/marks"
while kill -0 "$PID" 2>/dev/null; do
  r=$(awk '/RssAnon/ {print $2}' "/proc/$PID/status" 2>/dev/null || true)
  h=$(awk '/VmHWM/ {print $2}' "/proc/$PID/status" 2>/dev/null || true)
  [ -n "$h" ] && echo "$h" >"$LOG/hwm"
  t=$(echo "$(now) - $T0" | bc)
  [ -n "$r" ] && echo "$t $r" >>"$LOG/rss"
  # A timing line appears when its phase ends: note the time of each new line.
  n=$(grep -c '^timing:' "$LOG/stderr" || true)
  while [ "$(wc -l <"$LOG/marks")" -lt "$n" ]; do echo "$t" >>"$LOG/marks"; done
  sleep 0.2
done
wait "$PID" || { rc=$?; [ $rc -eq 4 ] || [ $rc -eq 5 ] || { cat "$LOG/stderr" >&2; exit $rc; }; }
n=$(grep -c '^timing:' "$LOG/stderr" || true)
t=$(echo "$(now) - $T0" | bc)
while [ "$(wc -l <"$LOG/marks")" -lt "$n" ]; do echo "$t" >>"$LOG/marks"; done
paste -d' ' "$LOG/marks" <(grep '^timing:' "$LOG/stderr") |
  awk -v rss="$LOG/rss" 'BEGIN {while ((getline l < rss) > 0) {split(l, a, " "); t[++n] = a[1]; r[n] = a[2]}}
       {end = $1; mx = -1; for (i = 1; i <= n; i++) if (t[i] > prev && t[i] <= end && r[i] > mx) mx = r[i];
        $1 = ""; if (mx < 0) printf "%-50s (shorter than a sample)\n", substr($0, 2);
        else printf "%-50s RssAnon max %5d MB\n", substr($0, 2), mx / 1024; prev = end}'
awk '{if ($2 > m) m = $2} END {printf "peak RssAnon %d MB\n", m / 1024}' "$LOG/rss"
[ -s "$LOG/hwm" ] && awk '{printf "peak RSS (VmHWM, last sample) %d MB\n", $1 / 1024}' "$LOG/hwm"
