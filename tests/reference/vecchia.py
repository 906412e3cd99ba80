"""Reference values for the Vecchia (nearest-neighbour) likelihood (src/spatial/vecchia.rs).

An invented scatter of 60 pots on a 6 m x 3 m bench (positions drawn with numpy's PCG64,
seed 1517, so no two distances tie), a covariate and a response. Computed here,
independently of potclim:

* the max-min distance ordering (Guinness 2018, Technometrics 60: 415-424) by brute force:
  first the pot nearest the centroid, then repeatedly the pot farthest from the ordered
  set (numpy.argmax: ties to the smallest index);
* each pot's 8 nearest earlier pots (all of them for the first 8), by sorting all
  earlier pots by distance (ties by rank);
* for each case (family, range, nugget share) the sparse inverse-Cholesky matrix A of the
  Vecchia approximation as an explicit dense n x n matrix, row k = (e_k - b_k on the
  neighbours) / sqrt(d_k) with b_k = numpy.linalg.solve(V_NN, V_Ni) and
  d_k = 1 - V_iN b_k (Vecchia 1988, JRSS-B 50: 297; Katzfuss & Guinness 2021,
  Statistical Science 36: 124); then ln|V~| = -2 sum ln A_kk, and the profiled ML and REML
  log-likelihoods of y ~ 1 + covariate by numpy.linalg on (A X, A y), with the constants of
  docs/model.md (REML without +1/2 ln|X'X|). As a check of this script, the same
  construction with all earlier pots as neighbours reproduces the exact dense likelihood
  (numpy.linalg.slogdet and solve) to 1e-9.

Matern through scipy.special.kv in the sqrt(2 nu) d / range scaling.

Writes tests/reference/fixtures/vecchia.json.

Regenerate (from the repository root):
    python3 -m venv .venv && .venv/bin/pip install numpy scipy
    .venv/bin/python tests/reference/vecchia.py
"""
import json
import os

import numpy as np
from scipy.special import gamma, kv

HERE = os.path.dirname(os.path.abspath(__file__))
N = 60
M = 8
CASES = [
    ("exponential", 0.9, 0.0),
    ("exponential", 1.4, 0.3),
    ("spherical", 2.0, 0.0),
    ("spherical", 1.6, 0.2),
    ("gaussian", 0.5, 0.0),
    ("gaussian", 0.7, 0.15),
    ("matern_1.5", 0.6, 0.0),
    ("matern_2.5", 0.5, 0.1),
    ("matern_0.8", 0.9, 0.25),
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


def maxmin(x, y):
    n = len(x)
    first = int(np.argmin(np.hypot(x - x.mean(), y - y.mean())))
    order = [first]
    dmin = np.hypot(x - x[first], y - y[first])
    dmin[first] = -np.inf
    for _ in range(1, n):
        p = int(np.argmax(dmin))
        order.append(p)
        dmin = np.where(np.isinf(dmin), dmin, np.minimum(dmin, np.hypot(x - x[p], y - y[p])))
        dmin[p] = -np.inf
    return order


def neighbours(x, y, order, m):
    sets = []
    for k, i in enumerate(order):
        earlier = np.array(order[:k], dtype=int)
        d = np.hypot(x[earlier] - x[i], y[earlier] - y[i])
        ranks = np.arange(k)
        idx = np.lexsort((ranks, d))[:m]
        sets.append([int(r) for r in ranks[idx]])
    return sets


def covariance(x, y, family, a, eta):
    d = np.hypot(x[:, None] - x[None, :], y[:, None] - y[None, :])
    v = (1.0 - eta) * rho(family, d, a)
    np.fill_diagonal(v, 1.0)
    return v


def vecchia_matrix(v, order, sets):
    n = len(order)
    vp = v[np.ix_(order, order)]
    a = np.zeros((n, n))
    for k in range(n):
        nb = sets[k]
        if nb:
            b = np.linalg.solve(vp[np.ix_(nb, nb)], vp[nb, k])
            d = vp[k, k] - vp[k, nb] @ b
        else:
            b = np.zeros(0)
            d = vp[k, k]
        a[k, k] = 1.0 / np.sqrt(d)
        a[k, nb] = -b / np.sqrt(d)
    return a


def profiled_whitened(xw, yw, logdet, method):
    n, p = xw.shape
    xtx = xw.T @ xw
    beta = np.linalg.solve(xtx, xw.T @ yw)
    rw = yw - xw @ beta
    q = float(rw @ rw)
    ln2pi = np.log(2 * np.pi)
    if method == "ML":
        s2 = q / n
        ll = -n / 2 * (ln2pi + 1 + np.log(s2)) - 0.5 * logdet
    else:
        s2 = q / (n - p)
        ll = -(n - p) / 2 * (ln2pi + 1 + np.log(s2)) - 0.5 * logdet - 0.5 * np.linalg.slogdet(xtx)[1]
    return float(ll), [float(b) for b in beta], float(s2), [float(v) for v in np.linalg.inv(xtx).ravel()]


def vecchia_loglik(v, X, y, order, sets, method):
    a = vecchia_matrix(v, order, sets)
    logdet = -2.0 * float(np.sum(np.log(np.diag(a))))
    return profiled_whitened(a @ X[order], a @ y[order], logdet, method)


def exact_loglik(v, X, y, method):
    lc = np.linalg.cholesky(v)
    logdet = np.linalg.slogdet(v)[1]
    xw = np.linalg.solve(lc, X)
    yw = np.linalg.solve(lc, y)
    return profiled_whitened(xw, yw, logdet, method)


def main():
    rng = np.random.Generator(np.random.PCG64(1517))
    x = rng.uniform(0.0, 6.0, N)
    y = rng.uniform(0.0, 3.0, N)
    cov = rng.uniform(10.0, 20.0, N)
    z = 2.0 + 0.3 * cov + np.sin(x) + 0.5 * np.cos(1.7 * y) + rng.normal(0.0, 0.4, N)
    X = np.column_stack([np.ones(N), cov])
    order = maxmin(x, y)
    sets = neighbours(x, y, order, M)
    full = [list(range(k)) for k in range(N)]
    cases = []
    for family, a, eta in CASES:
        v = covariance(x, y, family, a, eta)
        for method in ("ML", "REML"):
            ll, beta, s2, inv = vecchia_loglik(v, X, z, order, sets, method)
            ll_full = vecchia_loglik(v, X, z, order, full, method)[0]
            ll_exact = exact_loglik(v, X, z, method)[0]
            assert abs(ll_full - ll_exact) < 1e-9 * abs(ll_exact), (family, ll_full, ll_exact)
            cases.append({
                "family": family, "range": a, "eta": eta, "method": method,
                "loglik": ll, "beta": beta, "sigma2": s2, "xtvx_inv": inv, "loglik_exact": ll_exact,
            })
    out = {
        "source": "tests/reference/vecchia.py (numpy brute-force max-min order and neighbours, dense Vecchia matrix)",
        "m": M,
        "x": [float(v) for v in x], "y": [float(v) for v in y],
        "covariate": [float(v) for v in cov], "response": [float(v) for v in z],
        "order": order, "sets": sets, "cases": cases,
    }
    with open(os.path.join(HERE, "fixtures", "vecchia.json"), "w") as f:
        json.dump(out, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
