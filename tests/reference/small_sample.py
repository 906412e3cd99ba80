"""Reference for the small-sample correction of a fixed effect's test under a
correlated residual (Kenward & Roger 1997, Biometrics 53: 983-997), written
from the paper's formulas with dense numpy matrices.

Model: y = X beta + e, e ~ N(0, Sigma), Sigma = s2 [(1 - eta) R(d; a) + eta I],
covariance parameters theta = (s2, ln a[, eta]). Steps (KR 1997, sections 2-4):

* theta by REML (scipy.optimize on the restricted log-likelihood);
* W = inverse of the expected REML information, I_ij = tr(P S_i P S_j) / 2,
  P = Sigma^-1 - Sigma^-1 X Phi X' Sigma^-1, Phi = (X' Sigma^-1 X)^-1;
* P_i = X' (d Sigma^-1 / d theta_i) X (here by central differences of
  numpy's inverse, a route independent of the analytic form used in Rust),
  Q_ij = X' Sigma^-1 S_i Sigma^-1 S_j Sigma^-1 X,
  R_ij = X' Sigma^-1 S_ij Sigma^-1 X (S_ij the analytic second derivative);
* Lambda = Phi [sum_ij W_ij (Q_ij - P_i Phi P_j - R_ij / 4)] Phi,
  Phi_A = Phi + 2 Lambda; potclim uses the first-order adjustment, without
  the R_ij term (src/model/small_sample.rs says why): the fixture holds it,
  and the second-order SE beside it for comparison (se_adjusted_second_order);
* for one coefficient (L = e_c, l = 1): A1, A2, B, g, c1..c3, E*, V*,
  rho, the denominator df m and the scale lambda; F = lambda beta_c^2 /
  (Phi_A)_cc on (1, m) df.
* The smooth share of src/model/confounding.rs (numpy's eigh).
* The Satterthwaite df of the plug-in variance (Giesbrecht & Burns 1985,
  Biometrics 41: 477-486): 2 phi^2 / (g' W g), g the numerical gradient of
  phi(theta) = Phi_cc.

Data: an invented bench of 49 pots (7 x 7, 0.3 m apart, jittered) with one
factor of three levels and a smooth driver (a draught fading from one side),
a trait simulated with an exponential residual field (seeded numpy). Cases:
exponential with and without nugget, Gaussian with nugget.

Regenerate: `python3 -m venv .venv && .venv/bin/pip install numpy scipy`,
then `.venv/bin/python tests/reference/small_sample.py` (writes
tests/reference/data/small_sample.csv and
tests/reference/fixtures/small_sample.json).
"""
import json
import os

import numpy as np
from scipy import optimize, stats

HERE = os.path.dirname(os.path.abspath(__file__))


def corr(family, h):
    if family == "exponential":
        return np.exp(-h)
    if family == "gaussian":
        return np.exp(-h * h)
    raise ValueError(family)


def dcorr(family, h):
    """d rho / d ln a, with h = d / a (dh/d ln a = -h)."""
    r = corr(family, h)
    if family == "exponential":
        return h * r
    return 2 * h * h * r


def d2corr(family, h):
    """d^2 rho / d (ln a)^2."""
    r = corr(family, h)
    if family == "exponential":
        return (h * h - h) * r
    return (4 * h**4 - 4 * h * h) * r


def sigma(theta, family, d, nugget):
    s2, la = theta[0], theta[1]
    eta = theta[2] if nugget else 0.0
    n = d.shape[0]
    return s2 * ((1 - eta) * corr(family, d / np.exp(la)) + eta * np.eye(n))


def dsigma(theta, family, d, nugget):
    s2, la = theta[0], theta[1]
    eta = theta[2] if nugget else 0.0
    h = d / np.exp(la)
    n = d.shape[0]
    R = corr(family, h)
    D = dcorr(family, h)
    D2 = d2corr(family, h)
    first = [(1 - eta) * R + eta * np.eye(n), s2 * (1 - eta) * D]
    if nugget:
        first.append(s2 * (np.eye(n) - R))
    k = len(first)
    second = [[np.zeros((n, n)) for _ in range(k)] for _ in range(k)]
    second[0][1] = second[1][0] = (1 - eta) * D
    second[1][1] = s2 * (1 - eta) * D2
    if nugget:
        second[0][2] = second[2][0] = np.eye(n) - R
        second[1][2] = second[2][1] = -s2 * D
    return first, second


def reml_negloglik(t, family, d, X, y, nugget):
    la = t[0]
    eta = t[1] if nugget else 0.0
    n, p = X.shape
    V = (1 - eta) * corr(family, d / np.exp(la)) + eta * np.eye(n)
    try:
        L = np.linalg.cholesky(V)
    except np.linalg.LinAlgError:
        return 1e300, 1.0
    Xw = np.linalg.solve(L, X)
    yw = np.linalg.solve(L, y)
    A = Xw.T @ Xw
    b = np.linalg.solve(A, Xw.T @ yw)
    r = yw - Xw @ b
    q = r @ r
    m = n - p
    return 0.5 * (m * (np.log(2 * np.pi) + 1 + np.log(q / m)) + 2 * np.log(np.diag(L)).sum()
                  + np.linalg.slogdet(A)[1]), q / m


def fit_reml(family, d, X, y, nugget):
    best = None
    for la0 in np.log([0.3, 0.6, 1.0, 1.8, 3.0]):
        for eta0 in ([0.1, 0.4] if nugget else [0.0]):
            x0 = [la0, eta0] if nugget else [la0]
            bounds = [(np.log(0.02), np.log(20.0))] + ([(0.0, 0.95)] if nugget else [])
            r = optimize.minimize(lambda t: reml_negloglik(t, family, d, X, y, nugget)[0], x0,
                                  method="L-BFGS-B", bounds=bounds, options={"ftol": 1e-14, "gtol": 1e-10})
            r = optimize.minimize(lambda t: reml_negloglik(t, family, d, X, y, nugget)[0], r.x,
                                  method="Nelder-Mead", bounds=bounds, options={"xatol": 1e-10, "fatol": 1e-13, "maxiter": 20000})
            if best is None or r.fun < best.fun:
                best = r
    s2 = reml_negloglik(best.x, family, d, X, y, nugget)[1]
    theta = np.array([s2, best.x[0]] + ([best.x[1]] if nugget else []))
    return theta, -best.fun


def kenward_roger(theta, family, d, X, y, nugget, c, first_order=True):
    n, p = X.shape
    S = sigma(theta, family, d, nugget)
    Si = np.linalg.inv(S)
    Phi = np.linalg.inv(X.T @ Si @ X)
    beta = Phi @ X.T @ Si @ y
    P = Si - Si @ X @ Phi @ X.T @ Si
    first, second = dsigma(theta, family, d, nugget)
    k = len(first)
    info = np.array([[0.5 * np.trace(P @ first[i] @ P @ first[j]) for j in range(k)] for i in range(k)])
    W = np.linalg.inv(info)
    # P_i by central differences of the inverse (step relative to each parameter's scale)
    Pi = []
    for i in range(k):
        h = 1e-5 * (abs(theta[i]) if i == 0 else 1.0)
        tp, tm = theta.copy(), theta.copy()
        tp[i] += h
        tm[i] -= h
        dSi = (np.linalg.inv(sigma(tp, family, d, nugget)) - np.linalg.inv(sigma(tm, family, d, nugget))) / (2 * h)
        Pi.append(X.T @ dSi @ X)
    Q = [[X.T @ Si @ first[i] @ Si @ first[j] @ Si @ X for j in range(k)] for i in range(k)]
    R = [[X.T @ Si @ second[i][j] @ Si @ X for j in range(k)] for i in range(k)]
    with_r = 0.0 if first_order else 1.0
    inner = sum(W[i, j] * (Q[i][j] - Pi[i] @ Phi @ Pi[j] - with_r * 0.25 * R[i][j])
                for i in range(k) for j in range(k))
    Lam = Phi @ inner @ Phi
    PhiA = Phi + 2 * Lam
    # one coefficient: L = e_c, l = 1
    l = 1
    Lm = np.zeros((p, 1))
    Lm[c, 0] = 1.0
    Theta = Lm @ np.linalg.inv(Lm.T @ PhiA @ Lm) @ Lm.T
    A1 = sum(W[i, j] * np.trace(Theta @ Phi @ Pi[i] @ Phi) * np.trace(Theta @ Phi @ Pi[j] @ Phi)
             for i in range(k) for j in range(k))
    A2 = sum(W[i, j] * np.trace(Theta @ Phi @ Pi[i] @ Phi @ Theta @ Phi @ Pi[j] @ Phi)
             for i in range(k) for j in range(k))
    B = (A1 + 6 * A2) / (2 * l)
    g = ((l + 1) * A1 - (l + 4) * A2) / ((l + 2) * A2)
    c1 = g / (3 * l + 2 * (1 - g))
    c2 = (l - g) / (3 * l + 2 * (1 - g))
    c3 = (l + 2 - g) / (3 * l + 2 * (1 - g))
    Estar = 1 / (1 - A2 / l)
    Vstar = (2 / l) * (1 + c1 * B) / ((1 - c2 * B) ** 2 * (1 - c3 * B))
    rho = Vstar / (2 * Estar**2)
    m = 4 + (l + 2) / (l * rho - 1)
    lam = m / (Estar * (m - 2))
    F = lam * beta[c] ** 2 / PhiA[c, c]
    pval = stats.f.sf(F, 1, m)
    # CI from the t form of the scaled statistic: beta +- t_m se_A / sqrt(lambda)
    tq = stats.t.ppf(0.975, m)
    half = tq * np.sqrt(PhiA[c, c] / lam)
    # Satterthwaite df of the plug-in variance
    grad = []
    for i in range(k):
        h = 1e-5 * (abs(theta[i]) if i == 0 else 1.0)
        tp, tm = theta.copy(), theta.copy()
        tp[i] += h
        tm[i] -= h
        f = lambda t: np.linalg.inv(X.T @ np.linalg.inv(sigma(t, family, d, nugget)) @ X)[c, c]
        grad.append((f(tp) - f(tm)) / (2 * h))
    grad = np.array(grad)
    sat_df = 2 * Phi[c, c] ** 2 / (grad @ W @ grad)
    return {
        "beta": float(beta[c]),
        "se_plugin": float(np.sqrt(Phi[c, c])),
        "se_adjusted": float(np.sqrt(PhiA[c, c])),
        "df": float(m),
        "scale": float(lam),
        "f": float(F),
        "p_value": float(pval),
        "ci": [float(beta[c] - half), float(beta[c] + half)],
        "satterthwaite_df": float(sat_df),
        "information": info.tolist(),
    }


def main():
    rng = np.random.default_rng(20261204)
    rows, cols, step = 7, 7, 0.3
    xs, ys = np.meshgrid(np.arange(cols) * step, np.arange(rows) * step)
    x = xs.ravel() + rng.uniform(-0.05, 0.05, rows * cols)
    y = ys.ravel() + rng.uniform(-0.05, 0.05, rows * cols)
    n = x.size
    line = np.array(["L%d" % (i % 3 + 1) for i in range(n)])
    draught = 40 * np.exp(-x / 1.2) + rng.normal(0, 2.0, n)
    d = np.hypot(x[:, None] - x[None, :], y[:, None] - y[None, :])
    field = np.linalg.cholesky(2.0 * np.exp(-d / 0.6) + 1e-10 * np.eye(n)) @ rng.normal(size=n)
    effect = {"L1": 0.0, "L2": 1.5, "L3": -0.8}
    trait = 30 + np.array([effect[l] for l in line]) - 0.04 * draught + field + rng.normal(0, 0.6, n)
    os.makedirs(os.path.join(HERE, "data"), exist_ok=True)
    with open(os.path.join(HERE, "data", "small_sample.csv"), "w") as f:
        f.write("pot,x,y,line,draught,trait\n")
        for i in range(n):
            f.write("P%02d,%.6f,%.6f,%s,%.6f,%.6f\n" % (i + 1, x[i], y[i], line[i], draught[i], trait[i]))
    # read back the rounded values so that Rust and numpy see the same numbers
    data = np.genfromtxt(os.path.join(HERE, "data", "small_sample.csv"), delimiter=",", names=True, dtype=None,
                         encoding="utf-8")
    x, y = data["x"].astype(float), data["y"].astype(float)
    d = np.hypot(x[:, None] - x[None, :], y[:, None] - y[None, :])
    lines = data["line"]
    # treatment coding: intercept, L2, L3, draught (the driver is column 3)
    X = np.column_stack([np.ones(n), lines == "L2", lines == "L3", data["draught"].astype(float)]).astype(float)
    yv = data["trait"].astype(float)
    cases = []
    for family, nugget in [("exponential", True), ("exponential", False), ("gaussian", True)]:
        theta, ll = fit_reml(family, d, X, yv, nugget)
        kr = kenward_roger(theta, family, d, X, yv, nugget, 3)
        kr["se_adjusted_second_order"] = kenward_roger(theta, family, d, X, yv, nugget, 3, first_order=False)["se_adjusted"]
        case = {
            "family": family,
            "nugget": nugget,
            "sigma2": float(theta[0]),
            "range": float(np.exp(theta[1])),
            "eta": float(theta[2]) if nugget else 0.0,
            "reml_loglik": float(ll),
            "coefficient": 3,
        }
        case.update(kr)
        cases.append(case)
    # smooth share (src/model/confounding.rs): leading eigenvectors of the
    # exponential correlation (range 0.6 m) holding half its trace; drivers
    # made free of the intercept; share = |U_K' x~|^2 / |x~|^2.
    R = np.exp(-d / 0.6)
    lam, U = np.linalg.eigh(R)
    idx = np.argsort(lam)[::-1]
    lam, U = lam[idx], U[:, idx]
    K = int(np.searchsorted(np.cumsum(lam), n / 2.0) + 1)
    def share(v):
        r = v - v.mean()
        return float(np.sum((U[:, :K].T @ r) ** 2) / (r @ r))
    checker = np.array([1.0 if (i % 7 + i // 7) % 2 == 0 else -1.0 for i in range(n)])
    smooth = {"range": 0.6, "k": K, "draught": share(data["draught"].astype(float)), "checker": share(checker)}
    out = {"method": "Kenward & Roger (1997), first-order adjustment (no R_ij term), for one coefficient, theta = (sigma2, ln range[, nugget share]), "
                     "expected REML information; Satterthwaite df of the plug-in variance for comparison",
           "columns": ["(intercept)", "line L2", "line L3", "draught"],
           "cases": cases,
           "smooth_share": smooth}
    os.makedirs(os.path.join(HERE, "fixtures"), exist_ok=True)
    with open(os.path.join(HERE, "fixtures", "small_sample.json"), "w") as f:
        json.dump(out, f, indent=1)
    print("smooth share", smooth)
    for c in cases:
        print(c["family"], c["nugget"], "range %.4f eta %.4f" % (c["range"], c["eta"]),
              "se %.5f -> %.5f df %.2f (Satterthwaite %.2f) scale %.4f p %.4g" %
              (c["se_plugin"], c["se_adjusted"], c["df"], c["satterthwaite_df"], c["scale"], c["p_value"]))


if __name__ == "__main__":
    main()
