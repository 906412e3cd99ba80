"""Reference fits of the demo study's trait with a general-purpose library (statsmodels).

Fits shoot_fresh_weight_g ~ cultivar * nitrogen + night_cold_hours + mean_dli on the
committed demo (demo-data/pots.csv, with the true indicator values from demo-data/truth/pots.csv)
(a) by OLS with independent errors, and (b) by GLS with the TRUE residual covariance of the
scenario, 36 * spherical(d; 5 m) + 81 * I (spherical rho = 1 - 1.5h + 0.5h^3 for h = d/5 < 1).
demo-data/README.md quotes these numbers; the trait-model stage can compare its fits with them.

Regenerate (from the repository root):
    python3 -m venv .venv && .venv/bin/pip install numpy pandas statsmodels patsy
    .venv/bin/python tests/reference/demo_truth_fit.py
Output: tests/reference/fixtures/demo_truth_fit.json (full precision).
"""
import json
import pathlib

import numpy as np
import pandas as pd
import patsy
import statsmodels.api as sm

root = pathlib.Path(__file__).resolve().parents[2]
demo = root / "demo-data"
pots = pd.read_csv(demo / "pots.csv")
truth = pd.read_csv(demo / "truth" / "pots.csv")
d = pots.merge(truth[["pot", "night_cold_hours", "mean_dli"]], on="pot")
formula = "shoot_fresh_weight_g ~ C(cultivar) * C(nitrogen) + night_cold_hours + mean_dli"
y, X = patsy.dmatrices(formula, d, return_type="dataframe")

xy = d[["x", "y"]].to_numpy()
dist = np.sqrt(((xy[:, None, :] - xy[None, :, :]) ** 2).sum(-1))
h = dist / 5.0
sigma = 36.0 * np.where(h < 1, 1 - 1.5 * h + 0.5 * h**3, 0.0) + 81.0 * np.eye(len(d))

ols = sm.OLS(y, X).fit()
gls = sm.GLS(y, X, sigma=sigma).fit()
out = {
    "formula": formula,
    "n": int(len(d)),
    "ols": {"params": ols.params.to_dict(), "bse": ols.bse.to_dict(), "llf": float(ols.llf)},
    "gls_true_covariance": {"params": gls.params.to_dict(), "bse": gls.bse.to_dict(), "llf": float(gls.llf)},
}
fx = root / "tests" / "reference" / "fixtures" / "demo_truth_fit.json"
fx.write_text(json.dumps(out, indent=2, sort_keys=True) + "\n")
for k in ("night_cold_hours", "mean_dli"):
    print(f"{k}: OLS {ols.params[k]:.4f} +- {ols.bse[k]:.4f}; GLS(true) {gls.params[k]:.4f} +- {gls.bse[k]:.4f}")
