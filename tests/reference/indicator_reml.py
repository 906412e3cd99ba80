"""Reference values for the window indicator's own variogram fitted by REML.

Regenerate (from the repository root):
    python3 -m venv .venv && .venv/bin/pip install numpy scipy
    .venv/bin/python tests/reference/indicator_reml.py

Writes tests/reference/fixtures/indicator_reml.json: an invented layout of
12 loggers in a 10 m x 6 m room with a 2 m door in the west wall, and
invented night cold hours at them (a level, a fall-off from the door
`exp(-d / 3)` and a seeded correlated residual). For the exponential
correlation with a nugget share `eta`, `V = (1 - eta) exp(-h / a) + eta I`,
the profiled REML log-likelihood with all constants (Patterson & Thompson
1971; the convention of src/spatial/likelihood.rs: no `+ ln|X'X| / 2`),

    l = -((n-p)/2) [ln(2 pi) + 1 + ln(Q / (n-p))] - ln|V| / 2 - ln|X' V^-1 X| / 2,

is maximised by scipy.optimize.minimize (L-BFGS-B) over (ln a, eta) from a
grid of starts, with the practical range `a ln 20` between the shortest and
the largest logger-pair distance and `eta` in [0, 0.99]: once with the trend
`1, exp(-d / 3)` and once with a constant mean. Under the first fit the
external-drift kriging predictions and SEs at three targets come from a
dense numpy solve of `[K F; F' 0]` (Cressie 1993, §3.4), the nugget on the
diagonal only. Nothing here calls potclim.
"""
import json
import os

import numpy as np
from scipy.optimize import minimize

HERE = os.path.dirname(os.path.abspath(__file__))

rng = np.random.default_rng(20261204)
S = np.column_stack([rng.uniform(0.3, 9.7, 12), rng.uniform(0.3, 5.7, 12)])
T = np.array([[0.4, 3.0], [2.5, 1.0], [7.0, 4.5]])
DOOR = (np.array([0.0, 2.0]), np.array([0.0, 4.0]))


def door_distance(p):
    a, b = DOOR
    ab = b - a
    t = np.clip(((p - a) @ ab) / (ab @ ab), 0.0, 1.0)
    q = a + np.outer(t, ab)
    return np.hypot(*(p - q).T)


def dist(a, b):
    return np.hypot(a[:, None, 0] - b[None, :, 0], a[:, None, 1] - b[None, :, 1])


D = dist(S, S)
drift = np.exp(-door_distance(S) / 3.0)
# A correlated residual: exponential, sill 40 h^2, range 1.5 m, plus noise.
C = 40.0 * np.exp(-D / 1.5) + 4.0 * np.eye(12)
resid = np.linalg.cholesky(C) @ rng.standard_normal(12)
z = 20.0 + 300.0 * drift + resid

pair = D[np.triu_indices(12, 1)]
LN20 = np.log(20.0)
lo, hi = pair.min() / LN20, pair.max() / LN20


def reml(theta, X):
    a, eta = np.exp(theta[0]), theta[1]
    n, p = X.shape
    V = (1.0 - eta) * np.exp(-D / a) + eta * np.eye(n)
    L = np.linalg.cholesky(V)
    Xw = np.linalg.solve(L, X)
    yw = np.linalg.solve(L, z)
    XtX = Xw.T @ Xw
    beta = np.linalg.solve(XtX, Xw.T @ yw)
    r = yw - Xw @ beta
    Q = r @ r
    logdet = 2.0 * np.log(np.diag(L)).sum()
    ll = -0.5 * (n - p) * (np.log(2 * np.pi) + 1 + np.log(Q / (n - p))) - 0.5 * logdet
    ll -= 0.5 * np.linalg.slogdet(XtX)[1]
    return ll, Q / (n - p)


def fit(X):
    best = None
    for la in np.linspace(np.log(lo), np.log(hi), 9):
        for eta in [0.0, 0.05, 0.3, 0.6, 0.9]:
            res = minimize(lambda t: -reml(t, X)[0], [la, eta], method="L-BFGS-B",
                           bounds=[(np.log(lo), np.log(hi)), (0.0, 0.99)],
                           options={"ftol": 1e-15, "gtol": 1e-12, "maxiter": 5000})
            if best is None or res.fun < best.fun:
                best = res
    ll, s2 = reml(best.x, X)
    return {"loglik": float(ll), "range": float(np.exp(best.x[0])), "eta": float(best.x[1]), "sigma2": float(s2)}


X1 = np.column_stack([np.ones(12), drift])
X0 = np.ones((12, 1))
with_drift = fit(X1)
constant = fit(X0)

# External-drift kriging under the first fit.
s2, eta, a = with_drift["sigma2"], with_drift["eta"], with_drift["range"]
K = s2 * (1 - eta) * np.exp(-D / a) + s2 * eta * np.eye(12)
tdrift = np.exp(-door_distance(T) / 3.0)
n, p = 12, 2
A = np.zeros((n + p, n + p))
A[:n, :n] = K
A[:n, n:] = X1
A[n:, :n] = X1.T
pred, pred_se = [], []
for t in range(len(T)):
    c0 = s2 * (1 - eta) * np.exp(-dist(S, T[t:t + 1])[:, 0] / a)
    rhs = np.concatenate([c0, [1.0, tdrift[t]]])
    sol = np.linalg.solve(A, rhs)
    lam = sol[:n]
    pred.append(float(lam @ z))
    pred_se.append(float(np.sqrt(s2 - sol @ rhs)))
with_drift["pred"] = pred
with_drift["pred_se"] = pred_se

out = {
    "x": S[:, 0].tolist(),
    "y": S[:, 1].tolist(),
    "z": z.tolist(),
    "drift": drift.tolist(),
    "tx": T[:, 0].tolist(),
    "ty": T[:, 1].tolist(),
    "tdrift": tdrift.tolist(),
    "range_bounds": [float(lo), float(hi)],
    "with_drift": with_drift,
    "constant_mean": constant,
}
with open(os.path.join(HERE, "fixtures", "indicator_reml.json"), "w") as f:
    json.dump(out, f, indent=1)
print(json.dumps({k: out[k] for k in ("with_drift", "constant_mean", "range_bounds")}, indent=1))
