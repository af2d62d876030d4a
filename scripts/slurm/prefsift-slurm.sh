#!/usr/bin/env bash
# Runs a plan on a Slurm cluster as jobs on a shared folder (docs/scale.md):
#
#   1. cut      prefsift cut: the inputs into parts (here, at once)
#   2. observe  a job array, one task per part: the part's state file
#   3. decide   one job after every observe task succeeded (--dependency=afterok):
#               one decision file per part, summary.json, datasheet, report, gate verdict
#   4. apply    a job array after decide: each part's split files and rejects
#   5. collect  one job after apply: the parts' files concatenated in part order
#               into WORK/out, with decide's summary, datasheet and report
#
#   scripts/slurm/prefsift-slurm.sh --plan PLAN --work DIR --parts N [options] [-- SBATCH_ARGS...]
#
# Options:
#   --plan PLAN          the plan file (its inputs must be readable from every node)
#   --work DIR           the shared folder (created when missing); every node must see it at this path
#   --parts N            cut into N parts (or --part-bytes SIZE, e.g. 2G); each part is one observe and one apply task
#   --prefsift BIN       the prefsift binary every node runs (default: prefsift on PATH, made absolute)
#   --threads T          CPUs per task (default 2); passed to sbatch --cpus-per-task and prefsift --threads
#   --observe-mem M, --decide-mem M, --apply-mem M   memory per task for sbatch --mem (defaults 2G, 8G, 2G)
#   --time T             time limit per task for sbatch --time (default 2:00:00)
#   --no-collect         leave the outputs in WORK/apply/part-*/ (no concatenated copy)
#   --store FILE         add the batch to this growing store in the decide step (decide --store;
#                        docs/store.md): only the decide node opens it, so it need not be on the shared folder
#   -- SBATCH_ARGS...    more sbatch options for every job (partition, account, ...)
#
# Prints the job ids (one line: "observe=ID decide=ID apply=ID collect=ID") on stdout.
# When done, WORK/verdict holds decide's exit code (0 pass, 4 gate failed, 5 --strict
# and rejects, 6 nothing kept; docs/cli.md) and WORK/out the outputs.
#
# Every task writes under a temporary name in the shared folder and renames it
# into place when complete, so a task's output is whole or absent. Run the
# script again with the same arguments after a failure: only the tasks whose
# output is missing are submitted again (a failed observe task alone, say), and
# they give the same bytes. Logs: WORK/logs/STEP-PART.out.
set -euo pipefail

usage() { sed -n '2,/^set -euo/p' "$0" | sed '$d; s/^# \{0,1\}//' >&2; exit 2; }
die() { echo "prefsift-slurm: $*" >&2; exit 2; }

plan="" work="" parts="" part_bytes="" bin="" threads=2 collect=1 store=
observe_mem=2G decide_mem=8G apply_mem=2G time_limit=2:00:00
extra=()
while [ $# -gt 0 ]; do
  case "$1" in
    --plan) plan="$2"; shift 2 ;;
    --work) work="$2"; shift 2 ;;
    --parts) parts="$2"; shift 2 ;;
    --part-bytes) part_bytes="$2"; shift 2 ;;
    --prefsift) bin="$2"; shift 2 ;;
    --threads) threads="$2"; shift 2 ;;
    --observe-mem) observe_mem="$2"; shift 2 ;;
    --decide-mem) decide_mem="$2"; shift 2 ;;
    --apply-mem) apply_mem="$2"; shift 2 ;;
    --time) time_limit="$2"; shift 2 ;;
    --no-collect) collect=0; shift ;;
    --store) store="$2"; shift 2 ;;
    --) shift; extra=("$@"); break ;;
    -h|--help) usage ;;
    *) die "unknown option $1 (see --help)" ;;
  esac
done
[ -n "$plan" ] && [ -n "$work" ] || die "--plan and --work are required (see --help)"
[ -n "$parts" ] || [ -n "$part_bytes" ] || die "say how finely to cut: --parts N or --part-bytes SIZE"
[ -f "$plan" ] || die "no plan file $plan"
command -v sbatch >/dev/null || die "sbatch not found: this script submits to a Slurm cluster"
if [ -z "$bin" ]; then bin="$(command -v prefsift || true)"; fi
[ -n "$bin" ] && [ -x "$bin" ] || die "no prefsift binary (give --prefsift BIN)"
abs() { (cd "$(dirname "$1")" && echo "$(pwd)/$(basename "$1")"); }
bin="$(abs "$bin")"
plan="$(abs "$plan")"
if [ -n "$store" ]; then store="$(abs "$store")"; fi
mkdir -p "$work"
work="$(cd "$work" && pwd)"
mkdir -p "$work/states" "$work/apply" "$work/logs" "$work/jobs"

# 1. Cut (reads every input once; a re-run with the same plan and count changes nothing).
cut_args=(--parts "$parts")
[ -n "$part_bytes" ] && cut_args=(--part-bytes "$part_bytes")
"$bin" cut --plan "$plan" "${cut_args[@]}" --out "$work/parts.json" -q
count="$(grep -c '"part":' "$work/parts.json")"
[ "$count" -gt 0 ] || die "$work/parts.json lists no parts"

# The task scripts: written once into WORK/jobs, so a task can be re-run by hand too
# (sbatch --array=3 WORK/jobs/observe.sh).
write_job() {  # name, body
  local f="$work/jobs/$1.sh"
  {
    echo "#!/usr/bin/env bash"
    echo "# prefsift on Slurm, step $1 (written by scripts/slurm/prefsift-slurm.sh)."
    echo "set -euo pipefail"
    printf 'BIN=%q\nPLAN=%q\nWORK=%q\nTHREADS=%q\nCOUNT=%q\nSTORE=%q\n' "$bin" "$plan" "$work" "$threads" "$count" "$store"
    echo 'part="${SLURM_ARRAY_TASK_ID:-0}"'
    echo 'name="$(printf "part-%06d" "$part")"'
    echo 'tmp_tag="tmp-${SLURM_JOB_ID:-$$}-$(hostname -s)"'
    cat
  } > "$f.tmp" && chmod +x "$f.tmp" && mv -f "$f.tmp" "$f"
}

# Observe: one state file per part, written under a temporary name then renamed.
write_job observe <<'EOF'
final="$WORK/states/$name.state"
tmp="$WORK/states/.$name.state.$tmp_tag"
trap 'rm -f "$tmp"' EXIT
"$BIN" observe --plan "$PLAN" --parts "$WORK/parts.json" --part "$part" --threads "$THREADS" -q --out "$tmp"
mv -f "$tmp" "$final"
EOF

# Decide: one folder (decisions, summary, datasheet, report), then the verdict.
# Exit codes 4, 5, 6 are verdicts with every output written (docs/cli.md): the
# job succeeds so apply runs; WORK/verdict keeps the code.
write_job decide <<'EOF'
final="$WORK/decide"
tmp="$WORK/.decide.$tmp_tag"
trap 'rm -rf "$tmp"' EXIT
rc=0
# The state files in part order (their names sort in part order).
states=()
for ((i = 0; i < COUNT; i++)); do states+=("$WORK/states/$(printf 'part-%06d' "$i").state"); done
if [ -n "$STORE" ]; then
  # With a store, prefsift writes the folder itself (atomically, before the
  # store's commit): a re-run after a crash before the commit decides again
  # the same way; one after the commit finds the batch already added and
  # leaves the folder of the first run in place.
  "$BIN" decide --plan "$PLAN" --threads "$THREADS" -q --store "$STORE" --overwrite --out "$final" \
    --state "${states[@]}" || rc=$?
  case "$rc" in 0|4|5|6) ;; *) echo "decide failed with exit code $rc" >&2; exit "$rc" ;; esac
  [ -d "$final" ] || { echo "the store holds this batch but $final is missing" >&2; exit 3; }
else
  "$BIN" decide --plan "$PLAN" --threads "$THREADS" -q --out "$tmp" --state "${states[@]}" || rc=$?
  case "$rc" in 0|4|5|6) ;; *) echo "decide failed with exit code $rc" >&2; exit "$rc" ;; esac
  rm -rf "$final.old"
  if [ -e "$final" ]; then mv "$final" "$final.old"; fi
  mv "$tmp" "$final"
  rm -rf "$final.old"
fi
echo "$rc" > "$WORK/.verdict.$tmp_tag" && mv -f "$WORK/.verdict.$tmp_tag" "$WORK/verdict"
EOF

# Apply: one folder of split files and rejects per part.
write_job apply <<'EOF'
final="$WORK/apply/$name"
tmp="$WORK/apply/.$name.$tmp_tag"
trap 'rm -rf "$tmp"' EXIT
"$BIN" apply --plan "$PLAN" --parts "$WORK/parts.json" --part "$part" --threads "$THREADS" -q \
  --decisions "$WORK/decide/part-$part.decisions" --out "$tmp"
rm -rf "$final.old"
if [ -e "$final" ]; then mv "$final" "$final.old"; fi
mv "$tmp" "$final"
rm -rf "$final.old"
EOF

# Collect: each .jsonl name found in any part, concatenated in part order, plus
# decide's summary, datasheet and report; the folder appears whole.
write_job collect <<'EOF'
final="$WORK/out"
tmp="$WORK/.out.$tmp_tag"
trap 'rm -rf "$tmp"' EXIT
mkdir -p "$tmp"
shopt -s nullglob
names="$(for f in "$WORK"/apply/part-*/*.jsonl; do basename "$f"; done | sort -u)"
for n in $names; do
  : > "$tmp/$n"
  for d in "$WORK"/apply/part-*/; do
    if [ -f "$d/$n" ]; then cat "$d/$n" >> "$tmp/$n"; fi
  done
done
for f in "$WORK"/decide/*; do
  case "$(basename "$f")" in *.jsonl|*.json|*.md|*.html) [ -e "$tmp/$(basename "$f")" ] || cp "$f" "$tmp/" ;; esac
done
rm -rf "$final.old"
if [ -e "$final" ]; then mv "$final" "$final.old"; fi
mv "$tmp" "$final"
rm -rf "$final.old"
EOF

# Which tasks still have to run (their output is missing).
missing() {  # folder, suffix
  local list="" i n
  for ((i = 0; i < count; i++)); do
    n="$(printf 'part-%06d' "$i")"
    [ -e "$1/$n$2" ] || list="$list${list:+,}$i"
  done
  echo "$list"
}
submit() {  # step, dependency ("" = none), array list ("" = not an array), mem, then sbatch args
  local step="$1" dep="$2" array="$3" mem="$4" args=()
  args=(--parsable --job-name="prefsift-$step" --cpus-per-task="$threads" --mem="$mem" --time="$time_limit"
        --chdir="$work")
  if [ -n "$array" ]; then args+=(--array="$array" --output="$work/logs/$step-%a.out")
  else args+=(--output="$work/logs/$step.out"); fi
  if [ -n "$dep" ]; then args+=(--dependency="afterok:$dep" --kill-on-invalid-dep=yes); fi
  sbatch "${args[@]}" "${extra[@]}" "$work/jobs/$step.sh" | cut -d';' -f1
}

observe_ids="$(missing "$work/states" .state)"
decide_needed=1
[ -z "$observe_ids" ] && [ -f "$work/verdict" ] && [ -d "$work/decide" ] && decide_needed=0
apply_ids="$(missing "$work/apply" "")"
[ "$decide_needed" = 1 ] && apply_ids="$(seq -s, 0 $((count - 1)))"

observe_job="" decide_job="" apply_job="" collect_job=""
if [ -n "$observe_ids" ]; then observe_job="$(submit observe "" "$observe_ids" "$observe_mem")"; fi
if [ "$decide_needed" = 1 ]; then decide_job="$(submit decide "$observe_job" "" "$decide_mem")"; fi
if [ -n "$apply_ids" ]; then apply_job="$(submit apply "$decide_job" "$apply_ids" "$apply_mem")"; fi
if [ "$collect" = 1 ] && { [ -n "$apply_job" ] || [ ! -d "$work/out" ]; }; then
  collect_job="$(submit collect "$apply_job" "" 1G)"
fi
echo "observe=${observe_job:--} decide=${decide_job:--} apply=${apply_job:--} collect=${collect_job:--} parts=$count"
