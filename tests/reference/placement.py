"""Reference values for logger placement (greedy selection, removal costs).

Regenerate (from the repository root):
    python3 -m venv .venv && .venv/bin/pip install numpy
    .venv/bin/python tests/reference/placement.py

Writes tests/reference/fixtures/placement.json: an invented 10 m x 6 m room
with 5 current loggers, 40 pots and 24 candidate positions, and for ordinary
and universal kriging (exponential covariance, nugget 0.2, partial sill 1.0,
range parameter 2.5 m) with both objectives (mean and largest kriging SE over
the pots):
  * the kriging SE at every pot with the current loggers;
  * three loggers chosen greedily, each time by solving the bordered kriging
    system [K F; F' 0] afresh for every candidate added to the loggers chosen
    so far (no update formula), with the objective after each choice;
  * the best set of three by exhaustive search over all 2024 triples;
  * the mean and largest SE with each current logger left out (fresh solves).
The nugget sits on the diagonal of K; a target that coincides with a logger
gets the full sill (Cressie 1993, §3.2). Nothing here calls potclim.
"""
import itertools
import json
import os

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))

rng = np.random.default_rng(20261203)
S = np.column_stack([rng.uniform(0.5, 9.5, 5), rng.uniform(0.5, 5.5, 5)])
P = np.column_stack([rng.uniform(0.2, 9.8, 40), rng.uniform(0.2, 5.8, 40)])
gx, gy = np.meshgrid(np.linspace(1.0, 9.0, 6), np.linspace(1.0, 5.0, 4))
C = np.column_stack([gx.ravel(), gy.ravel()])
NUGGET, PSILL, RANGE = 0.2, 1.0, 2.5
SILL = NUGGET + PSILL


def cov_between(A, B):
    d = np.linalg.norm(A[:, None, :] - B[None, :, :], axis=2)
    c = PSILL * np.exp(-d / RANGE)
    return np.where(d <= 1e-6, SILL, c)


def basis(X, method):
    if method == "ordinary":
        return np.ones((len(X), 1))
    return np.column_stack([np.ones(len(X)), X[:, 0], X[:, 1]])


def kriging_var(L, T, method):
    n = len(L)
    K = PSILL * np.exp(-np.linalg.norm(L[:, None] - L[None], axis=2) / RANGE)
    K[np.diag_indices(n)] = SILL
    F = basis(L, method)
    p = F.shape[1]
    A = np.block([[K, F], [F.T, np.zeros((p, p))]])
    R = np.vstack([cov_between(L, T), basis(T, method).T])
    sol = np.linalg.solve(A, R)
    return np.maximum(SILL - np.sum(sol * R, axis=0), 0.0)


def objective(var, kind):
    se = np.sqrt(var)
    return float(se.mean() if kind == "mean" else se.max())


out = {
    "loggers": S.tolist(),
    "pots": P.tolist(),
    "candidates": C.tolist(),
    "model": {"family": "exponential", "nugget": NUGGET, "partial_sill": PSILL, "range": RANGE},
    "cases": [],
}
for method in ["ordinary", "universal"]:
    for kind in ["mean", "max"]:
        before = np.sqrt(kriging_var(S, P, method))
        chosen, values = [], []
        for _ in range(3):
            best = None
            for c in range(len(C)):
                if c in chosen:
                    continue
                L = np.vstack([S, C[chosen + [c]]])
                o = objective(kriging_var(L, P, method), kind)
                if best is None or o < best[1] - 1e-12:
                    best = (c, o)
            chosen.append(best[0])
            values.append(best[1])
        after = np.sqrt(kriging_var(np.vstack([S, C[chosen]]), P, method))
        exhaustive = None
        for trip in itertools.combinations(range(len(C)), 3):
            o = objective(kriging_var(np.vstack([S, C[list(trip)]]), P, method), kind)
            if exhaustive is None or o < exhaustive[1]:
                exhaustive = (list(trip), o)
        removal = []
        for i in range(len(S)):
            v = kriging_var(np.delete(S, i, axis=0), P, method)
            removal.append([objective(v, "mean"), objective(v, "max")])
        out["cases"].append({
            "method": method,
            "objective": kind,
            "before_se": before.tolist(),
            "greedy": chosen,
            "greedy_objective": values,
            "after_se": after.tolist(),
            "exhaustive": exhaustive[0],
            "exhaustive_objective": exhaustive[1],
            "removal": removal,
        })

with open(os.path.join(HERE, "fixtures", "placement.json"), "w") as f:
    json.dump(out, f, indent=1)
for c in out["cases"]:
    print(c["method"], c["objective"], "greedy", c["greedy"], c["greedy_objective"][-1],
          "exhaustive", c["exhaustive"], c["exhaustive_objective"])
