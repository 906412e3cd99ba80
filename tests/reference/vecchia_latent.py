"""Reference values for the latent-level Vecchia likelihood (src/spatial/vecchia_latent.rs).

An invented bench of 36 pot positions on a 5 m x 3 m table (drawn with numpy's PCG64, seed
2415) holding 45 pots: pots 0-35 stand one at each position, pots 36-44 share the position of
an earlier pot (drawn with the same generator); a covariate and a response per pot. Computed
here, independently of potclim and by dense algebra only:

* the max-min distance ordering of the 36 positions (Guinness 2018, Technometrics 60: 415-424)
  by brute force (first the position nearest the centroid, then repeatedly the one farthest
  from the ordered set; numpy.argmax, ties to the smallest index) and each position's 6
  nearest earlier positions (ties by rank);
* for each case (family, range, nugget share eta > 0): the Vecchia approximation of the
  noise-free field w ~ N(0, (1 - eta) R) at the positions, as the explicit dense matrix B
  whose row k is (e_k - b_k on the neighbours) / sqrt(d_k), b_k = numpy.linalg.solve of the
  neighbours' covariance, d_k the conditional variance (Vecchia 1988, JRSS-B 50: 297;
  Katzfuss & Guinness 2021, Statistical Science 36: 124, the latent form); the precision
  Q = B'B; then the pots' covariance S = A Q^-1 A' + eta I with A the 45 x 36 incidence of pots
  on positions, formed densely (numpy.linalg.inv), ln|S| by numpy.linalg.slogdet and the
  profiled ML and REML log-likelihoods of y ~ 1 + covariate by numpy.linalg.solve with S
  itself (no Woodbury identity, no sparse algebra), constants of docs/model.md (REML without
  +1/2 ln|X'X|). As a check of this script, the same construction with all earlier positions
  as neighbours reproduces the exact dense likelihood of V = (1 - eta) A R A' + eta I to 1e-9.

Matern through scipy.special.kv in the sqrt(2 nu) d / range scaling.

Writes tests/reference/fixtures/vecchia_latent.json.

Regenerate (from the repository root):
    python3 -m venv .venv && .venv/bin/pip install numpy scipy
    .venv/bin/python tests/reference/vecchia_latent.py
"""
import json
import os

import numpy as np
from scipy.special import gamma, kv

HERE = os.path.dirname(os.path.abspath(__file__))
L = 36
EXTRA = 9
M = 6
CASES = [
    ("exponential", 0.9, 0.1),
    ("exponential", 1.5, 0.45),
    ("spherical", 1.8, 0.2),
    ("gaussian", 0.5, 0.15),
    ("matern_1.5", 0.6, 0.3),
    ("matern_2.5", 0.5, 0.05),
    ("matern_0.8", 1.1, 0.6),
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


def latent_precision(c, order, sets):
    """Q = B'B of the Vecchia approximation of N(0, c), in the positions' own order."""
    n = len(order)
    cp = c[np.ix_(order, order)]
    b = np.zeros((n, n))
    for k in range(n):
        nb = sets[k]
        if nb:
            coef = np.linalg.solve(cp[np.ix_(nb, nb)], cp[nb, k])
            d = cp[k, k] - cp[k, nb] @ coef
        else:
            coef = np.zeros(0)
            d = cp[k, k]
        b[k, k] = 1.0 / np.sqrt(d)
        b[k, nb] = -coef / np.sqrt(d)
    q = b.T @ b
    back = np.argsort(order)
    return q[np.ix_(back, back)]


def profiled(s, X, y, method):
    n, p = X.shape
    logdet = np.linalg.slogdet(s)[1]
    sx = np.linalg.solve(s, X)
    xtx = X.T @ sx
    beta = np.linalg.solve(xtx, sx.T @ y)
    r = y - X @ beta
    q = float(r @ np.linalg.solve(s, r))
    ln2pi = np.log(2 * np.pi)
    if method == "ML":
        s2 = q / n
        ll = -n / 2 * (ln2pi + 1 + np.log(s2)) - 0.5 * logdet
    else:
        s2 = q / (n - p)
        ll = -(n - p) / 2 * (ln2pi + 1 + np.log(s2)) - 0.5 * logdet - 0.5 * np.linalg.slogdet(xtx)[1]
    return float(ll), [float(b) for b in beta], float(s2), [float(v) for v in np.linalg.inv(xtx).ravel()]


def main():
    rng = np.random.Generator(np.random.PCG64(2415))
    lx = rng.uniform(0.0, 5.0, L)
    ly = rng.uniform(0.0, 3.0, L)
    loc = list(range(L)) + [int(v) for v in rng.integers(0, L, EXTRA)]
    n = len(loc)
    px, py = lx[loc], ly[loc]
    a = np.zeros((n, L))
    a[np.arange(n), loc] = 1.0
    cov = rng.uniform(10.0, 20.0, n)
    z = 2.0 + 0.3 * cov + np.sin(px) + 0.5 * np.cos(1.7 * py) + rng.normal(0.0, 0.4, n)
    X = np.column_stack([np.ones(n), cov])
    order = maxmin(lx, ly)
    sets = neighbours(lx, ly, order, M)
    full = [list(range(k)) for k in range(L)]
    d = np.hypot(lx[:, None] - lx[None, :], ly[:, None] - ly[None, :])
    cases = []
    for family, rng_a, eta in CASES:
        c = (1.0 - eta) * rho(family, d, rng_a)
        exact_s = a @ c @ a.T + eta * np.eye(n)
        s = a @ np.linalg.inv(latent_precision(c, order, sets)) @ a.T + eta * np.eye(n)
        s_full = a @ np.linalg.inv(latent_precision(c, order, full)) @ a.T + eta * np.eye(n)
        for method in ("ML", "REML"):
            ll, beta, s2, inv = profiled(s, X, z, method)
            ll_full = profiled(s_full, X, z, method)[0]
            ll_exact = profiled(exact_s, X, z, method)[0]
            assert abs(ll_full - ll_exact) < 1e-9 * abs(ll_exact), (family, ll_full, ll_exact)
            cases.append({
                "family": family, "range": rng_a, "eta": eta, "method": method,
                "loglik": ll, "beta": beta, "sigma2": s2, "xtvx_inv": inv, "loglik_exact": ll_exact,
            })
    out = {
        "source": "tests/reference/vecchia_latent.py (numpy brute-force max-min order and neighbours of the "
                  "positions, dense latent Vecchia precision, dense marginal covariance of the pots)",
        "m": M,
        "location_x": [float(v) for v in lx], "location_y": [float(v) for v in ly],
        "location_of": loc,
        "covariate": [float(v) for v in cov], "response": [float(v) for v in z],
        "order": order, "sets": sets, "cases": cases,
    }
    with open(os.path.join(HERE, "fixtures", "vecchia_latent.json"), "w") as f:
        json.dump(out, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
