"""Reference values for the residual correlation of pots that move (src/spatial/averaged.rs).

An invented layout of 7 positions and 6 pots: each pot's time shares of the positions
over its growth window (one pot never moves, the others spend their time at two or three
positions), a covariate and a response. For each case (family, range, nugget share) the
correlation V = (1 - eta) W R W' + eta I is computed by dense numpy matrix products, with W
the explicit pots x positions matrix of shares and R the correlation between positions
(exponential, Gaussian and spherical in closed form; Matern through scipy.special.kv in
the sqrt(2 nu) d / range scaling), and the profiled ML and REML log-likelihoods of
y ~ 1 + covariate by numpy.linalg.slogdet and solve, with the constants of docs/model.md
(REML without +1/2 ln|X'X|).

Writes tests/reference/fixtures/averaged.json.

Regenerate (from the repository root):
    python3 -m venv .venv && .venv/bin/pip install numpy scipy
    .venv/bin/python tests/reference/averaged.py
"""
import json
import os

import numpy as np
from scipy.special import gamma, kv

HERE = os.path.dirname(os.path.abspath(__file__))

PX = [0.0, 1.0, 2.0, 0.0, 1.0, 2.0, 4.5]
PY = [0.0, 0.0, 0.0, 1.5, 1.5, 1.5, 0.5]
SHARES = [
    [[0, 1.0]],
    [[1, 0.5], [4, 0.5]],
    [[2, 0.25], [5, 0.75]],
    [[3, 0.6], [0, 0.3], [6, 0.1]],
    [[4, 0.125], [6, 0.875]],
    [[5, 1.0 / 3.0], [1, 1.0 / 3.0], [3, 1.0 / 3.0]],
]
COVARIATE = [12.0, 14.5, 11.0, 17.25, 15.0, 13.5]
Y = [3.1, 4.0, 2.7, 5.2, 4.4, 3.6]
CASES = [
    ("exponential", 1.5, 0.0),
    ("exponential", 2.0, 0.25),
    ("gaussian", 1.2, 0.1),
    ("spherical", 3.0, 0.2),
    ("matern_1.5", 1.0, 0.15),
    ("matern_2.5", 0.8, 0.05),
]


def rho(family, d, a):
    h = d / a
    if family == "exponential":
        return np.exp(-h)
    if family == "gaussian":
        return np.exp(-h * h)
    if family == "spherical":
        return np.where(h < 1.0, 1.0 - 1.5 * h + 0.5 * h ** 3, 0.0)
    nu = float(family.split("_")[1])
    s = np.sqrt(2.0 * nu) * h
    with np.errstate(invalid="ignore"):
        v = 2.0 ** (1.0 - nu) / gamma(nu) * s ** nu * kv(nu, s)
    return np.where(s > 0, v, 1.0)


def correlation(family, a, eta):
    px, py = np.array(PX), np.array(PY)
    d = np.hypot(px[:, None] - px[None, :], py[:, None] - py[None, :])
    r = rho(family, d, a)
    w = np.zeros((len(SHARES), len(PX)))
    for i, row in enumerate(SHARES):
        for p, s in row:
            w[i, p] += s
    return (1.0 - eta) * w @ r @ w.T + eta * np.eye(len(SHARES))


def profiled(v, X, y, method):
    n, p = X.shape
    a = X.T @ np.linalg.solve(v, X)
    beta = np.linalg.solve(a, X.T @ np.linalg.solve(v, y))
    r = y - X @ beta
    q = float(r @ np.linalg.solve(v, r))
    _, ld_v = np.linalg.slogdet(v)
    _, ld_a = np.linalg.slogdet(a)
    ln2pi = np.log(2 * np.pi)
    if method == "ML":
        return float(-n / 2 * (ln2pi + 1 + np.log(q / n)) - 0.5 * ld_v)
    m = n - p
    return float(-m / 2 * (ln2pi + 1 + np.log(q / m)) - 0.5 * ld_v - 0.5 * ld_a)


def main():
    X = np.column_stack([np.ones(len(Y)), COVARIATE])
    y = np.array(Y)
    cases = []
    for family, a, eta in CASES:
        v = correlation(family, a, eta)
        cases.append({
            "family": family,
            "range": a,
            "eta": eta,
            "v": v.tolist(),
            "ml": profiled(v, X, y, "ML"),
            "reml": profiled(v, X, y, "REML"),
        })
    out = {"px": PX, "py": PY, "shares": SHARES, "covariate": COVARIATE, "y": Y, "cases": cases}
    os.makedirs(os.path.join(HERE, "fixtures"), exist_ok=True)
    with open(os.path.join(HERE, "fixtures", "averaged.json"), "w") as fh:
        json.dump(out, fh, indent=1)
        fh.write("\n")


if __name__ == "__main__":
    main()
