#!/usr/bin/env python3
"""Generates the demo log data.csv: an invented water tank whose level two probes measure.

The level drifts slowly (a random walk, standard deviation 4 mm per minute). Probe A, ultrasonic,
reads it with 20 mm of noise; probe B, a pressure sensor, with 50 mm of noise plus an offset that
creeps (1 mm per minute). One reading a minute for two days. Probe A drops out for three hours on the
second morning; both probes miss scattered readings (empty cells). Invented data, for the demo only.
Deterministic: Python's random.Random(20261203).
"""
import math
import random
from datetime import datetime, timedelta, timezone

rng = random.Random(20261203)
LEVEL_SD, BIAS_SD, NOISE_A, NOISE_B = 0.004, 0.001, 0.02, 0.05

start = datetime(2026, 12, 1, 0, 0, tzinfo=timezone.utc)
level, bias = 1.80, 0.03
rows = []
for minute in range(2 * 24 * 60):
    stamp = (start + timedelta(minutes=minute)).strftime("%Y-%m-%dT%H:%M:%SZ")
    a = f"{level + rng.gauss(0, NOISE_A):.3f}"
    b = f"{level + bias + rng.gauss(0, NOISE_B):.3f}"
    if 24 * 60 + 6 * 60 <= minute < 24 * 60 + 9 * 60 or rng.random() < 0.02:
        a = ""
    if rng.random() < 0.02:
        b = ""
    rows.append(f"{stamp},{a},{b}")
    level += rng.gauss(0, LEVEL_SD)
    bias += rng.gauss(0, BIAS_SD)

with open("data.csv", "w") as out:
    out.write("time,probe_a,probe_b\n")
    out.write("\n".join(rows) + "\n")
