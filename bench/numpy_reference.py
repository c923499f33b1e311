#!/usr/bin/env python3
"""A straightforward textbook Kalman filter + RTS smoother in numpy, for the benchmark yardstick only
(docs/performance.md). It reads the benchmark CSV, filters (Joseph form, missing channels dropped from
C and R), smooths, and writes the same columns as `statewise smooth`. Usage:
    numpy_reference.py MODEL.json INPUT.csv OUTPUT.csv
Prints the wall time of the whole run, and of the filter and smoother loops alone, to standard error."""
import json
import sys
import time

import numpy as np

start = time.perf_counter()
model = json.load(open(sys.argv[1]))
A = np.array(model["A"], float)
C = np.array(model["C"], float)
Q = np.diag(model["Q"])
R = np.diag(model["R"])
m0 = np.array(model["initial"]["mean"], float)
P0 = np.diag(model["initial"]["covariance"])
data = np.genfromtxt(sys.argv[2], delimiter=",", skip_header=1, missing_values="", filling_values=np.nan)
t_col, Y = data[:, 0], data[:, 1:]
N, n = len(Y), A.shape[0]

engine_start = time.perf_counter()
xf = np.zeros((N, n))
Pf = np.zeros((N, n, n))
x, P = m0.copy(), P0.copy()
for t in range(N):
    if t > 0:
        x = A @ x
        P = A @ P @ A.T + Q
    obs = ~np.isnan(Y[t])
    if obs.any():
        Co, Ro = C[obs], R[np.ix_(obs, obs)]
        v = Y[t, obs] - Co @ x
        S = Co @ P @ Co.T + Ro
        K = P @ Co.T @ np.linalg.inv(S)
        x = x + K @ v
        IKC = np.eye(n) - K @ Co
        P = IKC @ P @ IKC.T + K @ Ro @ K.T
    xf[t], Pf[t] = x, P

xs, Ps = xf.copy(), Pf.copy()
for t in range(N - 2, -1, -1):
    xp = A @ xf[t]
    Pp = A @ Pf[t] @ A.T + Q
    J = Pf[t] @ A.T @ np.linalg.inv(Pp)
    xs[t] = xf[t] + J @ (xs[t + 1] - xp)
    Ps[t] = Pf[t] + J @ (Ps[t + 1] - Pp) @ J.T

engine = time.perf_counter() - engine_start
est = xs @ C.T
sd = np.sqrt(np.einsum("ij,tjk,ik->ti", C, Ps, C))
filled = np.where(np.isnan(Y), est, Y)
imputed = np.isnan(Y).astype(int)
cols = [t_col]
for i in range(n):
    cols += [xs[:, i], np.sqrt(Ps[:, i, i])]
for c in range(C.shape[0]):
    cols += [est[:, c], sd[:, c], filled[:, c], imputed[:, c]]
np.savetxt(sys.argv[3], np.column_stack(cols), delimiter=",", fmt="%.17g")
elapsed = time.perf_counter() - start
print(f"numpy reference: {N} rows, end to end {elapsed:.3f} s = {elapsed / N * 1e6:.2f} us/row; "
      f"filter+smoother loops {engine:.3f} s = {engine / N * 1e6:.2f} us/row", file=sys.stderr)
