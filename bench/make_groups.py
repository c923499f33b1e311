#!/usr/bin/env python3
"""Writes the --by benchmark table: GROUPS sensors with ROWS rows each, in long format, interleaved as a
logger writes them (every sensor's row for time t, then time t+1, ...), columns t,sensor,y1,y2, for the
2-state model bench/model.json; 10% of the values missing. Invented data for benchmarking only;
deterministic (random.Random(1)). Usage: make_groups.py GROUPS ROWS OUT.csv"""
import random
import sys

groups, rows, path = int(sys.argv[1]), int(sys.argv[2]), sys.argv[3]
rng = random.Random(1)
# Each sensor's signal is a random walk around its own level; the exact model does not matter for
# timing, only that the numbers look like measurements.
level = [rng.uniform(-5, 5) for _ in range(groups)]
names = [f"s{g:05d}" for g in range(groups)]
with open(path, "w") as out:
    out.write("t,sensor,y1,y2\n")
    for t in range(rows):
        lines = []
        for g in range(groups):
            level[g] += rng.gauss(0, 0.1)
            y1 = "" if rng.random() < 0.1 else f"{level[g] + rng.gauss(0, 0.5):.6g}"
            y2 = "" if rng.random() < 0.1 else f"{0.5 * level[g] + rng.gauss(0, 0.6):.6g}"
            lines.append(f"{t},{names[g]},{y1},{y2}\n")
        out.write("".join(lines))
