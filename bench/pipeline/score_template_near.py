#!/usr/bin/python3
"""Scores the near stage's prompt clusters on make_template_prefs data.

  score_template_near.py TRUTH.tsv OUT_DIR [PREFS.jsonl]

TRUTH.tsv is make_template_prefs' truth-N.tsv; OUT_DIR is a `prefsift run`
output folder (clusters.jsonl). A planted near duplicate is a record whose
prompt is an earlier record's prompt with 2-4 words inserted. An exact
duplicate record is rejected by the exact stage before the near stage runs, so
a planted pair whose earlier record is an exact duplicate is scored against the
record it copies.

Recall: planted pairs whose two records are in one cluster. Precision: of the
records in clusters, those linked to another member of their cluster by
planted pairs directly. A cluster of prompts that
share only stock sentences counts against precision here even when their
Jaccard similarity is at the threshold, so with PREFS.jsonl the script also
gives the planted pairs whose word 5-gram Jaccard (lower-cased \\w+ words, an
approximation of the stage's shingles) is at or above 0.8: those the stage is
meant to find.
"""
import collections
import json
import re
import sys


def shingles(text, n=5):
    words = re.findall(r"\w+", text.lower())
    if len(words) < n:
        return {" ".join(words)}
    return {" ".join(words[i:i + n]) for i in range(len(words) - n + 1)}


def main():
    truth_path, out_dir = sys.argv[1], sys.argv[2]
    prefs_path = sys.argv[3] if len(sys.argv) > 3 else None
    copy_of = {}
    pairs = []
    with open(truth_path) as f:
        next(f)
        for line in f:
            rid, kind, of = line.rstrip("\n").split("\t")
            if kind == "exact_duplicate":
                copy_of[rid] = of
            elif kind == "near_duplicate":
                pairs.append((rid, of))

    def root(r):
        while r in copy_of:
            r = copy_of[r]
        return r

    pairs = [(a, root(b)) for a, b in pairs]
    cluster = {}
    members = []
    with open(out_dir + "/clusters.jsonl") as f:
        for line in f:
            j = json.loads(line)
            for m in j["members"]:
                cluster[m] = j["cluster"]
            members.append(j["members"])
    found = [p for p in pairs if p[0] in cluster and cluster.get(p[0]) == cluster.get(p[1])]
    print(f"planted near-duplicate pairs {len(pairs)}, in one cluster {len(found)}, "
          f"recall {len(found) / max(1, len(pairs)):.4f}")

    # Precision over clustered records.
    adj = collections.defaultdict(set)
    for a, b in pairs:
        adj[a].add(b)
        adj[b].add(a)
    clustered = explained = 0
    for ms in members:
        inside = set(ms)
        for m in ms:
            clustered += 1
            explained += any(o in inside for o in adj[m])
    print(f"records in clusters {clustered}, linked by planted pairs {explained}, "
          f"precision {explained / max(1, clustered):.4f}")

    if prefs_path:
        want = {x for p in pairs for x in p}
        text = {}
        with open(prefs_path) as f:
            for line in f:
                j = json.loads(line)
                if j["id"] in want:
                    text[j["id"]] = j["prompt"]
        high = []
        for a, b in pairs:
            sa, sb = shingles(text[a]), shingles(text[b])
            if len(sa & sb) / len(sa | sb) >= 0.8:
                high.append((a, b))
        hf = [p for p in high if p[0] in cluster and cluster.get(p[0]) == cluster.get(p[1])]
        print(f"planted pairs with 5-gram Jaccard >= 0.8: {len(high)}, in one cluster {len(hf)}, "
              f"recall {len(hf) / max(1, len(high)):.4f}")


if __name__ == "__main__":
    main()
