"""Reference values for the rows x columns residual correlation (src/spatial/rowcol.rs).

An invented bench of 9 rows x 6 positions of pots with one covariate and a response
drawn from a separable AR(1) x AR(1) field plus noise (seed 2211); 7 pots are marked as
gaps (keep = 0). For fixed parameters, the profiled ML and REML log-likelihoods are
computed by dense numpy linear algebra on the explicit correlation matrix
V = (1 - eta) phi_r^|dr| phi_c^|dc| + eta I (numpy.linalg.slogdet and solve), with the
constants of docs/model.md (REML without +1/2 ln|X'X|). The maxima over (phi_r, phi_c[, eta])
are found by scipy.optimize.minimize (L-BFGS-B from each point of a 3 x 3 (x 2) grid,
then Nelder-Mead from the best).

Writes tests/reference/data/rowcol.csv and tests/reference/fixtures/rowcol.json.

Regenerate (from the repository root):
    python3 -m venv .venv && .venv/bin/pip install numpy scipy
    .venv/bin/python tests/reference/rowcol.py
"""
import json
import os

import numpy as np
from scipy.optimize import minimize

HERE = os.path.dirname(os.path.abspath(__file__))
NR, NC = 9, 6


def make_data():
    rng = np.random.default_rng(2211)
    row = np.repeat(np.arange(NR), NC)
    col = np.tile(np.arange(NC), NR)
    n = NR * NC
    v = corr(row, col, 0.7, 0.4, 0.0)
    e = np.linalg.cholesky(v) @ rng.standard_normal(n)
    x = rng.uniform(10.0, 20.0, n)
    y = 5.0 + 0.3 * x + 2.0 * e + 0.5 * rng.standard_normal(n)
    keep = np.ones(n, dtype=int)
    keep[rng.choice(n, 7, replace=False)] = 0
    return row, col, x, y, keep


def corr(row, col, pr, pc, eta):
    dr = np.abs(row[:, None] - row[None, :])
    dc = np.abs(col[:, None] - col[None, :])
    v = (1.0 - eta) * pr ** dr * pc ** dc
    v[np.diag_indices_from(v)] = 1.0
    return v


def profiled(row, col, X, y, pr, pc, eta, method):
    n, p = X.shape
    v = corr(row, col, pr, pc, eta)
    vi_x = np.linalg.solve(v, X)
    vi_y = np.linalg.solve(v, y)
    a = X.T @ vi_x
    beta = np.linalg.solve(a, X.T @ vi_y)
    r = y - X @ beta
    q = float(r @ np.linalg.solve(v, r))
    _, ld_v = np.linalg.slogdet(v)
    _, ld_a = np.linalg.slogdet(a)
    ln2pi = np.log(2 * np.pi)
    if method == "ML":
        s2 = q / n
        ll = -n / 2 * (ln2pi + 1 + np.log(s2)) - 0.5 * ld_v
    else:
        m = n - p
        s2 = q / m
        ll = -m / 2 * (ln2pi + 1 + np.log(s2)) - 0.5 * ld_v - 0.5 * ld_a
    return float(ll), beta.tolist(), float(s2)


def maximum(row, col, X, y, nugget):
    def f(t):
        eta = t[2] if nugget else 0.0
        try:
            v = -profiled(row, col, X, y, np.tanh(t[0]), np.tanh(t[1]), eta, "ML")[0]
        except np.linalg.LinAlgError:
            return 1e10
        return v if np.isfinite(v) else 1e10

    bounds = [(-3, 3), (-3, 3)] + ([(0.0, 0.99)] if nugget else [])
    best = None
    grid = [0.1, 0.5, 0.85]
    etas = [0.05, 0.4] if nugget else [None]
    for a in grid:
        for b in grid:
            for e in etas:
                t0 = [np.arctanh(a), np.arctanh(b)] + ([e] if nugget else [])
                r = minimize(f, t0, method="L-BFGS-B", bounds=bounds)
                if best is None or r.fun < best.fun:
                    best = r
    best = minimize(f, best.x, method="Nelder-Mead", bounds=bounds,
                    options={"xatol": 1e-9, "fatol": 1e-12, "maxiter": 4000})
    t = best.x
    return {
        "nugget": nugget,
        "loglik": float(-best.fun),
        "phi_row": float(np.tanh(t[0])),
        "phi_col": float(np.tanh(t[1])),
        "eta": float(t[2]) if nugget else 0.0,
    }


def main():
    row, col, x, y, keep = make_data()
    os.makedirs(os.path.join(HERE, "data"), exist_ok=True)
    with open(os.path.join(HERE, "data", "rowcol.csv"), "w") as fh:
        fh.write("row,col,x,y,keep\n")
        for k in range(len(y)):
            fh.write(f"{row[k]},{col[k]},{float(x[k])!r},{float(y[k])!r},{keep[k]}\n")
    # re-read the written values so that the fixture is computed on exactly the committed numbers
    d = np.genfromtxt(os.path.join(HERE, "data", "rowcol.csv"), delimiter=",", names=True)
    row, col, x, y, keep = (d["row"].astype(int), d["col"].astype(int), d["x"], d["y"], d["keep"].astype(int))
    cases, maxima = [], []
    for gaps in (False, True):
        idx = np.nonzero(keep == 1)[0] if gaps else np.arange(len(y))
        r, c, xx, yy = row[idx], col[idx], x[idx], y[idx]
        X = np.column_stack([np.ones(len(idx)), xx])
        for (pr, pc, eta) in ((0.55, 0.25, 0.0), (-0.3, 0.8, 0.15)):
            for method in ("ML", "REML"):
                ll, beta, s2 = profiled(r, c, X, yy, pr, pc, eta, method)
                cases.append({"gaps": gaps, "phi_row": pr, "phi_col": pc, "eta": eta, "method": method,
                              "loglik": ll, "beta": beta, "sigma2": s2})
        for nugget in (False, True):
            m = maximum(r, c, X, yy, nugget)
            m["gaps"] = gaps
            maxima.append(m)
    os.makedirs(os.path.join(HERE, "fixtures"), exist_ok=True)
    with open(os.path.join(HERE, "fixtures", "rowcol.json"), "w") as fh:
        json.dump({"source": "tests/reference/rowcol.py (numpy dense linear algebra, scipy.optimize)",
                   "cases": cases, "maxima": maxima}, fh, indent=1)


if __name__ == "__main__":
    main()
