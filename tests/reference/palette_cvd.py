#!/usr/bin/python3
"""Checks the report palette (src/report/palette.cc) for readers with colour-vision deficiency.

Reference: the simulation of protan-, deutan- and tritanomaly at full severity by Machado, Oliveira & Fernandes
(2009, "A physiologically-based model for simulation of color vision deficiency", IEEE TVCG 15(6)), as implemented
by Debian's python3-colorspacious ("sRGB1+CVD"), and colour differences measured in CAM02-UCS (Luo, Cui & Li 2006),
also from colorspacious. The thresholds below are this project's choices (common practice puts a just-noticeable
difference near 1 unit of CAM02-UCS and clearly distinct categories above about 10; those numbers are from memory).

Rules (the colours that share a chart must stay apart for every reader):
  * kept vs rejected: >= 25 under normal vision and each simulation, and >= 8 apart in lightness J' so they also
    differ in grey-scale print;
  * the three splits, pairwise: >= 20 under each simulation and >= 15 apart in lightness (dark, mid, light);
  * stages next to each other in pipeline order, and each stage vs kept, rejected and the measure colour: >= 12;
  * measure vs reference: >= 20;
  * every pair of colours under normal vision: >= 10 (no two meanings look alike).
Exit status 0 when every rule holds; prints each failing pair otherwise.
"""
import itertools
import re
import sys

import numpy as np
from colorspacious import cspace_convert

SIMS = {"normal": None, "protan": "protanomaly", "deutan": "deuteranomaly", "tritan": "tritanomaly"}
STAGES = ["ingest", "exact", "near", "leakage", "screen", "bias", "split", "store", "agreement"]


def load(path):
    text = open(path, encoding="utf-8").read()
    pal = dict(re.findall(r'\{"([a-z:_]+)", "(#[0-9a-f]{6})"', text))
    return {k.split(":")[-1]: v for k, v in pal.items()}


def ucs(hexcolour, sim):
    rgb = np.array([int(hexcolour[i:i + 2], 16) / 255 for i in (1, 3, 5)])
    if SIMS[sim] is not None:
        rgb = np.clip(cspace_convert(rgb, {"name": "sRGB1+CVD", "cvd_type": SIMS[sim], "severity": 100}, "sRGB1"), 0, 1)
    return cspace_convert(rgb, "sRGB1", "CAM02-UCS")


def main(path):
    pal = load(path)
    need = ["kept", "rejected", "train", "valid", "test", "measure", "reference"] + STAGES
    missing = [k for k in need if k not in pal]
    if missing:
        print("palette lacks", missing)
        return 1
    u = {(s, k): ucs(h, s) for s in SIMS for k, h in pal.items()}

    def worst(a, b):
        return min(float(np.linalg.norm(u[s, a] - u[s, b])) for s in SIMS)

    def lightness(a, b):
        return abs(float(u["normal", a][0] - u["normal", b][0]))

    rules = [(("kept", "rejected"), 25)]
    rules += [(p, 20) for p in itertools.combinations(["train", "valid", "test"], 2)]
    rules += [((a, b), 12) for a, b in zip(STAGES, STAGES[1:])]
    rules += [((s, x), 12) for s in STAGES for x in ("kept", "rejected", "measure")]
    rules += [(("measure", "reference"), 20)]
    bad = 0
    for (a, b), limit in rules:
        d = worst(a, b)
        if d < limit:
            print(f"FAIL {a} vs {b}: {d:.1f} < {limit} (worst over normal vision and the three simulations)")
            bad += 1
    for (a, b), limit in [(("kept", "rejected"), 8), (("train", "valid"), 15), (("valid", "test"), 15)]:
        if lightness(a, b) < limit:
            print(f"FAIL lightness {a} vs {b}: {lightness(a, b):.1f} < {limit}")
            bad += 1
    for a, b in itertools.combinations(pal, 2):
        d = float(np.linalg.norm(u["normal", a] - u["normal", b]))
        if d < 10:
            print(f"FAIL {a} vs {b} look alike: {d:.1f} < 10")
            bad += 1
    print(f"{len(pal)} colours, {len(rules) + 3 + len(pal) * (len(pal) - 1) // 2} rules, {bad} failing")
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1]))
