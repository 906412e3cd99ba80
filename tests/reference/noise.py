"""Reference for src/spatial/noise.rs: the loggers' measurement-error variance.

Writes tests/reference/fixtures/noise.json:
* `series`: an invented 60-step series at 6 sensors (a shared daily cycle, a fixed
  offset per sensor, a night-time anomaly, white noise of SD 0.1; a few readings
  missing, as null), and numpy's computation of the robust temporal
  semivariances of the per-step anomalies at lags 1 and 2 (`g1`, `g2`: median of
  the squared differences, each divided by (1 - 1/n_t) + (1 - 1/n_t+l), over the
  median of chi-square(1), scipy.stats.chi2.ppf(0.5, 1)) and `estimate`
  = 2 g1 - g2;
* `kriging`: ordinary kriging of 7 invented sensors (exponential, nugget 0.05 of
  which 0.03 is noise, partial sill 1, range 2 m) at one target by a dense
  numpy solve: the kriging SE `se` (nugget included) and, directly,
  sqrt(Var(S(x0) - lambda' Z)) of the noise-free value, `noise_free_se`.

Regenerate: `python3 -m venv .venv && .venv/bin/pip install numpy scipy`, then
`.venv/bin/python tests/reference/noise.py`.
"""
import json
import os

import numpy as np
from scipy.stats import chi2

rng = np.random.default_rng(20261204)
steps, n = 60, 6
t = np.arange(steps)
night = ((t % 24) < 8).astype(float)
z = (12.0 + 2.0 * np.sin(t / 24.0 * 2 * np.pi))[:, None] + 0.3 * np.arange(n)[None, :] \
    - 0.4 * night[:, None] * (np.arange(n)[None, :] / n) + 0.1 * rng.standard_normal((steps, n))
z = np.round(z, 4)
for (i, j) in [(5, 1), (6, 1), (17, 4), (30, 0), (31, 2), (44, 5)]:
    z[i, j] = np.nan


def semivariance(z, lag):
    mean = np.nanmean(z, axis=1)
    cnt = np.sum(np.isfinite(z), axis=1)
    vals = []
    for s in range(z.shape[0] - lag):
        if cnt[s] < 2 or cnt[s + lag] < 2:
            continue
        norm = (1 - 1 / cnt[s]) + (1 - 1 / cnt[s + lag])
        d = (z[s + lag] - mean[s + lag]) - (z[s] - mean[s])
        vals.extend(list((d[np.isfinite(d)] ** 2) / norm))
    return float(np.median(vals) / chi2.ppf(0.5, 1))


g1, g2 = semivariance(z, 1), semivariance(z, 2)

# Ordinary kriging with a nugget that is partly measurement error.
xy = np.array([[0.5, 0.5], [3.0, 0.8], [1.2, 2.9], [4.1, 3.3], [2.2, 1.7], [0.3, 4.0], [5.0, 1.0]])
x0 = np.array([2.6, 2.4])
c0, c_me, c, a = 0.05, 0.03, 1.0, 2.0


def cov(h):
    return np.where(h > 0, c * np.exp(-h / a), c + c0)


D = np.linalg.norm(xy[:, None, :] - xy[None, :, :], axis=2)
S = cov(D)
k = c * np.exp(-np.linalg.norm(xy - x0, axis=1) / a)
m = len(xy)
A = np.zeros((m + 1, m + 1))
A[:m, :m] = S
A[:m, m] = A[m, :m] = 1.0
sol = np.linalg.solve(A, np.append(k, 1.0))
lam, mu = sol[:m], sol[m]
# Kriging variance of Z(x0) (its nugget included): C(0) - lambda'k - mu.
se = float(np.sqrt(c + c0 - lam @ k - mu))
# Direct: Var(S(x0) - lambda'Z), S(x0) with variance c + (c0 - c_me).
var_s = (c + c0 - c_me) - 2 * lam @ k + lam @ S @ lam
out = {
    "series": [[None if not np.isfinite(v) else float(v) for v in row] for row in z],
    "g1": g1,
    "g2": g2,
    "estimate": 2 * g1 - g2,
    "kriging": {"se": se, "noise": c_me, "noise_free_se": float(np.sqrt(var_s))},
}
here = os.path.dirname(os.path.abspath(__file__))
with open(os.path.join(here, "fixtures", "noise.json"), "w") as f:
    json.dump(out, f, indent=1)
print("g1", g1, "g2", g2, "estimate", 2 * g1 - g2, "se", se, "noise-free", np.sqrt(var_s), np.sqrt(se**2 - c_me))
