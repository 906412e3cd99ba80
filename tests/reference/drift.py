"""Reference values for kriging with an opening as external drift.

Regenerate (from the repository root):
    python3 -m venv .venv && .venv/bin/pip install numpy
    .venv/bin/python tests/reference/drift.py

Writes tests/reference/fixtures/drift.json: an invented layout of 12 sensors
and 5 targets in a 12 m x 6 m room with a 2 m door in the west wall, values
that fall off towards the door, and, by dense numpy solves of the kriging
system [K F; F' 0] (Cressie 1993, §3.4; drift basis 1, exp(-d / L), d the
distance to the door segment), the predictions and kriging variances at the
targets for L = 2.5 m and the leave-one-out RMSE and mean squared
standardised error for L = 1.5 and 4 m. The covariance is exponential with
nugget 0.1, partial sill 0.9, range parameter 3 m; the nugget sits on the
diagonal only (the sensors' own micro-scale part). Nothing here calls potclim.
"""
import json
import os

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))

rng = np.random.default_rng(20261203)
S = np.column_stack([rng.uniform(0.3, 11.7, 12), rng.uniform(0.3, 5.7, 12)])
T = np.array([[0.5, 3.0], [1.5, 2.2], [6.0, 3.0], [11.0, 0.5], [3.0, 5.5]])
DOOR = (np.array([0.0, 2.0]), np.array([0.0, 4.0]))
NUGGET, PSILL, RANGE = 0.1, 0.9, 3.0


def dist_to_door(P):
    a, b = DOOR
    ab = b - a
    t = np.clip(((P - a) @ ab) / (ab @ ab), 0.0, 1.0)
    return np.linalg.norm(P - (a + t[:, None] * ab), axis=1)


def cov(h):
    return PSILL * np.exp(-h / RANGE)


def ked(Ps, zs, Pt, L):
    n = len(Ps)
    ds, dt = dist_to_door(Ps), dist_to_door(Pt)
    F = np.column_stack([np.ones(n), np.exp(-ds / L)])
    f0 = np.column_stack([np.ones(len(Pt)), np.exp(-dt / L)])
    D = np.linalg.norm(Ps[:, None, :] - Ps[None, :, :], axis=2)
    K = cov(D) + NUGGET * np.eye(n)
    A = np.block([[K, F], [F.T, np.zeros((2, 2))]])
    k0 = cov(np.linalg.norm(Ps[:, None, :] - Pt[None, :, :], axis=2))
    R = np.vstack([k0, f0.T])
    sol = np.linalg.solve(A, R)
    pred = sol[:n].T @ zs
    var = NUGGET + PSILL - np.sum(sol * R, axis=0)
    return pred, var


dS = dist_to_door(S)
z = 15.0 - 3.0 * np.exp(-dS / 2.0) + 0.05 * S[:, 0] + rng.normal(0.0, 0.3, len(S))

out = {"numpy": np.__version__, "sensors": S.tolist(), "values": z.tolist(), "targets": T.tolist(),
       "door": [DOOR[0].tolist(), DOOR[1].tolist()],
       "model": {"nugget": NUGGET, "partial_sill": PSILL, "range": RANGE}}
pred, var = ked(S, z, T, 2.5)
out["ked"] = {"length": 2.5, "pred": pred.tolist(), "var": var.tolist()}
loo = []
for L in (1.5, 4.0):
    e, z2 = [], []
    for i in range(len(S)):
        o = [j for j in range(len(S)) if j != i]
        p, v = ked(S[o], z[o], S[[i]], L)
        e.append(p[0] - z[i])
        z2.append((p[0] - z[i]) ** 2 / v[0])
    e = np.array(e)
    loo.append({"length": L, "rmse": float(np.sqrt(np.mean(e ** 2))), "mean_error": float(np.mean(e)),
                "msse": float(np.mean(z2))})
out["loo"] = loo
with open(os.path.join(HERE, "fixtures", "drift.json"), "w") as f:
    json.dump(out, f, indent=1)
    f.write("\n")
print(json.dumps({"ked": out["ked"], "loo": loo}, indent=1))
