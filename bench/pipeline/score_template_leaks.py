#!/usr/bin/python3
"""Scores the leakage stage on make_template_prefs data against its truth file.

  score_template_leaks.py TRUTH.tsv OUT_DIR

TRUTH.tsv is make_template_prefs' truth-N.tsv; OUT_DIR is a `prefsift run`
output folder (leakage.jsonl). A planted leak is a record whose prompt copies an
evaluation item (verbatim, one word changed, or embedded); an exact or near
duplicate of a planted leak copies it too, so it counts as a leak of the same
item. Prints, per kind and per detector, how many were found, and the records
listed that copy nothing (false positives).
"""
import collections
import json
import sys


def main():
    truth_path, out_dir = sys.argv[1], sys.argv[2]
    planted = {}  # id -> (kind, item)
    copies = []   # (id, kind, of-record)
    with open(truth_path) as f:
        next(f)
        for line in f:
            rid, kind, of = line.rstrip("\n").split("\t")
            if kind.startswith("leak_"):
                planted[rid] = (kind, of)
            else:
                copies.append((rid, kind, of))
    for rid, kind, of in copies:  # in file order: a copy's original was written first
        if of in planted:
            planted[rid] = ("copy_of_leak", planted[of][1])
    found = {}
    with open(out_dir + "/leakage.jsonl") as f:
        for line in f:
            j = json.loads(line)
            found[j["id"]] = j
    per_kind = collections.Counter(k for k, _ in planted.values())
    hit_kind = collections.Counter()
    det = collections.Counter()
    det_true = collections.Counter()
    for rid, j in found.items():
        items = {m["eval_item"] for m in j["matches"]}
        ok = rid in planted and planted[rid][1] in items
        if ok:
            hit_kind[planted[rid][0]] += 1
        for m in j["matches"]:
            det[m["detector"]] += 1
            det_true[m["detector"]] += rid in planted and m["eval_item"] == planted[rid][1]
    tp = sum(hit_kind.values())
    print(f"records listed {len(found)}, planted (with copies) {len(planted)}")
    print(f"precision {tp}/{len(found)}  recall {tp}/{len(planted)}")
    for k in sorted(per_kind):
        print(f"  {k:14s} recall {hit_kind[k]}/{per_kind[k]}")
    for d in sorted(det):
        print(f"  detector {d:7s} listed {det[d]}, of them planted {det_true[d]}")
    fp = [rid for rid in found if rid not in planted]
    print(f"false positives {len(fp)}: {fp[:10]}")


if __name__ == "__main__":
    main()
