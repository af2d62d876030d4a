#!/usr/bin/env bash
# Builds the libFuzzer targets in fuzz/ with clang (AddressSanitizer +
# UndefinedBehaviorSanitizer + libFuzzer) into build-fuzz and runs each target
# for a set time. Usage: scripts/fuzz.sh [SECONDS_PER_TARGET] [TARGET...]
# (default 60 s; targets: record_reader rule_pack validators plan pipeline).
# Prints executions and findings per target; exits 1 if any target found a
# crash, leak, timeout or sanitizer report (the reproducer is kept in
# build-fuzz/findings/<target>/). Needs clang and libclang-rt-14-dev
# (scripts/install-deps.sh installs them). docs/hardening.md explains more.
set -uo pipefail
cd "$(dirname "$0")/.."
secs="${1:-60}"
shift || true
targets=("$@")
if [ "${#targets[@]}" -eq 0 ]; then targets=(record_reader rule_pack validators plan pipeline); fi
CC_BIN="${PREFSIFT_FUZZ_CC:-clang}"
CXX_BIN="${PREFSIFT_FUZZ_CXX:-clang++}"
if ! command -v "$CXX_BIN" >/dev/null; then
  echo "fuzz.sh: $CXX_BIN not found; install clang and libclang-rt-14-dev (scripts/install-deps.sh)" >&2
  exit 2
fi
build="${PREFSIFT_FUZZ_BUILD_DIR:-build-fuzz}"
flags="-fsanitize=fuzzer-no-link,address,undefined -fno-sanitize-recover=undefined -fno-omit-frame-pointer -g"
cmake -S . -B "$build" -G Ninja -DCMAKE_BUILD_TYPE=Release \
  -DCMAKE_C_COMPILER="$CC_BIN" -DCMAKE_CXX_COMPILER="$CXX_BIN" \
  -DCMAKE_C_FLAGS="$flags" -DCMAKE_CXX_FLAGS="$flags" \
  -DCMAKE_EXE_LINKER_FLAGS="-fsanitize=address,undefined" \
  -DPREFSIFT_FUZZ=ON -DPREFSIFT_ONLY="core;io;sketch;screen;stats;report;stages;pipeline" >/dev/null || exit 2
cmake --build "$build" -j"$(nproc)" --target $(printf 'fuzz_%s ' "${targets[@]}") || exit 2

status=0
export ASAN_OPTIONS="${ASAN_OPTIONS:-detect_leaks=1:allocator_may_return_null=1}"
export UBSAN_OPTIONS="${UBSAN_OPTIONS:-print_stacktrace=1:halt_on_error=1}"
printf '%-15s %8s %12s %10s  %s\n' target seconds executions exec/s findings
for t in "${targets[@]}"; do
  work="$build/corpus/$t"          # grows; the committed seeds stay small
  findings="$build/findings/$t"
  mkdir -p "$work" "$findings"
  log="$build/fuzz_$t.log"
  # -rss_limit_mb: the sanitizers' shadow memory counts too. -timeout: a
  # single input taking longer than 10 s is reported as a hang.
  dict=()
  if [ "$t" != validators ]; then dict=(-dict=fuzz/json.dict); fi
  "$build/fuzz/fuzz_$t" "$work" "fuzz/corpus/$t" "${dict[@]}" -max_total_time="$secs" -timeout=10 -rss_limit_mb=2048 \
    -max_len=8192 -artifact_prefix="$findings/" -print_final_stats=1 >"$log" 2>&1
  rc=$?
  execs=$(grep -m1 '^stat::number_of_executed_units' "$log" | awk '{print $2}')
  rate=$(grep -m1 '^stat::average_exec_per_sec' "$log" | awk '{print $2}')
  found=$(find "$findings" -type f | wc -l)
  verdict="none"
  if [ "$rc" -ne 0 ] || [ "$found" -gt 0 ]; then
    verdict="FOUND ($found file(s) in $findings; log $log)"
    status=1
    grep -m5 -E 'ERROR|runtime error|SUMMARY' "$log" | sed 's/^/    /'
  fi
  printf '%-15s %8s %12s %10s  %s\n' "$t" "$secs" "${execs:-?}" "${rate:-?}" "$verdict"
done
exit $status
