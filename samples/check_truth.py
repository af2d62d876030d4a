#!/usr/bin/python3
"""Independent check of samples/truth.json against the generated files.

Usage:  /usr/bin/python3 samples/check_truth.py [--dir samples]

Re-reads the JSONL files from disk (not the generator's memory) and checks the ledger, the malformed lines, the
planted groups, the near-duplicate Jaccard values, the leak n-grams and the personal-data offsets. Checksums and
ranges are confirmed with outside references installed from Debian: python3-stdnum (Luhn, IBAN, BSN, DNI, NIR,
Aadhaar), python3-phonenumbers (number parsing) and Python's ipaddress (RFC 5737 / RFC 3849 ranges).
Prints a summary and exits non-zero on the first failed check.
"""
import argparse
import ipaddress
import json
import os
import sys
import unicodedata

from stdnum import iban as std_iban, luhn as std_luhn          # python3-stdnum (Debian)
from stdnum.nl import bsn as std_bsn
from stdnum.es import dni as std_dni
from stdnum.fr import nir as std_nir
from stdnum.in_ import aadhaar as std_aadhaar
import phonenumbers                                            # python3-phonenumbers (Debian)

DOC_V4 = [ipaddress.ip_network(n) for n in ("192.0.2.0/24", "198.51.100.0/24", "203.0.113.0/24")]  # RFC 5737
DOC_V6 = ipaddress.ip_network("2001:db8::/32")                                                    # RFC 3849


def norm(s):
    return " ".join(unicodedata.normalize("NFKC", s).casefold().split())


def shingles(s, n=5):
    t = norm(s).split(" ") if norm(s) else []
    if len(t) < n:
        return {tuple(t)} if t else set()
    return {tuple(t[i:i + n]) for i in range(len(t) - n + 1)}


def jac(a, b):
    sa, sb = shingles(a), shingles(b)
    return len(sa & sb) / len(sa | sb)


def check(cond, msg):
    if not cond:
        print("FAIL: " + msg)
        sys.exit(1)


def load(path):
    good, bad = {}, {}
    with open(path, "rb") as fh:
        raw = fh.read()
    check(raw.endswith(b"\n") and b"\r" not in raw, path + ": LF endings")
    for ln, line in enumerate(raw.split(b"\n")[:-1], 1):
        try:
            good[ln] = json.loads(line.decode("utf-8"))
        except (UnicodeDecodeError, ValueError):
            bad[ln] = line
    return good, bad


def prompt_of(f, r):
    if f == "comparisons.jsonl":
        return r.get("ask")
    if f == "pairwise.jsonl":
        return r.get("prompt")
    t = r.get("turns")
    return "\n".join(x["content"] for x in t) if isinstance(t, list) else None


def cands_of(f, r):
    if f == "comparisons.jsonl":
        c = r.get("replies")
        return [x.get("text") for x in c] if isinstance(c, list) else c
    if f == "pairwise.jsonl":
        return [r["chosen"], r["rejected"]] if "chosen" in r and "rejected" in r else None
    return r.get("answers")


def structurally_valid(f, r):
    p, c = prompt_of(f, r), cands_of(f, r)
    if not isinstance(p, str) or not isinstance(c, list) or len(c) < 2:
        return False
    if not all(isinstance(x, str) for x in c):
        return False
    if f == "comparisons.jsonl":
        k = r.get("pick")
        return isinstance(k, int) and 0 <= k < len(c)
    if f == "ranked_chat.jsonl":
        rk = r.get("ranks")
        return isinstance(rk, list) and len(rk) == len(c) and all(isinstance(x, int) and 1 <= x <= len(c) for x in rk)
    return True


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--dir", default=os.path.dirname(os.path.abspath(__file__)))
    d = ap.parse_args().dir
    T = json.load(open(os.path.join(d, "truth.json"), encoding="utf-8"))
    files = {}
    for f in ("comparisons.jsonl", "pairwise.jsonl", "ranked_chat.jsonl"):
        files[f] = load(os.path.join(d, f))
    byid = {}
    for f, (good, bad) in files.items():
        for ln, r in good.items():
            rid = r.get("uid") or r.get("id") or r.get("key")
            byid[(f, rid)] = (ln, r)

    # ledger and malformed lines
    mal = {(m["file"], m["line"]) for m in T["malformed"]}
    for f, (good, bad) in files.items():
        c = T["counts"][f]
        check(c["lines"] == len(good) + len(bad), f + ": line count")
        check(c["valid_records"] + c["malformed"] == c["lines"], f + ": ledger")
        invalid = set(bad) | {ln for ln, r in good.items() if not structurally_valid(f, r)}
        check(invalid == {ln for (ff, ln) in mal if ff == f}, f + ": malformed lines match truth")
    print("ledger and %d malformed lines: ok" % len(mal))

    def rec(ref):
        ln, r = byid[(ref["file"], ref["id"])]
        check(ln == ref["line"], "line number of " + ref["id"])
        return ref["file"], r

    def judgment_key(f, r):
        c = [norm(x) for x in cands_of(f, r)]
        if f == "ranked_chat.jsonl":
            return (norm(prompt_of(f, r)), tuple(sorted(zip(c, r["ranks"]))))
        chosen = c[r["pick"]] if f == "comparisons.jsonl" else c[0]
        return (norm(prompt_of(f, r)), tuple(sorted(c)), chosen)

    for g in T["exact_duplicates"]:
        keys = {judgment_key(*rec(x)) for x in g["records"]}
        check(len(keys) == 1 and len(g["records"]) >= 2, "exact duplicate group %r" % g["records"][0])
    for g in T["label_conflicts"]:
        recs = [rec(x) for x in g["records"]]
        base = {(k[0], k[1]) if len(k) == 3 else (k[0], tuple(sorted(x for x, _ in k[1]))) for k in
                (judgment_key(f, r) for f, r in recs)}
        check(len(base) == 1, "label conflict: same prompt and candidates")
        check(len({judgment_key(f, r) for f, r in recs}) >= 2, "label conflict: judgments differ")
    for x in T["degenerate"]:
        f, r = rec(x)
        c = cands_of(f, r)
        check(len(c) == 2 and c[0] != c[1] and norm(c[0]) == norm(c[1]), "degenerate " + x["id"])
    for g in T["same_prompt_different_candidates"]:
        recs = [rec(x) for x in g["records"]]
        check(len({norm(prompt_of(f, r)) for f, r in recs}) == 1, "same prompt")
        check(len({tuple(sorted(norm(c) for c in cands_of(f, r))) for f, r in recs}) == len(recs), "different candidates")
    print("exact %d, conflicts %d, degenerate %d, same-prompt %d: ok" % (
        len(T["exact_duplicates"]), len(T["label_conflicts"]), len(T["degenerate"]),
        len(T["same_prompt_different_candidates"])))

    nd = T["near_duplicates"]
    n_hi = 0
    for cl in nd["clusters"]:
        for p in cl["pairs"]:
            a, b = prompt_of(*rec(p["a"])), prompt_of(*rec(p["b"]))
            j = jac(a, b)
            check(abs(j - p["jaccard"]) < 1e-6 and norm(a) != norm(b), "near-duplicate Jaccard %r" % p)
            n_hi += j >= 0.85
    for p in nd["distinct_same_topic_pairs"]:
        j = jac(prompt_of(*rec(p["a"])), prompt_of(*rec(p["b"])))
        check(abs(j - p["jaccard"]) < 1e-6 and j < 0.3, "distinct pair %r" % p)
    print("near-duplicate pairs recomputed: ok (%d of %d at >= 0.85)" % (
        n_hi, sum(len(c["pairs"]) for c in nd["clusters"])))

    heldout = open(os.path.join(d, "eval", "heldout_questions.txt"), encoding="utf-8").read().split("\n")[:-1]
    staff = [json.loads(x) for x in open(os.path.join(d, "eval", "staff_eval.jsonl"), encoding="utf-8")]
    staff_by = {s["qid"]: s for s in staff}

    def grams(s, n=13):
        t = norm(s).split(" ")
        return {tuple(t[i:i + n]) for i in range(len(t) - n + 1)}

    for lk in T["leaks"]:
        f, r = rec(lk)
        q = heldout[lk["eval_item"] - 1] if lk["eval_set"] == "heldout_questions" else staff_by[lk["eval_item"]]["question"]
        if lk["kind"] == "reference_answer_copy":
            check(cands_of(f, r)[lk["candidate_index"]] == staff_by[lk["eval_item"]]["reference"], "reference copy")
        elif lk["kind"] == "verbatim":
            check(prompt_of(f, r) == q, "verbatim leak")
        else:
            check(grams(prompt_of(f, r)) & grams(q) and norm(prompt_of(f, r)) != norm(q), "leak " + lk["kind"])
    print("%d leaks: ok" % len(T["leaks"]))

    def value_ok(kind, v):
        c = v.replace(" ", "").replace("-", "")
        if kind == "card-number":
            return std_luhn.is_valid(c)
        if kind == "card-number-bad-luhn":
            return not std_luhn.is_valid(c)
        if kind == "bank-account-iban":
            return std_iban.is_valid(v)
        if kind == "bank-account-iban-bad-check":
            return not std_iban.is_valid(v)
        if kind == "dutch-citizen-service-number":
            return std_bsn.is_valid(v)
        if kind == "spanish-identity-number":
            return std_dni.is_valid(v)
        if kind == "french-social-security-number":
            return std_nir.is_valid(v)
        if kind == "indian-aadhaar-number":
            return std_aadhaar.is_valid(v)
        if kind == "ipv4-address":
            return any(ipaddress.ip_address(v) in n for n in DOC_V4)
        if kind == "ipv6-address":
            return ipaddress.ip_address(v) in DOC_V6
        if kind == "hardware-address":
            return int(v[:2], 16) & 0x02 == 0x02 and int(v[:2], 16) & 0x01 == 0   # locally administered, unicast
        if kind.startswith("phone-"):
            region = "US" if kind == "phone-north-american" else "GB"
            num = phonenumbers.parse(v, region)
            nat = str(num.national_number)
            if kind == "phone-north-american":
                return num.country_code == 1 and nat[3:6] == "555" and 100 <= int(nat[6:]) <= 199
            return num.country_code == 44 and (nat.startswith("7700900") or nat.startswith("2079460")
                                               or nat.startswith("1632960"))
        if kind == "mailbox-address":
            dom = v.split("@")[1]
            return dom in ("example.com", "example.org", "example.net") or dom.endswith((".example", ".test")) or \
                dom.endswith((".example.com", ".example.org", ".example.net"))
        if kind == "us-social-security-number-never-issued":
            a, g, s = v.split("-")
            return a in ("000", "666") or a >= "900" or g == "00" or s == "0000"
        if kind == "version-string":
            try:
                ipaddress.ip_address(v)
                return False
            except ValueError:
                return True
        return True

    pd = T["personal_data"]
    for e in pd["planted"] + pd["decoys"]:
        ln, r = byid[(e["file"], e["id"])]
        node = r
        for part in e["pointer"].split("/")[1:]:
            node = node[int(part)] if isinstance(node, list) else node[part]
        check(node.encode("utf-8")[e["byte_start"]:e["byte_end"]] == e["value"].encode("utf-8"), "offsets " + e["id"])
        check(node[e["char_start"]:e["char_end"]] == e["value"], "char offsets " + e["id"])
        check(value_ok(e["kind"], e["value"]), "value check %s %s" % (e["kind"], e["value"]))
    print("%d planted personal-data values and %d decoys: offsets and checksums ok" % (len(pd["planted"]), len(pd["decoys"])))
    print("ALL CHECKS PASSED")


if __name__ == "__main__":
    main()
