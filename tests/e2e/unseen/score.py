#!/usr/bin/python3
"""Scores a prefsift run on the Harbourline Ferries set against its truth.json
(precision and recall per detector; docs/detection-on-unseen-data.md).

  /usr/bin/python3 tests/e2e/unseen/score.py DATA_DIR OUT_DIR
"""
import json
import sys
import unicodedata

FOLD = str.maketrans({"\u2018": "'", "\u2019": "'", "\u201c": '"', "\u201d": '"', "\u2013": "-", "\u2014": "-"})


def norm(s):
    """prefsift's match normalisation for this data (NFKC, case fold,
    look-alike punctuation, white space)."""
    return " ".join(unicodedata.normalize("NFKC", s).casefold().translate(FOLD).split())


def main():
    data, out = sys.argv[1], sys.argv[2]
    truth = json.load(open(f"{data}/truth.json"))
    summary = json.load(open(f"{out}/summary.json"))
    leaks = {l["id"]: l for l in truth["leaks"]}
    found = {}
    for line in open(f"{out}/leakage.jsonl"):
        j = json.loads(line)
        found[j["id"]] = j
    print("leakage (records):")
    kinds = sorted({l["kind"] for l in leaks.values()})
    for kind in kinds:
        ids = [i for i, l in leaks.items() if l["kind"] == kind]
        hit = [i for i in ids if i in found and any(m["eval_item"] == leaks[i]["eval_item"] for m in found[i]["matches"])]
        print(f"  {kind:10s} recall {len(hit)}/{len(ids)}")
    fp = [i for i in found if i not in leaks]
    tp = [i for i in found if i in leaks]
    print(f"  all        precision {len(tp)}/{len(found)}  recall {len(tp)}/{len(leaks)}  false positives {len(fp)}"
          f" (template-only records: {truth['template_only']} + near-duplicate copies {len(truth['near_dups'])})")
    by_det = {}
    for i, j in found.items():
        for m in j["matches"]:
            by_det.setdefault(m["detector"], set()).add(i)
    for det, ids in sorted(by_det.items()):
        t = sum(1 for i in ids if i in leaks)
        print(f"  detector {det:7s} flagged {len(ids):4d}  of them planted leaks {t}")
    # near-duplicates: each planted copy in the same cluster as its original
    cluster_of = {}
    for line in open(f"{out}/clusters.jsonl"):
        c = json.loads(line)
        for m in c["members"]:
            cluster_of[m] = c["cluster"]
    dups = truth["near_dups"]
    prompts = {}
    for line in open(f"{data}/prefs.jsonl", encoding="utf-8"):
        r = json.loads(line)
        prompts[r["id"]] = norm(r["question"])
    print("near duplicates (planted copy clustered with its original):")
    for kind in sorted({d["kind"] for d in dups}):
        ds = [d for d in dups if d["kind"] == kind]
        # found: one near-duplicate cluster, or the same prompt after
        # normalisation (then the exact-prompt grouping holds them together)
        ok = [d for d in ds if (d["id"] in cluster_of and cluster_of.get(d["of"]) == cluster_of[d["id"]]) or
              prompts[d["id"]] == prompts[d["of"]]]
        print(f"  {kind:13s} recall {len(ok)}/{len(ds)}")
    planted_pairs = {(d["of"], d["id"]) for d in dups}
    clustered = sum(1 for c in set(cluster_of.values()))
    members = len(cluster_of)
    print(f"  clusters {clustered}, records in clusters {members} (planted: {len(dups)} pairs)")
    audit = summary["stages"].get("bias", {}).get("shortcut_audit", {})
    keys = ["heldout_accuracy", "chance_accuracy", "lift", "p_value", "flagged", "comparisons"]
    print("shortcut audit:", {k: audit.get(k) for k in keys}, "features:", audit.get("shortcut_features"))


if __name__ == "__main__":
    main()
