#!/usr/bin/env bash
# Whole-pipeline benchmark (docs/performance.md). Generates synthetic preference
# datasets (bench/pipeline/make_prefs.cc: random text; or, with SHAPE=template,
# bench/pipeline/make_template_prefs.cc: a help-desk set whose prompts, answers
# and evaluation items share stock sentences), runs every stage alone and the whole
# pipeline on each, and prints records/s, MB/s of input, peak RSS and RSS per
# record, beside the machine's ceiling on the same file (bench/pipeline/ceiling.cc:
# read + simdjson parse + XXH3_128bits, one thread), and this disk's write
# speed for as many bytes (dd, direct and through the page cache).
#
#   scripts/bench.sh [SIZES...]          default: 10000 100000 1000000
#   env: BUILD=build-perf  DATA=/tmp/prefsift-bench-$SHAPE-e$EVAL  THREADS=(all cores)
#        SHAPE=random (make_prefs) or template (make_template_prefs)
#        EVAL=50000 evaluation prompts (issue 9's target; 0 = the generator's default:
#             make_prefs N/200, make_template_prefs 250)
#        PREFSIFT=path/to/prefsift (default $BUILD/src/cli/prefsift)
#        STAGES="exact near leakage screen bias split"  (subset for quick runs)
#
# Data and outputs go under $DATA (never into the repository). Peak RSS comes
# from /usr/bin/time -v ("Maximum resident set size"); cpu_s is its user + system
# time (on a shared machine a steadier figure than the wall seconds). "B/rec" is
# (peak RSS - peak RSS of the same command on a 100-record file) / records:
# an upper bound on the index memory per record (it also counts allocator slack
# and per-chunk buffers).
set -euo pipefail
ROOT=$(cd "$(dirname "$0")/.." && pwd)
BUILD=${BUILD:-$ROOT/build-perf}
EVAL=${EVAL:-50000}
SHAPE=${SHAPE:-random}
case "$SHAPE" in
  random) GEN=make_prefs ;;
  template) GEN=make_template_prefs ;;
  *) echo "bench.sh: SHAPE must be random or template" >&2; exit 2 ;;
esac
if [ "$SHAPE" = random ]; then DATA=${DATA:-/tmp/prefsift-bench-e$EVAL}; else DATA=${DATA:-/tmp/prefsift-bench-$SHAPE-e$EVAL}; fi
THREADS=${THREADS:-$(nproc)}
STAGES=${STAGES-"exact near leakage screen bias split"}  # STAGES="" runs the whole pipeline only
SIZES=("$@")
[ ${#SIZES[@]} -eq 0 ] && SIZES=(10000 100000 1000000)

if [ ! -x "$BUILD/src/cli/prefsift" ] || [ ! -x "$BUILD/bench/pipeline/ceiling" ] ||
   [ ! -x "$BUILD/bench/pipeline/$GEN" ]; then
  cmake -S "$ROOT" -B "$BUILD" -G Ninja >/dev/null
  cmake --build "$BUILD" --target prefsift "$GEN" ceiling -j"$(nproc)"
fi
PREFSIFT=${PREFSIFT:-$BUILD/src/cli/prefsift}
mkdir -p "$DATA"

# The plan for one size: every stage on, near-duplicate and leakage defaults,
# the evaluation set made with the data, personal data masked.
write_plan() {  # N
  local n=$1
  cat >"$DATA/plan-$n.json" <<JSON
{
  "inputs": [{"path": "$DATA/prefs-$n.jsonl", "name": "prefs",
              "layout": {"preset": "choice", "annotator": "/annotator", "source": "/source", "thread": "/thread"}}],
  "seed": 1,
  "stages": {
    "exact": {},
    "near": {},
    "leakage": {"eval_sets": [{"name": "eval", "path": "$DATA/eval-$n.jsonl", "text": "/question", "id": "/qid"}]},
    "screen": {"action": "mask", "rules_dir": "$ROOT/rules"},
    "bias": {},
    "split": {"splits": {"train": 0.9, "test": 0.1}}
  }
}
JSON
}

# Runs one command under /usr/bin/time; prints "seconds peak_kb".
timed() {
  local log=$DATA/time.log
  /usr/bin/time -v "$@" >"$DATA/cmd.out" 2>"$log" || {
    local rc=$?
    # Exit 4 (gate) and 5 (strict) still mean a complete run.
    if [ $rc -ne 4 ] && [ $rc -ne 5 ]; then cat "$log" "$DATA/cmd.out" >&2; return $rc; fi
  }
  grep '^timing' "$log" >"$DATA/timings.log" || true
  local wall kb
  wall=$(awk -F': ' '/Elapsed \(wall clock\)/ {print $2}' "$log")
  kb=$(awk -F': ' '/Maximum resident set size/ {print $2}' "$log")
  awk -F': ' '/User time|System time/ {s += $2} END {print s}' "$log" >"$DATA/cpu.log"
  # h:mm:ss or m:ss.ss -> seconds
  echo "$(echo "$wall" | awk -F: '{s=0; for (i=1;i<=NF;i++) s=s*60+$i; print s}') $kb"
}

run_cmd() {  # N STAGE -> the prefsift command line
  local n=$1 stage=$2
  local out=$DATA/out-$n-$stage
  if [ "$stage" = run ]; then
    echo "$PREFSIFT run --plan $DATA/plan-$n.json --out $out --overwrite --threads $THREADS -q --timings"
  else
    local cmd=$stage
    [ "$stage" = exact ] && cmd=dedup  # the exact stage's own subcommand
    echo "$PREFSIFT $cmd --plan $DATA/plan-$n.json --out $out --overwrite --threads $THREADS -q"
  fi
}

# Baseline RSS per command on a tiny file.
make_data() {  # N DIR
  local seed=20260401
  [ "$SHAPE" = template ] && seed=20261203
  if [ "$EVAL" -gt 0 ]; then "$BUILD/bench/pipeline/$GEN" "$1" "$2" $seed "$EVAL" >/dev/null
  else "$BUILD/bench/pipeline/$GEN" "$1" "$2" >/dev/null; fi
}
make_data 100 "$DATA"
write_plan 100
declare -A BASE
for stage in $STAGES run; do
  read -r _ kb < <(timed $(run_cmd 100 "$stage"))
  BASE[$stage]=$kb
done

echo "data shape: $SHAPE ($GEN), $EVAL evaluation prompts (0 = the generator's default)"
echo "machine: $(nproc) cores, $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2 | sed 's/^ //'), load average $(cut -d' ' -f1-3 /proc/loadavg), threads $THREADS"
for n in "${SIZES[@]}"; do
  f=$DATA/prefs-$n.jsonl
  if [ ! -s "$f" ]; then  # generate under a temporary name so an interrupted run leaves no partial file
    mkdir -p "$DATA/gen" && make_data "$n" "$DATA/gen"
    mv "$DATA/gen/eval-$n.jsonl" "$DATA/eval-$n.jsonl" && mv "$DATA/gen/prefs-$n.jsonl" "$f"
    rm -f "$DATA/gen/truth-$n.tsv"
  fi
  write_plan "$n"
  bytes=$(stat -c %s "$f")
  echo
  echo "== $n records, $((bytes / 1000000)) MB ($f)"
  ceil=$("$BUILD/bench/pipeline/ceiling" "$f" 2>/dev/null)
  echo "$ceil" | tail -n 4 | sed 's/^/  ceiling: /'
  ceil_s=$(echo "$ceil" | awk '$1=="ceiling" {print $2}')
  # This disk's write speed for as many bytes (a run writes about its input's
  # size again): past the page cache, as prefsift writes its large files, and
  # through it (--buffered-output). dd's own time, system seconds beside it.
  for mode in direct buffered; do
    flag=; [ "$mode" = direct ] && flag=oflag=direct
    /usr/bin/time -f '%e %S' -o "$DATA/dd.time" dd if="$f" of="$DATA/write-floor" bs=4M $flag 2>/dev/null
    rm -f "$DATA/write-floor"
    read -r ws wsys < "$DATA/dd.time"
    awk -v m="$mode" -v s="$ws" -v sys="$wsys" -v b="$bytes" \
      'BEGIN { if (s <= 0) s = 0.01; printf "  write (%s): %.2f s, %.1f MB/s, system %.2f s\n", m, s, b / 1e6 / s, sys }'
  done
  printf '  %-8s %9s %8s %11s %9s %10s %8s %9s\n' stage seconds cpu_s records/s MB/s peakRSS_MB B/rec "ceiling%"
  for stage in $STAGES run; do
    read -r s kb < <(timed $(run_cmd "$n" "$stage"))
    awk -v st="$stage" -v s="$s" -v cpu="$(cat "$DATA/cpu.log")" -v kb="$kb" -v base="${BASE[$stage]}" -v n="$n" \
      -v b="$bytes" -v c="$ceil_s" \
      'BEGIN { if (s <= 0) s = 0.01;
               printf "  %-8s %9.2f %8.2f %11.0f %9.1f %10.1f %8.0f %8.1f%%\n", st, s, cpu, n / s, b / 1e6 / s,
                      kb / 1024, (kb - base) * 1024 / n, 100 * c / s }'
    [ "$stage" = run ] && sed 's/^timing: /    /; s/^timing \([a-z]*\): */    \1: /' "$DATA/timings.log"  # the whole run's phases, pass 1's CPU by part, peak memory by phase
    rm -rf "$DATA/out-$n-$stage"
  done
done
