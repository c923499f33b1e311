#!/usr/bin/env python3
"""Writes the benchmark log: ROWS rows of a 2-state, 2-channel model (bench/model.json), 10% of the values
missing (each cell independently), columns t,y1,y2. Invented data for benchmarking only; deterministic
(random.Random(1)). Usage: make_log.py ROWS OUT.csv"""
import json
import math
import random
import sys

rows, path = int(sys.argv[1]), sys.argv[2]
here = __file__.rsplit("/", 1)[0] if "/" in __file__ else "."
model = json.load(open(f"{here}/model.json"))
A, C = model["A"], model["C"]
q = [math.sqrt(v) for v in model["Q"]]
r = [math.sqrt(v) for v in model["R"]]
rng = random.Random(1)
x = [0.0, 0.0]
with open(path, "w") as out:
    out.write("t,y1,y2\n")
    lines = []
    for t in range(rows):
        cells = []
        for c in range(2):
            if rng.random() < 0.1:
                cells.append("")
            else:
                y = C[c][0] * x[0] + C[c][1] * x[1] + rng.gauss(0, r[c])
                cells.append(f"{y:.6g}")
        lines.append(f"{t},{cells[0]},{cells[1]}\n")
        x = [A[0][0] * x[0] + A[0][1] * x[1] + rng.gauss(0, q[0]),
             A[1][0] * x[0] + A[1][1] * x[1] + rng.gauss(0, q[1])]
        if len(lines) >= 100000:
            out.write("".join(lines))
            lines = []
    out.write("".join(lines))
