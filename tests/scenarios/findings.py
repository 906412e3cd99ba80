"""Checks behind the findings of the truth study (docs/verdict.md, "Truth study through the whole
pipeline"), run on kept study folders:

    POTCLIM_TRUTH_KEEP=/tmp/truth POTCLIM_TRUTH_SEEDS=40 \
        cargo test --test truth_study -- --ignored --nocapture
    python3 -m venv /tmp/venv && /tmp/venv/bin/pip install numpy scipy
    /tmp/venv/bin/python tests/scenarios/findings.py /tmp/truth

It prints
1. the verdict recomputed from each run's output/comparison.csv by the rule of docs/verdict.md
   ("The rule"), at tie margins 2, 3, 4 and 6, with the number of runs where the verdict at
   potclim's default margin (POTCLIM_MARGIN below; 4 since 2026-12-02, 2 before) differs from
   potclim's summary.json;
2. the coverage of the 95 % CI of the driver by GLS with the TRUE covariance of the residual
   (truth/effects.json: residual field and noise), on the mapped driver and the design of the study
   (intercept, factors, their interaction), a normal quantile;
3. for the `correlation` runs whose verdict was `both`, the ML fit of
   `base + driver | exponential + nugget` by scipy (Nelder-Mead on log range and logit nugget
   share; the profiled Gaussian log-likelihood with all constants), next to potclim's row of
   comparison.csv.

Nothing here is read by the Rust tests; it documents how the numbers in docs/verdict.md were
obtained. Libraries: numpy, scipy (general-purpose).
"""

import csv
import json
import sys
from pathlib import Path

import numpy as np
from scipy.optimize import minimize

TRUTHS = ["covariate", "correlation", "both", "none"]
DRIVER = "night_cold_hours"
ORDER = {"none": 0, "covariate": 1, "correlation": 2, "both": 3}
# potclim's default tie margin (`[verdict].tie_delta`), used by the runs being checked.
POTCLIM_MARGIN = 4


def kind(row):
    d = bool(row["drivers"])
    c = row["correlation"] != "none"
    return "both" if d and c else "covariate" if d else "correlation" if c else "none"


def decide(rows, margin):
    best = min(float(r["aic"]) for r in rows)
    cands = [r for r in rows if float(r["aic"]) <= best + margin]
    cands.sort(key=lambda r: (int(r["n_params"]), ORDER[kind(r)], float(r["aic"])))
    return kind(cands[0])


def runs(root):
    out = {}
    for t in TRUTHS:
        for d in sorted(root.glob(f"{t}_*"), key=lambda p: int(p.name.split("_")[-1])):
            out.setdefault(t, []).append(d)
    return out


def study_arrays(d):
    """Design matrix (intercept, treatment contrasts of both factors, their interaction), the
    mapped driver, the trait and the coordinates, in the pot table's order."""
    pots = list(csv.DictReader(open(d / "pots.csv")))
    mapped = {r["pot"]: float(r[DRIVER]) for r in csv.DictReader(open(d / "output/pot_covariates.csv"))}
    effects = json.load(open(d / "truth/effects.json"))
    trait = effects["trait"]
    f1, f2 = [r["factor"] for r in effects["reference_levels"]]
    l1 = sorted({r[f1] for r in pots} - {effects["reference_levels"][0]["level"]})
    l2 = sorted({r[f2] for r in pots} - {effects["reference_levels"][1]["level"]})
    rows = []
    for r in pots:
        a = [1.0 * (r[f1] == v) for v in l1]
        b = [1.0 * (r[f2] == v) for v in l2]
        rows.append([1.0] + a + b + [x * y for x in a for y in b])
    X = np.array(rows)
    drv = np.array([mapped[r["pot"]] for r in pots])
    y = np.array([float(r[trait]) for r in pots])
    xy = np.array([[float(r["x"]), float(r["y"])] for r in pots])
    h = np.hypot(xy[:, None, 0] - xy[None, :, 0], xy[:, None, 1] - xy[None, :, 1])
    return X, drv, y, h, effects


def oracle_covers(d):
    X, drv, y, h, eff = study_arrays(d)
    truth = next(x["effect_per_unit"] for x in eff["drivers"] if x["name"] == DRIVER)
    V = eff["noise_sd"] ** 2 * np.eye(len(y))
    rf = eff["residual_field"]
    if rf:
        assert rf["family"] == "exponential", rf
        V = V + rf["sill"] * np.exp(-h / rf["range_m"])
    Xd = np.column_stack([X, drv])
    Vi = np.linalg.inv(V)
    A = np.linalg.inv(Xd.T @ Vi @ Xd)
    b = A @ Xd.T @ Vi @ y
    z = (b[-1] - truth) / np.sqrt(A[-1, -1])
    return abs(z) <= 1.959964


def ml_fit(d):
    X, drv, y, h, _ = study_arrays(d)
    Xd = np.column_stack([X, drv])
    n = len(y)

    def nll(th):
        rng = np.exp(th[0])
        eta = 1.0 / (1.0 + np.exp(-th[1]))
        R = (1 - eta) * np.exp(-h / rng) + eta * np.eye(n)
        L = np.linalg.cholesky(R)
        Xi = np.linalg.solve(L, Xd)
        yi = np.linalg.solve(L, y)
        beta, *_ = np.linalg.lstsq(Xi, yi, rcond=None)
        e = yi - Xi @ beta
        s2 = e @ e / n
        return 0.5 * (n * np.log(2 * np.pi * s2) + 2 * np.sum(np.log(np.diag(L))) + n)

    best = None
    for r0 in [0.2, 0.5, 1.0, 2.0]:
        for e0 in [-2.0, 0.0, 1.0]:
            o = minimize(nll, [np.log(r0), e0], method="Nelder-Mead",
                         options={"xatol": 1e-7, "fatol": 1e-9, "maxiter": 5000})
            if best is None or o.fun < best.fun:
                best = o
    return np.exp(best.x[0]), 1.0 / (1.0 + np.exp(-best.x[1])), -best.fun


def main(root):
    by_truth = runs(root)
    print("1. verdicts recomputed from comparison.csv (right of all runs)")
    for margin in [2, 3, 4, 6]:
        parts = []
        for t, ds in by_truth.items():
            right = mism = 0
            for d in ds:
                v = decide(list(csv.DictReader(open(d / "output/comparison.csv"))), margin)
                right += v == t
                if margin == POTCLIM_MARGIN:
                    mism += v != json.load(open(d / "output/summary.json"))["verdict"]
            same = margin == POTCLIM_MARGIN
            parts.append(f"{t} {right}/{len(ds)}" + (f" (differs from potclim: {mism})" if same else ""))
        print(f"   margin {margin}: " + "; ".join(parts))
    print("2. GLS with the true covariance: 95 % CI of the driver covers the true effect")
    for t, ds in by_truth.items():
        print(f"   {t}: {sum(oracle_covers(d) for d in ds)}/{len(ds)}")
    print("3. `correlation` runs read as `both`: ML fit of base+driver | exponential+nugget")
    for d in by_truth.get("correlation", []):
        if json.load(open(d / "output/summary.json"))["verdict"] != "both":
            continue
        rng, eta, ll = ml_fit(d)
        row = next(r for r in csv.DictReader(open(d / "output/comparison.csv"))
                   if r["model"] == f"base+{DRIVER} | exponential+nugget")
        print(f"   {d.name}: scipy range {rng:.3f} m, nugget share {eta:.3f}, loglik {ll:.3f}; "
              f"potclim range {float(row['range']):.3f} m, nugget share {float(row['nugget_share']):.3f}, "
              f"loglik {float(row['loglik']):.3f}")


if __name__ == "__main__":
    main(Path(sys.argv[1]))
