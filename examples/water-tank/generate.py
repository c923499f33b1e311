#!/usr/bin/env python3
"""Generates the demo log data.csv: an invented water tank, simulated from model.json.

A pump fills the tank at a metered rate (inflow_lps, litres per second: the known input); an outlet
valve drains it in proportion to the level, and an unmetered draw (draw_lps, a random walk) takes
water too. An ultrasonic sensor reports the level (level_sensor_m). The gateway logs a row about
every 10 s with jitter (7.5 to 12.5 s apart), times in ISO 8601 with milliseconds and the site's
+02:00 offset; its radio link drops for 25 minutes mid-morning, so no rows arrive then, and about 1%
of level readings are missing ("NA"). Invented data, for the demo only. Deterministic:
Python's random.Random(20260615); the physics is integrated with 0.1 s Euler steps.
"""
import json
import math
import random
from datetime import datetime, timedelta, timezone

rng = random.Random(20260615)
model = json.load(open("model.json"))
F, G, Q, R = model["A"], model["B"], model["Q"], model["R"]

site = timezone(timedelta(hours=2))
start = datetime(2026, 6, 15, 6, 0, 0, tzinfo=site)
link_down = (start + timedelta(hours=2, minutes=10), start + timedelta(hours=2, minutes=35))
end = start + timedelta(hours=4)

level, draw = 1.2, 0.5
pump_on = False
inflow = 0.0
dt = 0.1
t = 0.0  # seconds since start
next_row = 0.0
rows = []
while start + timedelta(seconds=next_row) < end:
    # Integrate the physics up to the next logged row.
    while t < next_row - 1e-9:
        h = min(dt, next_row - t)
        d_level = F[0][0] * level + F[0][1] * draw + G[0][0] * inflow
        level += d_level * h + rng.gauss(0, math.sqrt(Q[0] * h))
        draw = max(0.0, draw + rng.gauss(0, math.sqrt(Q[1] * h)))
        t += h
    # The pump controller acts on the true level (hysteresis between 1.0 m and 1.4 m); the row logs
    # the metered rate that holds from this row to the next (statewise's input convention).
    if level < 1.0:
        pump_on = True
    elif level > 1.4:
        pump_on = False
    inflow = 5.0 + rng.gauss(0, 0.05) if pump_on else 0.0
    stamp = start + timedelta(seconds=round(next_row, 3))
    if not (link_down[0] <= stamp < link_down[1]):
        reading = level + rng.gauss(0, math.sqrt(R))
        text = "NA" if rng.random() < 0.01 else f"{reading:.3f}"
        iso = stamp.isoformat(timespec="milliseconds")
        rows.append(f"{iso},{text},{inflow:.2f}")
    next_row += 10.0 + rng.uniform(-2.5, 2.5)

with open("data.csv", "w") as out:
    out.write("time,level_sensor_m,inflow_lps\n")
    out.write("\n".join(rows) + "\n")
