#!/usr/bin/env bash
# Installs what is needed, builds prefsift with its tests, and runs the whole
# test suite with ctest; then the same suite built with AddressSanitizer and
# UndefinedBehaviorSanitizer (build-asan), then a short run of every fuzz
# target when clang with libFuzzer is available (docs/hardening.md).
#   PREFSIFT_SANITIZE_TESTS=0   skip the sanitizer build
#   PREFSIFT_FUZZ_SECONDS=N     seconds per fuzz target (default 20; 0 = skip)
set -euo pipefail
cd "$(dirname "$0")/.."
t0=$(date +%s)
scripts/install-deps.sh
jobs="$(nproc)"
build="${PREFSIFT_BUILD_DIR:-build}"
cmake -S . -B "$build" -G Ninja -DCMAKE_BUILD_TYPE=Release ${PREFSIFT_CMAKE_ARGS:-} >/dev/null
cmake --build "$build" -j"$jobs"
# Tests write under a temporary folder of this checkout's own, so two
# checkouts tested at once on one machine never share a path (GoogleTest's
# TempDir() reads TEST_TMPDIR; std::filesystem and mktemp read TMPDIR).
export TEST_TMPDIR="$PWD/$build/test-tmp/" TMPDIR="$PWD/$build/test-tmp"
rm -rf "$TMPDIR" && mkdir -p "$TMPDIR"
(cd "$build" && ctest --output-on-failure -j"$jobs" --timeout 600)
echo "test.sh: release build and tests done after $(( $(date +%s) - t0 )) s"

if [ "${PREFSIFT_SANITIZE_TESTS:-1}" != 0 ]; then
  # -O1: much faster to compile than -O2 and still fast enough to run.
  asan="${PREFSIFT_ASAN_BUILD_DIR:-build-asan}"
  cmake -S . -B "$asan" -G Ninja -DPREFSIFT_SANITIZE=ON -DCMAKE_BUILD_TYPE=Sanitize \
    -DCMAKE_CXX_FLAGS_SANITIZE="-O1 -DNDEBUG" -DCMAKE_C_FLAGS_SANITIZE="-O1 -DNDEBUG" \
    ${PREFSIFT_CMAKE_ARGS:-} >/dev/null
  cmake --build "$asan" -j"$jobs"
  # Excluded under the sanitizers: the *_fixture_current tests, which re-run
  # the Python/Node reference scripts and compare text files (no prefsift
  # code runs in them; they already ran above), and any test labelled
  # no_asan: the Slurm cluster test (tests/e2e/slurm/; it ran above with the
  # release binary; it checks the job plumbing, and the commands it runs are
  # covered under the sanitizers by their own tests).
  (cd "$asan" && ASAN_OPTIONS="detect_leaks=1:abort_on_error=1:strict_string_checks=1" \
     UBSAN_OPTIONS="print_stacktrace=1:halt_on_error=1" \
     ctest --output-on-failure -j"$jobs" --timeout 900 -E '_fixtures?_current$' -LE no_asan)
  echo "test.sh: sanitizer build and tests done after $(( $(date +%s) - t0 )) s"
fi

fuzz_secs="${PREFSIFT_FUZZ_SECONDS:-20}"
if [ "$fuzz_secs" != 0 ]; then
  if command -v clang++ >/dev/null && echo 'extern "C" int LLVMFuzzerTestOneInput(const char*, unsigned long) { return 0; }' |
       clang++ -x c++ -fsanitize=fuzzer - -o /tmp/prefsift-fuzz-probe.$$ 2>/dev/null; then
    rm -f /tmp/prefsift-fuzz-probe.$$
    scripts/fuzz.sh "$fuzz_secs"
  else
    echo "test.sh: clang with libFuzzer not available; fuzz run skipped"
  fi
fi
echo "test.sh: all done after $(( $(date +%s) - t0 )) s"
