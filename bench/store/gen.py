#!/usr/bin/env python3
"""Synthetic preference records for bench/store/store_bench.sh (deterministic).

usage: gen.py START COUNT SEED > file.jsonl
Prompts are random word strings (annotators, sources and threads given) (with about 5% near-copies of earlier prompts
in the same file), two candidates, a choice, a thread id. No personal data.
"""
import json
import random
import sys

start, count, seed = int(sys.argv[1]), int(sys.argv[2]), int(sys.argv[3])
rng = random.Random(seed)
words = ["seed", "tomato", "bean", "soil", "water", "light", "frost", "garden", "plot", "leaf", "root", "pot",
         "compost", "weed", "sun", "shade", "row", "bed", "trellis", "harvest", "sow", "prune", "mulch", "grow"]
words += ["w%03d" % k for k in range(600)]
recent = []
for k in range(start, start + count):
    if recent and rng.random() < 0.05:
        base = rng.choice(recent).split()
        base[rng.randrange(len(base))] = rng.choice(words)
        prompt = " ".join(base)
    else:
        prompt = " ".join(rng.choice(words) for _ in range(rng.randint(12, 40)))
    recent.append(prompt)
    if len(recent) > 500:
        recent.pop(0)
    cands = [" ".join(rng.choice(words) for _ in range(rng.randint(8, 30))) for _ in range(2)]
    print(json.dumps({"id": "r%08d" % k, "prompt": prompt, "cands": cands, "pick": rng.randint(0, 1),
                      "thread": "t%07d" % (k // 3), "annotator": "a%02d" % (k % 40), "source": "s%d" % (k % 3)}))
