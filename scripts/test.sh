#!/usr/bin/env bash
# Installs what is needed, builds prefsift with its tests, and runs the whole
# test suite with ctest.
set -euo pipefail
cd "$(dirname "$0")/.."
scripts/install-deps.sh
build="${PREFSIFT_BUILD_DIR:-build}"
cmake -S . -B "$build" -G Ninja -DCMAKE_BUILD_TYPE=Release ${PREFSIFT_CMAKE_ARGS:-} >/dev/null
cmake --build "$build" -j"$(nproc)"
cd "$build"
ctest --output-on-failure -j"$(nproc)" --timeout 600
