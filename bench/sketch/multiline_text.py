#!/usr/bin/env python3
"""Rewrites a preferences file's texts as multi-line answers, for timing
matching normalisation on text laid out as real answers are (the generated
bench files are single-spaced prose, which takes no white-space folding).

Usage: multiline_text.py IN.jsonl OUT.jsonl [RECORDS=20000]

Each prompt and candidate is cut into its sentences (". "), and the sentences
laid out, by a fixed-seed random choice per sentence, as: a sentence starting
with a capital on the same line, a new line, a blank line (new paragraph), a
bullet ("- " or "1. ") line, or an indented line; lines end in "\n" and a few
in "\r\n" or trailing spaces. Only ASCII white space, case and layout change,
so every text stays ASCII and the words are the file's own.
"""
import json
import random
import sys


def layout(text, rng):
    sentences = [s for s in text.split(". ") if s]
    out = []
    for k, s in enumerate(sentences):
        s = s[:1].upper() + s[1:]
        if k + 1 < len(sentences):
            s += "."
        if not out:
            out.append(s)
            continue
        r = rng.random()
        if r < 0.35:
            out.append(" " + s)
        elif r < 0.55:
            out.append("\n" + s)
        elif r < 0.70:
            out.append("\n\n" + s)
        elif r < 0.82:
            out.append("\n- " + s)
        elif r < 0.90:
            out.append("\n%d. %s" % (k, s))
        elif r < 0.95:
            out.append("\n    " + s)
        else:
            out.append("  \r\n" + s)
    return "".join(out) + ("\n" if rng.random() < 0.5 else "")


def main():
    src, dst = sys.argv[1], sys.argv[2]
    records = int(sys.argv[3]) if len(sys.argv) > 3 else 20000
    rng = random.Random(1)
    with open(src) as f, open(dst, "w") as g:
        for n, line in enumerate(f):
            if n >= records:
                break
            j = json.loads(line)
            if isinstance(j.get("prompt"), str):
                j["prompt"] = layout(j["prompt"], rng)
            if isinstance(j.get("candidates"), list):
                j["candidates"] = [layout(c, rng) if isinstance(c, str) else c for c in j["candidates"]]
            g.write(json.dumps(j) + "\n")


if __name__ == "__main__":
    main()
