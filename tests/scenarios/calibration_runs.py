"""How the calibration behaved on kept truth-study runs (docs/verdict.md, "2026-12-05 (fourth session)"):

    POTCLIM_TRUTH_KEEP=/tmp/truth POTCLIM_TRUTH_SEEDS=40 \
        cargo test --release --test truth_study truth_study_full -- --ignored --nocapture
    /tmp/venv/bin/python tests/scenarios/calibration_runs.py /tmp/truth [150|480]

It prints, per truth (`covariate`, `correlation`, `both`, `none`, `hardest`):
1. the verdicts tallied from each run's output/summary.json, with the wrong seeds, and the coverage of the
   small-sample 95 % interval of night cold hours (`drivers[].ci_low/ci_high_small_sample`) over the runs whose
   chosen model has it (true effect -0.025 g per hour under `covariate` and `both`, else 0);
2. how often the asymptotic likelihood-ratio test of each candidate driver (night cold hours, the door distance)
   falls below 0.05, 0.025 and 0.01 under exponential errors with and without a nugget, from the ML
   log-likelihoods of output/comparison.csv (chi-square on 1 df);
3. every calibration step with a bootstrap or a second test (summary.json `calibration.steps[]`).

Nothing here is read by the Rust tests. Libraries: scipy (general-purpose).
"""

import csv
import json
import sys
from pathlib import Path

from scipy.stats import chi2

TRUTHS = ["covariate", "correlation", "both", "none", "hardest"]
EXPECTED = {"covariate": "covariate", "correlation": "correlation", "both": "both", "none": "none",
            "hardest": "correlation"}
DRIVERS = ["night_cold_hours", "distance_door"]
ERRORS = [" | exponential", " | exponential+nugget"]


def runs(root, pots, truth):
    for seed in range(1, 41):
        d = Path(root) / f"{truth}_{pots}_{seed}" / "output"
        if (d / "summary.json").exists():
            yield seed, d


def tally(root, pots, truth):
    right, wrong, covered, with_driver = 0, [], 0, 0
    effect = -0.025 if truth in ("covariate", "both") else 0.0
    for seed, d in runs(root, pots, truth):
        s = json.loads((d / "summary.json").read_text())
        if s["verdict"] == EXPECTED[truth]:
            right += 1
        else:
            wrong.append((seed, s["verdict"]))
        if "night_cold_hours" in s["best_model"].split(" | ")[0]:
            drv = next(x for x in s["drivers"] if x["name"] == "night_cold_hours")
            lo, hi = drv.get("ci_low_small_sample"), drv.get("ci_high_small_sample")
            if lo is not None and hi is not None:
                with_driver += 1
                covered += lo <= effect <= hi
    print(f"{truth:12s} right {right} wrong {wrong}; small-sample CI covers {covered}/{with_driver}")


def asymptotic(root, pots, truth):
    ps = {(drv, e): [] for drv in DRIVERS for e in ERRORS}
    for _, d in runs(root, pots, truth):
        with open(d / "comparison.csv") as f:
            comp = {r["model"]: float(r["loglik"]) for r in csv.DictReader(f)}
        for drv in DRIVERS:
            for e in ERRORS:
                lrt = max(2.0 * (comp[f"base+{drv}{e}"] - comp[f"base{e}"]), 0.0)
                ps[(drv, e)].append(chi2.sf(lrt, 1))
    for (drv, e), p in ps.items():
        counts = ", ".join(f"< {a}: {sum(x < a for x in p)}" for a in (0.05, 0.025, 0.01))
        print(f"    {drv}{e}: asymptotic p {counts} of {len(p)}")


def steps(root, pots, truth):
    for seed, d in runs(root, pots, truth):
        s = json.loads((d / "summary.json").read_text())
        for st in s["calibration"]["steps"]:
            b, again = st["bootstrap"], st["tests_under_correlation"]
            if not b and not again and not st["lrt_under_correlation"]:
                continue
            tests = ", ".join(f"{t['driver']} p {t['p_value']:.4f} ({t['df']:.1f} df)" for t in st["tests"])
            line = f"    seed {seed}: {st['model']}: {tests}"
            if b:
                line += f"; bootstrap under {b['null']} p {b['p_value']:.3f} (asymptotic {b['p_asymptotic']:.4f}, {b['replicates']} replicates)"
            if again:
                line += "; again under correlation " + ", ".join(f"p {t['p_value']:.4f}" for t in again)
            if st["lrt_under_correlation"]:
                lrt = st["lrt_under_correlation"]
                line += f"; LRT under {lrt['null']} p {lrt['p_value']:.3f}"
            if st["set_aside"]:
                line += f"; set aside {st['set_aside']}"
            print(line)


def main(root, pots):
    for truth in TRUTHS:
        tally(root, pots, truth)
        asymptotic(root, pots, truth)
        steps(root, pots, truth)


if __name__ == "__main__":
    main(sys.argv[1], sys.argv[2] if len(sys.argv) > 2 else "150")
