#!/usr/bin/env python3
"""Writes a synthetic preference file (layout preset "choice") to time the near stage.

Usage: make_prompts.py N OUT.jsonl   (stdlib only; deterministic, seed 7)
Then:  prefsift near OUT.jsonl --layout choice -o OUT_DIR --overwrite

Prompts are 20-120 words from a 20,000-word made-up vocabulary (300 frequent words
make up about 30% of tokens). 10% of records are an earlier prompt with 1-3 words
replaced; each record has two short made-up candidates, and 2% of records have two
candidates that differ in one word only.
"""
import json
import random
import sys


def main():
    n, path = int(sys.argv[1]), sys.argv[2]
    rng = random.Random(7)
    vocab = ["w%05d" % i for i in range(20000)]
    frequent = vocab[:300]
    prompts = []
    with open(path, "w", encoding="utf-8") as out:
        for i in range(n):
            if prompts and rng.random() < 0.10:
                words = list(rng.choice(prompts))
                for _ in range(rng.randint(1, 3)):
                    words[rng.randrange(len(words))] = rng.choice(vocab)
            else:
                words = [rng.choice(frequent) if rng.random() < 0.3 else rng.choice(vocab)
                         for _ in range(rng.randint(20, 120))]
            if len(prompts) < 50000:
                prompts.append(words)
            a = [rng.choice(vocab) for _ in range(rng.randint(8, 40))]
            b = list(a) if rng.random() < 0.02 else [rng.choice(vocab) for _ in range(rng.randint(8, 40))]
            if b == a:
                b[-1] = "changed"
            rec = {"id": "g%07d" % i, "prompt": " ".join(words),
                   "candidates": [" ".join(a), " ".join(b)], "choice": rng.randint(0, 1)}
            out.write(json.dumps(rec) + "\n")


if __name__ == "__main__":
    main()
