#!/usr/bin/env python3
"""Writes random genomes as fitfarm JSON Lines input: one
{"id": N, "genome": [...]} per line, each gene uniform in [0, 1).
Standard library only. Example:
    python3 make_genomes.py --count 1000 --dim 30 --seed 7 > genomes.jsonl
"""
import argparse
import random
import sys

ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
ap.add_argument("--count", type=int, default=1000)
ap.add_argument("--dim", type=int, default=30)
ap.add_argument("--seed", type=int, default=1)
a = ap.parse_args()
rnd = random.Random(a.seed)
out = sys.stdout
for i in range(a.count):
    genes = ",".join(repr(rnd.random()) for _ in range(a.dim))
    out.write(f'{{"id": {i}, "genome": [{genes}]}}\n')
