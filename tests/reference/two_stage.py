"""Reference values for the second stage of the repeated-scorings analysis
(src/model/two_stage.rs): per-interval effects combined with inverse-variance
weights, and the test of a constant effect against one effect per interval.

The fixed-effect combination and Cochran's Q come from statsmodels'
`statsmodels.stats.meta_analysis.combine_effects` (a general-purpose library);
the p-value of Q on K - 1 degrees of freedom from scipy.

Regenerate: `python3 -m venv .venv && .venv/bin/pip install numpy scipy statsmodels`,
then `.venv/bin/python tests/reference/two_stage.py`.
"""
import json
import os

import numpy as np
from scipy import stats
from statsmodels.stats.meta_analysis import combine_effects

# Invented per-interval effects of a cold-hours driver on growth (cm per
# cold hour) and their standard errors: two calm intervals, three cold ones.
CASES = {
    "changing": {
        "estimate": [0.012, -0.004, -0.151, -0.188, -0.097],
        "se": [0.050, 0.061, 0.034, 0.041, 0.029],
    },
    "constant": {
        "estimate": [-0.11, -0.09, -0.102, -0.125],
        "se": [0.02, 0.025, 0.018, 0.03],
    },
}

out = {}
for name, c in CASES.items():
    b = np.array(c["estimate"])
    se = np.array(c["se"])
    r = combine_effects(b, se**2, method_re="chi2")
    k = len(b)
    q = float(r.q)
    out[name] = {
        "estimate": c["estimate"],
        "se": c["se"],
        "pooled": float(r.mean_effect_fe),
        "pooled_se": float(r.sd_eff_w_fe),
        "q": q,
        "df": k - 1,
        "p": float(stats.chi2.sf(q, k - 1)),
        "ci_low": float(r.mean_effect_fe - stats.norm.ppf(0.975) * r.sd_eff_w_fe),
        "ci_high": float(r.mean_effect_fe + stats.norm.ppf(0.975) * r.sd_eff_w_fe),
    }

here = os.path.dirname(os.path.abspath(__file__))
with open(os.path.join(here, "fixtures", "two_stage.json"), "w") as f:
    json.dump(out, f, indent=2)
    f.write("\n")
print(json.dumps(out, indent=2))
