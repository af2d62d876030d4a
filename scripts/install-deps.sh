#!/usr/bin/env bash
# Installs everything prefsift needs to build, test and run its demo on Debian 12.
# Safe to run again; needs root (or sudo). clang + libclang-rt-14-dev: libFuzzer
# targets in fuzz/ (scripts/fuzz.sh). chromium: the report.html tests in tests/e2e.
# python3-colorspacious: the report palette check (tests/reference/palette_cvd.py).
# slurm-wlm + munge: the single-node cluster the Slurm test starts
# (scripts/slurm/, tests/e2e/slurm/; docs/scale.md). The test's cluster uses its
# own key, socket, ports and files; it needs none of the packages' own services.
set -euo pipefail
SUDO=""
if [ "$(id -u)" -ne 0 ]; then SUDO="sudo"; fi
PKGS=(build-essential cmake ninja-build pkg-config git
  libre2-dev libxxhash-dev nlohmann-json3-dev libcli11-dev libgtest-dev libgmock-dev
  libsimdjson-dev libutf8proc-dev libsqlite3-dev libssl-dev zlib1g-dev libzstd-dev libbenchmark-dev
  zstd bzip2 python3 python3-stdnum python3-phonenumbers python3-scipy python3-sklearn python3-numpy
  python3-nltk python3-statsmodels
  python3-colorspacious
  unicode-data
  chromium
  clang libclang-rt-14-dev
  slurm-wlm munge)
missing=()
for p in "${PKGS[@]}"; do
  dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing+=("$p")
done
if [ "${#missing[@]}" -gt 0 ]; then
  $SUDO apt-get update -q
  DEBIAN_FRONTEND=noninteractive $SUDO apt-get install -y -q "${missing[@]}"
fi
