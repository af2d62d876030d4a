#!/bin/sh
# Store benchmark (docs/store.md, "Figures"): builds a store of N records in
# batches of B, then times adding one more batch of 10k records to it, and a
# full run over all N + 10k records (the rebuild the store avoids). Prints both
# times and the store's size on disk per stored record. Not a test.
#
# usage: bench/store/store_bench.sh BUILD_DIR [N=100000] [B=100000] [THREADS=2]
set -eu
build=$1; n=${2:-100000}; b=${3:-100000}; threads=${4:-2}
bin=$build/src/cli/prefsift
here=$(cd "$(dirname "$0")" && pwd)
work=$(mktemp -d /tmp/prefsift-store-bench.XXXXXX)
trap 'rm -rf "$work"' EXIT
cat > "$work/plan.json" <<'PLAN'
{"inputs": [{"path": "b0.jsonl", "layout": {"id": "/id", "prompt": "/prompt", "candidates": "/cands",
                                              "choice": "/pick", "thread": "/thread",
                                              "annotator": "/annotator", "source": "/source"}}]}
PLAN
now() { date +%s.%N; }
i=0; start=0; t0=$(now)
while [ "$start" -lt "$n" ]; do
  /usr/bin/python3 "$here/gen.py" "$start" "$b" "$i" > "$work/b$i.jsonl"
  "$bin" add -q --threads "$threads" --store "$work/store.db" --plan "$work/plan.json" --out "$work/out$i" "$work/b$i.jsonl"
  rm -rf "$work/out$i"
  start=$((start + b)); i=$((i + 1))
done
t1=$(now)
/usr/bin/python3 "$here/gen.py" "$start" 10000 99 > "$work/new.jsonl"
t2=$(now)
"$bin" add -q --threads "$threads" --store "$work/store.db" --plan "$work/plan.json" --out "$work/outnew" "$work/new.jsonl"
t3=$(now)
files=""
k=0; while [ $k -lt $i ]; do files="$files $work/b$k.jsonl"; k=$((k + 1)); done
/usr/bin/python3 - "$work" $files "$work/new.jsonl" <<'PY'
import json, sys
work, files = sys.argv[1], sys.argv[2:]
layout = {"id": "/id", "prompt": "/prompt", "candidates": "/cands", "choice": "/pick", "thread": "/thread",
          "annotator": "/annotator", "source": "/source"}
json.dump({"inputs": [{"path": f, "layout": layout} for f in files]}, open(work + "/full.json", "w"))
PY
t4=$(now)
"$bin" run -q --threads "$threads" --plan "$work/full.json" --out "$work/full"
t5=$(now)
stored=$(/usr/bin/python3 -c "import sqlite3,sys;print(sqlite3.connect(sys.argv[1]).execute('select count(*) from records').fetchone()[0])" "$work/store.db")
"$bin" history --store "$work/store.db" >/dev/null
bytes=$(du -b "$work/store.db" | cut -f1)
wal=$(du -b "$work/store.db-wal" 2>/dev/null | cut -f1 || echo 0)
echo "store: $n records in batches of $b, built in $(echo "$t1 - $t0" | bc) s; $stored records stored"
echo "add one batch of 10000 to it:        $(echo "$t3 - $t2" | bc) s"
echo "full run over all $((n + 10000)) records: $(echo "$t5 - $t4" | bc) s"
echo "store size: $bytes bytes (+ WAL ${wal:-0}), $(echo "$bytes / $stored" | bc) bytes per stored record"
