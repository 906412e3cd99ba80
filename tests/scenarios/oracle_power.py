"""The most power any test of the driver can have in the truth study's `both` and `covariate` truths,
and how often the same known-covariance test reads an effect of a candidate driver under `correlation`.

With the residual covariance known, the GLS z-test of one coefficient is the uniformly most powerful
unbiased test of it (Lehmann & Romano 2005, *Testing Statistical Hypotheses*, 3rd ed., §4.4 and §5.1, for
a normal linear model with known covariance, from memory), and its power is computed exactly:
`Phi(|b| / se - 1.96) + Phi(-|b| / se - 1.96)`, `se² = [(X' V^-1 X)^-1]_bb`. A verdict rule that
estimates the covariance and has to find the correlation too cannot do better. Reads kept truth-study
runs (`POTCLIM_TRUTH_KEEP=DIR`, folders `<truth>_<pots>_<seed>`): the pots' positions and design factors
(`pots.csv`) and the true night cold hours (`truth/pots.csv`); under `correlation` the trait, the mapped
night cold hours (`output/pot_covariates.csv`) and the door distance, each candidate tested by the
known-covariance GLS z-test (the verdict's two candidates). The true covariance and effect are the
scenario files' (`tests/scenarios/truth_both.toml`: exponential residual field `exp(-d / 0.7)` of sill
2.5 g², independent noise 1 g², -0.025 g per cold hour; `truth_covariate.toml`: noise 1 g² only).

    python tests/scenarios/oracle_power.py DIR [150|480]
"""

import csv
import sys
from pathlib import Path

import numpy as np
from scipy.stats import norm

EFFECT = -0.025
FIELD = {"both": (2.5, 0.7), "covariate": None}
NOISE = 1.0
LEVELS = [0.05, 0.025, 0.01]


def read(path):
    with open(path) as f:
        return list(csv.DictReader(f))


def design(pots, driver):
    lines = sorted({p["line"] for p in pots})
    water = sorted({p["watering"] for p in pots})
    cols = [np.ones(len(pots))]
    for lv in lines[1:]:
        cols.append(np.array([p["line"] == lv for p in pots], float))
    for wv in water[1:]:
        cols.append(np.array([p["watering"] == wv for p in pots], float))
    for lv in lines[1:]:
        for wv in water[1:]:
            cols.append(np.array([p["line"] == lv and p["watering"] == wv for p in pots], float))
    cols.append(np.asarray(driver, float))
    return np.column_stack(cols)


def main():
    root = Path(sys.argv[1])
    pots_n = sys.argv[2] if len(sys.argv) > 2 else "150"
    for truth, field in FIELD.items():
        powers = []
        for d in sorted(root.glob(f"{truth}_{pots_n}_*")):
            pots = read(d / "pots.csv")
            true = {r["pot"]: float(r["night_cold_hours"]) for r in read(d / "truth" / "pots.csv")}
            x = np.array([float(p["x"]) for p in pots])
            y = np.array([float(p["y"]) for p in pots])
            X = design(pots, [true[p["pot"]] for p in pots])
            V = NOISE * np.eye(len(pots))
            if field:
                sill, rng = field
                dist = np.hypot(x[:, None] - x[None, :], y[:, None] - y[None, :])
                V = V + sill * np.exp(-dist / rng)
            Vi_X = np.linalg.solve(V, X)
            cov = np.linalg.inv(X.T @ Vi_X)
            se = np.sqrt(cov[-1, -1])
            k = abs(EFFECT) / se
            powers.append([norm.cdf(k - c) + norm.cdf(-k - c) for c in norm.isf(np.array(LEVELS) / 2)])
        if powers:
            p = np.array(powers)
            for i, level in enumerate(LEVELS):
                print(
                    f"{truth} ({pots_n} pots, {len(p)} runs): known-covariance power of the driver's {level} test "
                    f"mean {p[:, i].mean():.3f}, min {p[:, i].min():.3f}; expected right of 40 at most "
                    f"{40 * p[:, i].mean():.1f}"
                )
    size(root, pots_n)


def size(root, pots_n):
    """Under `correlation` (no driver effect; the same field as `both`): the share of runs in which the
    known-covariance z-test of each candidate, and of either, falls below 0.05 and 0.01."""
    sill, rng = FIELD["both"]
    z = []
    for d in sorted(root.glob(f"correlation_{pots_n}_*")):
        pots = read(d / "pots.csv")
        truth = {r["pot"]: r for r in read(d / "truth" / "pots.csv")}
        mapped = {r["pot"]: float(r["night_cold_hours"]) for r in read(d / "output" / "pot_covariates.csv")}
        x = np.array([float(p["x"]) for p in pots])
        y = np.array([float(p["y"]) for p in pots])
        dist = np.hypot(x[:, None] - x[None, :], y[:, None] - y[None, :])
        V = NOISE * np.eye(len(pots)) + sill * np.exp(-dist / rng)
        trait = np.array([float(p["shoot_dry_weight_g"]) for p in pots])
        row = []
        for driver in ([mapped[p["pot"]] for p in pots], [float(truth[p["pot"]]["distance_door"]) for p in pots]):
            X = design(pots, driver)
            Vi_X = np.linalg.solve(V, X)
            a = X.T @ Vi_X
            b = np.linalg.solve(a, Vi_X.T @ trait)
            row.append(b[-1] / np.sqrt(np.linalg.inv(a)[-1, -1]))
        z.append(row)
    if not z:
        return
    z = np.array(z)
    p = 2 * norm.sf(np.abs(z))
    n = len(z)
    print(
        f"correlation ({pots_n} pots, {n} runs): known-covariance z-tests, correlation of the two candidates' z "
        f"{np.corrcoef(z.T)[0, 1]:.2f}"
    )
    for level in (0.05, 0.025, 0.01):
        r = (p < level).mean(axis=0)
        either = (p < level).any(axis=1).mean()
        print(
            f"  below {level}: night cold hours {100 * r[0]:.1f} %, door distance {100 * r[1]:.1f} %, "
            f"either {100 * either:.1f} % (binomial SE {100 * np.sqrt(either * (1 - either) / n):.1f} %)"
        )


if __name__ == "__main__":
    main()
