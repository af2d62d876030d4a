#!/usr/bin/env bash
# Builds prefsift and its tests with ThreadSanitizer (build-tsan) and runs the
# suite: the check for data races in the threaded parts (pass 1's workers and
# in-order step, the read-ahead and writer threads, output hashing beside the
# write, the leakage index built side by side, stage outputs beside pass 2).
# Not part of CI (the instrumented build and run take about 30 minutes on 2
# cores); results go into docs/performance.md. A report fails its test
# (ThreadSanitizer's exit code 66).
#   PREFSIFT_TSAN_BUILD_DIR=DIR   build folder (default build-tsan)
# Libraries from Debian (RE2, simdjson, OpenSSL, ...) are not instrumented:
# races inside them are not seen, only ours around them.
set -euo pipefail
cd "$(dirname "$0")/.."
scripts/install-deps.sh
jobs="$(nproc)"
tsan="${PREFSIFT_TSAN_BUILD_DIR:-build-tsan}"
cmake -S . -B "$tsan" -G Ninja -DPREFSIFT_SANITIZE_THREADS=ON -DCMAKE_BUILD_TYPE=RelWithDebInfo \
  -DCMAKE_CXX_FLAGS_RELWITHDEBINFO="-O1 -g -DNDEBUG" ${PREFSIFT_CMAKE_ARGS:-} >/dev/null
cmake --build "$tsan" -j"$jobs"
export TEST_TMPDIR="$PWD/$tsan/test-tmp/" TMPDIR="$PWD/$tsan/test-tmp"
rm -rf "$TMPDIR" && mkdir -p "$TMPDIR"
# The *_fixture_current tests run only the Python/Node reference scripts.
(cd "$tsan" && TSAN_OPTIONS="halt_on_error=0 second_deadlock_stack=1" \
   ctest --output-on-failure -j"$jobs" --timeout 1500 -E '_fixtures?_current$')
