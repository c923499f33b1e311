#!/usr/bin/env python3
"""Generates the demo log data.csv: an invented cold-storage room, simulated from model.json.

Two probes measure the air temperature once a minute for two days. Probe B drops out for six
hours on the first afternoon (its logger lost power); probe A has scattered dropouts written as
empty cells, "NA" or the firmware's -999 sentinel. The compressor duty (0/1) is logged as a known
input. Invented data, for the demo only. Deterministic: Python's random.Random(20261202).
"""
import json
import math
import random
from datetime import datetime, timedelta, timezone

rng = random.Random(20261202)
model = json.load(open("model.json"))
A, B, Q, R = model["A"], model["B"], model["Q"], model["R"]

start = datetime(2026, 11, 2, 0, 0, tzinfo=timezone.utc)
temp, rate = -18.0, 0.0
compressor = 0
rows = []
for minute in range(2 * 24 * 60):
    stamp = (start + timedelta(minutes=minute)).strftime("%Y-%m-%dT%H:%M:%SZ")
    a = temp + rng.gauss(0, math.sqrt(R[0]))
    b = temp + rng.gauss(0, math.sqrt(R[1]))
    probe_a = f"{a:.2f}"
    probe_b = f"{b:.2f}"
    if 14 * 60 <= minute < 20 * 60:
        probe_b = ""  # probe B's logger is off for six hours
    u = rng.random()
    if u < 0.01:
        probe_a = ""
    elif u < 0.015:
        probe_a = "NA"
    elif u < 0.02:
        probe_a = "-999"
    rows.append(f"{stamp},{probe_a},{probe_b},{compressor}")
    # Thermostat with hysteresis around -18 °C, then one model step.
    if temp > -17.0:
        compressor = 1
    elif temp < -19.0:
        compressor = 0
    new_temp = A[0][0] * temp + A[0][1] * rate + B[0][0] * compressor + rng.gauss(0, math.sqrt(Q[0]))
    new_rate = A[1][0] * temp + A[1][1] * rate + B[1][0] * compressor + rng.gauss(0, math.sqrt(Q[1]))
    # The room warms towards the corridor when the compressor is off (part of the invented physics).
    temp, rate = new_temp, new_rate + 0.004 * (1 - compressor) * 0.1

with open("data.csv", "w") as out:
    out.write("time,probe_a,probe_b,compressor\n")
    out.write("\n".join(rows) + "\n")
