#!/usr/bin/env python3
"""Generates the demo log data.csv: an invented water tank, simulated from model.json, with the faults
gateway logs are known for.

A level logger writes both gauges every 5 minutes for three days. The states and the measurement noise
follow model.json exactly; then the log is spoiled the way field logs are:
- the ultrasonic gauge sees reflections now and then (about 2% of rows) and reads 15 to 60 cm too high;
- the ultrasonic gauge is off for four hours on the first afternoon (empty cells);
- the pressure transducer sticks for three hours on the second day, repeating its last reading;
- a few cells hold the logger's "ERR" text.
Invented data, for the demo only. Deterministic: Python's random.Random(20261203).
"""
import json
import math
import random
from datetime import datetime, timedelta, timezone

rng = random.Random(20261203)
model = json.load(open("model.json"))
A, Q, R = model["A"], model["Q"], model["R"]

start = datetime(2026, 6, 1, 0, 0, tzinfo=timezone.utc)
level, change = 250.0, 0.0
rows = []
stuck_value = None
for step in range(3 * 288):
    stamp = (start + timedelta(minutes=5 * step)).strftime("%Y-%m-%dT%H:%M:%SZ")
    ultrasonic = level + rng.gauss(0, math.sqrt(R[0]))
    pressure = level + rng.gauss(0, math.sqrt(R[1]))
    if rng.random() < 0.02:
        ultrasonic += rng.uniform(15, 60)  # a reflection
    u, p = f"{ultrasonic:.1f}", f"{pressure:.1f}"
    if 168 <= step < 216:  # 14:00 to 18:00 on day one
        u = ""
    if 288 + 96 <= step < 288 + 132:  # 08:00 to 11:00 on day two
        stuck_value = stuck_value or p
        p = stuck_value
    if rng.random() < 0.004:
        u = "ERR"
    rows.append(f"{stamp},{u},{p}")
    level = A[0][0] * level + A[0][1] * change + rng.gauss(0, math.sqrt(Q[0]))
    change = A[1][1] * change + rng.gauss(0, math.sqrt(Q[1]))

with open("data.csv", "w") as out:
    out.write("time,ultrasonic,pressure\n")
    out.write("\n".join(rows) + "\n")
