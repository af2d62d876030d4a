#!/bin/sh
# Compares two output folders of prefsift runs made in the reproducible mode
# (SOURCE_DATE_EPOCH set) by two builds: every file must be byte-identical,
# except for the source revision and the SHA-256 digests of files that embed
# it. Used to check that a refactoring keeps outputs byte-identical
# (docs/architecture.md). Exit 0 when the same.
#
# usage: scripts/compare-outputs.sh OLD_DIR NEW_DIR
a=$1; b=$2
norm() { sed -E 's/"revision": "[^"]*"/"revision": "X"/; s/revision [0-9a-f]{12}(-modified)?/revision X/; s/\(([0-9a-f]{12})(-modified)?\)/(X)/; s/[0-9a-f]{64}/H/g' "$1"; }
rc=0
for f in $(cd "$a" && find . -type f | sort); do
  if ! cmp -s "$a/$f" "$b/$f"; then
    if [ "$(norm "$a/$f" | md5sum)" = "$(norm "$b/$f" | md5sum)" ]; then echo "same but revision/digests: $f"; else echo "DIFFERENT: $f"; rc=1; fi
  fi
done
[ "$(cd "$a" && find . -type f | sort)" = "$(cd "$b" && find . -type f | sort)" ] || { echo "DIFFERENT file lists"; rc=1; }
exit $rc
