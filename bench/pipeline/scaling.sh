#!/usr/bin/env bash
# Scaling with cores (issue 21, item 4): `prefsift run` over one plan with each
# thread count given, and the serial share of the run, two ways.
#
#   bench/pipeline/scaling.sh PLAN [THREADS...]        (default threads: 1 2)
#   env: PREFSIFT=build/src/cli/prefsift  OUT=/tmp/prefsift-scaling  RUNS=1 (the fastest of RUNS is kept)
#
# Prints per thread count: wall and CPU seconds, peak RSS, and the wall seconds
# of pass 1 (read, parse, facts, every Observe), of the decide steps (every
# stage's Decide and the gate), of pass 2, of provenance hashing, and of the
# rest (set-up such as building the leakage index, stage outputs, summary,
# datasheet and report). Then:
#   Each run is pinned to its thread count's cores (taskset -c 0-(t-1)).
#   - Amdahl fit: with T1 the wall time on 1 thread and Tp on p threads,
#     T_p = T1 (s + (1 - s) / p) gives s = (Tp/T1 - 1/p) / (1 - 1/p) for each p > 1.
#     It needs a quiet machine: on a shared one, other processes' load enters s.
#   - Phase share: the wall seconds of the phases that run on one thread
#     (decide steps other than their inner parallel loops, stage outputs,
#     summary, datasheet and report, set-up) over the whole, at 1 thread. Passes
#     1 and 2 also hold serial parts (reading, merging chunks in order), which
#     only the fit sees; the fit is the figure to quote.
# Speed figures belong here and in docs/performance.md, never in a unit test.
set -euo pipefail

[ $# -ge 1 ] || { sed -n '2,/^set -euo/p' "$0" | sed '$d; s/^# \{0,1\}//' >&2; exit 2; }
PLAN=$1
shift
THREADS=("$@")
[ ${#THREADS[@]} -eq 0 ] && THREADS=(1 2)
ROOT=$(cd "$(dirname "$0")/../.." && pwd)
PREFSIFT=${PREFSIFT:-$ROOT/build/src/cli/prefsift}
OUT=${OUT:-/tmp/prefsift-scaling}
RUNS=${RUNS:-1}
mkdir -p "$OUT"

one_run() {  # threads -> "wall cpu rss_mb pass1 decide pass2 provenance rest"
  local t=$1 log=$OUT/time-$1.log
  # Pinned to t cores (the first t), so that the reader, the writer and the
  # main thread cannot run on an idle core a run with fewer threads leaves: an
  # unpinned `--threads 1` run still used the second core and understated the
  # serial share.
  local pin=()
  if command -v taskset >/dev/null && [ "$t" -le "$(nproc)" ]; then pin=(taskset -c "0-$((t - 1))"); fi
  "${pin[@]}" /usr/bin/time -v "$PREFSIFT" run --plan "$PLAN" --out "$OUT/out" --overwrite -q --timings --threads "$t" \
    >/dev/null 2>"$log" || {
    local rc=$?
    [ $rc -eq 4 ] || [ $rc -eq 5 ] || { cat "$log" >&2; exit $rc; }  # 4, 5: complete runs
  }
  awk -F': *' '
    /^timing:/ {
      secs = $0; sub(/ s$/, "", secs); n = split(secs, w, " "); v = w[n]
      if ($0 ~ /timing: observe/) p1 += v
      else if ($0 ~ /timing: (decide |gate)/) dec += v
      else if ($0 ~ /timing: apply/) p2 += v
      else if ($0 ~ /timing: provenance/) prov += v
      phases += v
    }
    /Elapsed \(wall clock\)/ {
      e = $0; sub(/.*\): */, "", e); m = split(e, c, ":"); wall = 0; for (i = 1; i <= m; i++) wall = wall * 60 + c[i]
    }
    /User time|System time/ { cpu += $2 }
    /Maximum resident set size/ { rss = $2 / 1024 }
    END { printf "%.2f %.2f %.0f %.2f %.2f %.2f %.2f %.2f\n", wall, cpu, rss, p1, dec, p2, prov, wall - p1 - dec - p2 - prov }
  ' "$log"
}

printf '%-8s %8s %8s %8s %8s %8s %8s %8s %8s %8s\n' threads wall_s cpu_s rss_MB pass1_s decide_s pass2_s prov_s rest_s speedup
declare -A WALL REST DEC
for t in "${THREADS[@]}"; do
  best=""
  for ((r = 0; r < RUNS; r++)); do
    line=$(one_run "$t")
    if [ -z "$best" ] || awk -v a="$line" -v b="$best" 'BEGIN { split(a, x, " "); split(b, y, " "); exit !(x[1] < y[1]) }'; then
      best=$line
    fi
  done
  read -r wall cpu rss p1 dec p2 prov rest <<<"$best"
  WALL[$t]=$wall
  REST[$t]=$rest
  DEC[$t]=$dec
  speed=$(awk -v a="${WALL[${THREADS[0]}]}" -v b="$wall" 'BEGIN { printf "%.2f", a / b }')
  printf '%-8s %8s %8s %8s %8s %8s %8s %8s %8s %8s\n' "$t" "$wall" "$cpu" "$rss" "$p1" "$dec" "$p2" "$prov" "$rest" "$speed"
done

if [ -n "${WALL[1]:-}" ]; then
  for t in "${THREADS[@]}"; do
    [ "$t" -gt 1 ] || continue
    awk -v t1="${WALL[1]}" -v tp="${WALL[$t]}" -v p="$t" 'BEGIN {
      s = (tp / t1 - 1 / p) / (1 - 1 / p)
      printf "Amdahl fit, 1 vs %d threads: serial share s = %.3f; predicted speedup on 32 cores 1/(s + (1-s)/32) = %.1f\n",
             p, s, 1 / (s + (1 - s) / 32)
    }'
  done
  awk -v t1="${WALL[1]}" -v d="${DEC[1]}" -v r="${REST[1]}" 'BEGIN {
    printf "phase share at 1 thread: decide %.1f%% + rest %.1f%% = %.1f%% of the wall time outside passes 1 and 2 and hashing\n",
           100 * d / t1, 100 * r / t1, 100 * (d + r) / t1
  }'
fi
