"""Reference values for the imputation of a mapped driver (model::imputation).

Regenerate (from the repository root):
    python3 -m venv .venv && .venv/bin/pip install numpy scipy
    .venv/bin/python tests/reference/mapped_driver.py

Writes tests/reference/fixtures/mapped_driver.json. A small invented example
(6 sensors, 8 pots, a given variogram, a given trait model) worked by dense
joint-Gaussian algebra in numpy, written independently of potclim's code:

* the driver at the pots given the sensor values W, X | W ~ N(mu, S), with the
  constant mean of the field integrated out under a flat prior (ordinary
  kriging read as a posterior: Cressie 1993, *Statistics for Spatial Data*,
  §3.4.5; Handcock & Stein 1993, *Technometrics* 35: 403-410), by the GLS
  formulas, and checked inside this script against a proper N(0, tau^2)
  prior on the mean with tau^2 = 1e4 conditioned densely;
* the trait model Y = D beta + gamma X + e, e ~ N(0, V), and the conditional
  X | W, Y of the joint Gaussian (Anderson 2003, *An Introduction to
  Multivariate Statistical Analysis*, 3rd ed., Theorem 2.5.1), once from the
  two-step formulas and once by conditioning the whole joint vector
  (X, W, Y) at once (again with the tau^2 prior on the mean);
* the conjugate posterior of (beta, gamma, sigma^2) given X, Y and the
  correlation matrix R of V = sigma^2 R under the prior 1/sigma^2 (Gelman et
  al. 2013, *Bayesian Data Analysis*, 3rd ed., §14.2): GLS estimate, RSS and
  the posterior moments E[sigma^2] = RSS/(n-p-2), E[1/sigma^2] = (n-p)/RSS
  and Cov(beta | sigma^2) = sigma^2 (Z'R^-1 Z)^-1;
* the sample autocorrelation of a short series (numpy.correlate, divisor n);
* the prior covariance from a map's window SEs (invented SEs at the pots):
  S_window = diag(se) C diag(se), C the correlation matrix of the flat-prior
  S above (numpy.corrcoef's normalisation C_ij = S_ij / sqrt(S_ii S_jj),
  written out here), checked inside this script to have the SEs squared on
  its diagonal and to be positive semi-definite (numpy.linalg.eigvalsh);
* the 97.5 % point of Student's t at the very large degrees of freedom that
  Rubin's rules give when imputations barely differ (scipy.stats.t.ppf).

Conventions (docs/spatial.md, docs/verdict.md): exponential correlation
exp(-d/a); the sensor covariance is c0 + c on the diagonal and c rho(d)
between different sensors; the pot-sensor and pot-pot covariances are
c rho(d) (the nugget is sensor noise; the signal is what acts on the plants);
V = sigma^2 [(1 - eta) rho_V(d) + eta I].
"""
import json
import os

import numpy as np
from scipy import stats

HERE = os.path.dirname(os.path.abspath(__file__))

# ---- the invented example -----------------------------------------------------
sensors = np.array([[0.2, 0.3], [2.1, 0.4], [3.9, 0.2], [0.5, 2.6], [2.4, 2.2], [3.7, 2.8]])
W = np.array([6.1, 5.2, 4.4, 5.8, 5.0, 4.9])
pots = np.array(
    [[0.6, 0.8], [1.4, 0.9], [2.6, 1.0], [3.4, 1.1], [0.7, 1.9], [1.6, 1.8], [2.9, 2.0], [3.5, 2.3]]
)
group = np.array([0, 1, 0, 1, 1, 0, 1, 0])  # a two-level factor, treatment coding
variogram = {"family": "exponential", "nugget": 0.15, "partial_sill": 0.8, "range": 1.6}
beta = np.array([10.0, -0.7])  # intercept, group 1
gamma = -1.3
sigma2 = 0.6
Y = np.array([2.9, 1.7, 4.1, 2.8, 1.6, 3.2, 2.2, 4.0])
cases = {
    "independent": {"family": None, "range": None, "eta": None},
    "correlated": {"family": "exponential", "range": 0.9, "eta": 0.35},
}

ns, n = len(W), len(Y)
c0, c, a = variogram["nugget"], variogram["partial_sill"], variogram["range"]


def dist(p, q):
    return np.sqrt(((p[:, None, :] - q[None, :, :]) ** 2).sum(-1))


Css = c * np.exp(-dist(sensors, sensors) / a) + c0 * np.eye(ns)
Csp = c * np.exp(-dist(sensors, pots) / a)
Cpp = c * np.exp(-dist(pots, pots) / a)
one = np.ones(ns)

# ---- X | W under a flat prior on the mean (GLS form of ordinary kriging) -----------
Ci = np.linalg.inv(Css)
m_hat = (one @ Ci @ W) / (one @ Ci @ one)
mu = m_hat + Csp.T @ Ci @ (W - m_hat)
u = 1.0 - Csp.T @ Ci @ one
S = Cpp - Csp.T @ Ci @ Csp + np.outer(u, u) / (one @ Ci @ one)

# the same with a proper prior m ~ N(0, tau^2), dense conditioning of (X_p, W)
# (the proper prior differs from the flat one by O(1/tau^2), about 3e-5 here; a
# larger tau^2 loses digits to round-off, hence the check at 1e-4)
tau2 = 1e4
joint = np.block([[Cpp + tau2, Csp.T + tau2], [Csp + tau2, Css + tau2]])
K = joint[:n, n:] @ np.linalg.inv(joint[n:, n:])
mu_tau = K @ W
S_tau = joint[:n, :n] - K @ joint[n:, :n]
assert np.allclose(mu, mu_tau, atol=1e-4), np.abs(mu - mu_tau).max()
assert np.allclose(S, S_tau, atol=1e-4), np.abs(S - S_tau).max()

D = np.column_stack([np.ones(n), (group == 1).astype(float)])
out = {
    "versions": {"numpy": np.__version__},
    "sensors": {"x": sensors[:, 0].tolist(), "y": sensors[:, 1].tolist(), "values": W.tolist()},
    "pots": {"x": pots[:, 0].tolist(), "y": pots[:, 1].tolist(), "group": group.tolist()},
    "variogram": variogram,
    "beta": beta.tolist(),
    "gamma": gamma,
    "sigma2": sigma2,
    "trait": Y.tolist(),
    "prior_mean": mu.tolist(),
    "prior_cov": S.tolist(),
    "cases": {},
}

for name, cs in cases.items():
    if cs["family"] is None:
        R = np.eye(n)
    else:
        R = (1 - cs["eta"]) * np.exp(-dist(pots, pots) / cs["range"]) + cs["eta"] * np.eye(n)
    V = sigma2 * R
    # two-step: X | W ~ N(mu, S), then condition on Y = D beta + gamma X + e
    M = gamma**2 * S + V
    gain = gamma * S @ np.linalg.inv(M)
    cmean = mu + gain @ (Y - D @ beta - gamma * mu)
    ccov = S - gain @ (gamma * S)
    # all at once: the joint of (X_p, W, Y) with m ~ N(0, tau^2), conditioned on (W, Y)
    CxW = Csp.T + tau2
    Cxx = Cpp + tau2
    CWW = Css + tau2
    CxY = gamma * Cxx
    CWY = gamma * CxW.T
    CYY = gamma**2 * Cxx + V
    obs = np.block([[CWW, CWY], [CWY.T, CYY]])
    cross = np.hstack([CxW, CxY])
    G = cross @ np.linalg.inv(obs)
    resid = np.concatenate([W, Y - D @ beta])
    cmean_all = G @ resid
    ccov_all = Cxx - G @ cross.T
    assert np.allclose(cmean, cmean_all, atol=1e-4), np.abs(cmean - cmean_all).max()
    assert np.allclose(ccov, ccov_all, atol=1e-4), np.abs(ccov - ccov_all).max()

    # conjugate posterior of (beta, gamma, sigma^2) given X = cmean, Y, R
    Z = np.column_stack([D, cmean])
    Ri = np.linalg.inv(R)
    A = Z.T @ Ri @ Z
    b_hat = np.linalg.solve(A, Z.T @ Ri @ Y)
    r = Y - Z @ b_hat
    rss = float(r @ Ri @ r)
    p = Z.shape[1]
    out["cases"][name] = {
        "v_family": cs["family"],
        "v_range": cs["range"],
        "v_eta": cs["eta"],
        "cond_mean": cmean.tolist(),
        "cond_cov": ccov.tolist(),
        "posterior": {
            "x": cmean.tolist(),
            "coef_hat": b_hat.tolist(),
            "rss": rss,
            "df": n - p,
            "mean_sigma2": rss / (n - p - 2),
            "mean_precision": (n - p) / rss,
            "zrz_inv": np.linalg.inv(A).tolist(),
        },
    }

# ---- sample autocorrelation (divisor n in both sums), an AR(1)-like invented series ----
series = np.array([0.3, 0.9, 1.4, 0.8, -0.2, -0.9, -0.4, 0.5, 1.1, 0.7, 0.1, -0.6, -1.2, -0.3, 0.4])
dev = series - series.mean()
full = np.correlate(dev, dev, mode="full")[len(dev) - 1 :]
out["autocorrelation"] = {"series": series.tolist(), "lags": [1, 2, 5], "acf": [float(full[k] / full[0]) for k in (1, 2, 5)]}

# ---- the prior from the map's window SEs -----------------------------------------------
window_se = np.array([0.21, 0.35, 0.18, 0.42, 0.27, 0.05, 0.31, 0.24])
sd = np.sqrt(np.diag(S))
C = S / np.outer(sd, sd)
S_window = np.diag(window_se) @ C @ np.diag(window_se)
assert np.allclose(np.diag(S_window), window_se**2)
assert np.linalg.eigvalsh(S_window).min() > -1e-12
out["window_prior"] = {"se": window_se.tolist(), "cov": S_window.tolist()}

# ---- Student's t at very large degrees of freedom -----------------------------------------
t_df = [1e6, 3e7, 1e9, 1e12]
out["t_975"] = {"df": t_df, "quantile": [float(stats.t.ppf(0.975, d)) for d in t_df], "scipy": __import__("scipy").__version__}

path = os.path.join(HERE, "fixtures", "mapped_driver.json")
with open(path, "w") as f:
    json.dump(out, f, indent=1)
    f.write("\n")
print("wrote", path)
