"""How far the per-seed MSSE of a map can spread when its SEs are calibrated.

Reads the per-pot files the mapping study writes with
`POTCLIM_MAP_DUMP=DIR` (tests/map_study.rs: one `<scenario>_<seed>.csv` per
run, columns pot, truth, mapped, se, distance_door) and prints, per scenario:

1. the per-seed MSSE of the map as it is (`z = (mapped - truth) / se`, as in
   the study) and the share of seeds within 0.5-2;
2. the same share after each pot's z is rescaled by its own RMS over the
   seeds (every pot calibrated exactly over the seeds; the seeds' own SEs
   kept, so whatever the SEs learn from each seed's data stays), and after
   one common factor for all pots;
3. the Gaussian reference: with z ~ N(0, C) at the pots, C the correlation
   matrix of the z over the seeds, the MSSE is `sum_i l_i chi2_1 / n` (`l_i`
   the eigenvalues of C; e.g. Johnson, Kotz & Balakrishnan 1994,
   *Continuous Univariate Distributions* vol. 1, ch. 18, quadratic forms in
   normal variables, from memory): its mean is 1, its variance
   `2 sum l_i^2 / n^2`, i.e. the effective degrees of freedom
   `n^2 / sum l_i^2`, and the share of 0.5-2 is found by Monte Carlo.

The pots' map errors share the loggers, so they are correlated: the MSSE of
one seed averages far fewer than n independent squares, and even exactly
calibrated SEs leave it outside 0.5-2 in some seeds.

Run (numpy):
    POTCLIM_MAP_DUMP=/tmp/msdump POTCLIM_MAP_SEEDS=240 \
        cargo test --release --test map_study -- --ignored --nocapture
    python tests/scenarios/map_msse_spread.py /tmp/msdump
"""

import csv
import glob
import os
import sys

import numpy as np


def load(directory, scenario):
    seeds = {}
    for path in glob.glob(os.path.join(directory, f"{scenario}_*.csv")):
        seed = int(path.rsplit("_", 1)[1].removesuffix(".csv"))
        with open(path) as f:
            rows = sorted(csv.DictReader(f), key=lambda r: r["pot"])
        seeds[seed] = rows
    order = sorted(seeds)
    pots = [r["pot"] for r in seeds[order[0]]]
    e = np.array([[float(r["mapped"]) - float(r["truth"]) for r in seeds[s]] for s in order])
    se = np.array([[float(r["se"]) for r in seeds[s]] for s in order])
    dist = np.array([float(r["distance_door"]) for r in seeds[order[0]]])
    for s in order:
        assert [r["pot"] for r in seeds[s]] == pots, f"seed {s}: other pots"
    with np.errstate(divide="ignore", invalid="ignore"):
        z = np.where(e == 0.0, 0.0, e / se)
    return order, z, dist


def within(m):
    return np.mean((m >= 0.5) & (m <= 2.0))


def report(scenario, order, z, dist, rng):
    n_seeds, n = z.shape
    msse = np.mean(z**2, axis=1)
    p = within(msse)
    print(f"{scenario}: {n_seeds} seeds, {n} pots")
    print(
        f"  as mapped: MSSE within 0.5-2 in {np.sum((msse >= 0.5) & (msse <= 2))}/{n_seeds} "
        f"({100 * p:.1f} %, binomial SE {100 * np.sqrt(p * (1 - p) / n_seeds):.1f} %); "
        f"median {np.median(msse):.3f}; below {np.sum(msse < 0.5)}, above {np.sum(msse > 2)}; "
        f"mean z^2 over pot-seeds {np.mean(z**2):.3f}; |z| <= 1.96 in {100 * np.mean(np.abs(z) <= 1.96):.1f} %"
    )
    k = np.sqrt(np.mean(z**2, axis=0))
    live = k > 0
    zs = np.where(live, z / np.where(live, k, 1.0), 0.0)
    m_pot = np.mean(zs**2, axis=1)
    m_one = msse / np.mean(msse)
    print(
        f"  each pot calibrated over the seeds: within {100 * within(m_pot):.1f} % "
        f"(median {np.median(m_pot):.3f}, 5-95 % {np.quantile(m_pot, 0.05):.2f}-{np.quantile(m_pot, 0.95):.2f}); "
        f"one common factor ({np.sqrt(np.mean(msse)):.3f}): within {100 * within(m_one):.1f} %"
    )
    for lo, hi in [(0, 1), (1, 2), (2, 4), (4, 1e9)]:
        sel = (dist >= lo) & (dist < hi)
        if sel.any():
            print(
                f"    pots {lo}-{hi if hi < 1e9 else 'inf'} m from the door: {sel.sum()}, "
                f"mean z^2 {np.mean(z[:, sel] ** 2):.3f}, per-pot RMS z median {np.median(k[sel]):.3f}"
            )
    c = np.corrcoef(zs[:, live], rowvar=False)
    lam = np.clip(np.linalg.eigvalsh(c), 0.0, None)
    nl = live.sum()
    df = nl**2 / np.sum(lam**2)
    draws = rng.standard_normal((20000, lam.size)) ** 2 @ lam / n
    # pots without any error (k = 0) add nothing; the live ones carry the mean
    draws *= n / nl
    print(
        f"  Gaussian reference: effective degrees of freedom {df:.1f} of {nl} pots "
        f"(largest eigenvalues {', '.join(f'{v:.1f}' for v in sorted(lam)[::-1][:4])}); "
        f"P(0.5 <= MSSE <= 2) = {100 * within(draws):.1f} % "
        f"(36 of 40 seeds or more with probability {100 * binom_tail(within(draws), 40, 36):.1f} %)"
    )


def binom_tail(p, n, k):
    from math import comb

    return sum(comb(n, j) * p**j * (1 - p) ** (n - j) for j in range(k, n + 1))


def main():
    directory = sys.argv[1] if len(sys.argv) > 1 else "/tmp/msdump"
    rng = np.random.default_rng(20261205)
    for scenario in ["truth_covariate", "sharp_draught"]:
        if glob.glob(os.path.join(directory, f"{scenario}_*.csv")):
            order, z, dist = load(directory, scenario)
            report(scenario, order, z, dist, rng)


if __name__ == "__main__":
    main()
