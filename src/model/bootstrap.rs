//! The parametric bootstrap of a likelihood-ratio test of fixed effects
//! under a correlated residual: the null distribution of
//! `LRT = 2 (l_alt - l_null)` simulated from the fitted null model instead
//! of the asymptotic chi-square, which is anti-conservative with estimated
//! covariance parameters and a few hundred pots (Kenward & Roger 1997,
//! *Biometrics* 53: 983; the bootstrap of the LRT: Davison & Hinkley 1997,
//! *Bootstrap Methods and their Application*, §4.2).
//!
//! Each replicate draws `y* = X0 beta0 + sigma0 L0 z`, `z ~ N(0, I)` (the
//! null's ML estimates, `L0 L0' = V0`), refits the null by ML with the same
//! error model, its search started from the null's covariance parameters
//! (the draws are the null's own, so its optimum is near), then the
//! alternative, started from the null refit's optimum (the nested model's
//! maximum is the natural start of the larger one), and keeps
//! `LRT* = 2 (l*_alt - l*_null)`, floored at 0. Only the two maxima are
//! needed, so a refit is the search alone (no estimates, tests or
//! residuals), and its Newton steps stop at a decrement of
//! [`REFIT_DECREMENT`] (1e-5: the maximum is then short by about half that,
//! the statistic by at most about 1e-5), not the 1e-10 of a reported fit;
//! on a demo-sized study that saves about a quarter of the factorisations.
//! A replicate within [`TIE`] of the observed statistic counts as reaching
//! it (conservative: such near-ties raise p).
//!
//! Sequential stopping (Besag & Clifford 1991, *Biometrika* 78: 301): the
//! replicates are taken in their seeded order and the test stops at the
//! first `l` where `h` of them reach the observed statistic, with the
//! p-value `h / l`; a test that runs to the end has
//! `(1 + #{LRT* >= LRT}) / (B + 1)` (Davison & Hinkley 1997, eq. 4.11). Both
//! are valid p-values. `h` is the smallest count whose early p-value `h / l`
//! (`l <= B`) cannot fall below the decision's level `alpha`:
//! `h = ceil(alpha B)`; so a test stopped early is set aside exactly when the
//! fixed-`B` test would be (it would have counted at least `h` exceedances,
//! `p >= (1 + h) / (B + 1) >= alpha`), and the decision never depends on
//! the stopping. A stopped test saves the replicates after `l`: about
//! `B - h / p` of them for a true p-value `p`. Monte Carlo standard error
//! `sqrt(p (1 - p) / l)`.
//!
//! Seeded (ChaCha20, one stream per replicate; the stopping rule reads the
//! replicates in their order, so the result does not depend on the number
//! of threads); replicates are spread over all cores, each fit
//! single-threaded inside. A replicate whose refit fails is counted as
//! failed and left out (the count is reported). Cost: at most `2 B`
//! correlated ML searches warm-started (a few dozen factorisations each).

use super::error::{ModelError, Result};
use super::gls::{Errors, Fit, fit_independent};
use crate::model::design::Design;
use crate::spatial::ascent::maximise_from;
use crate::spatial::likelihood::{CovParams, Distances, LikelihoodKind, SearchOptions, cholesky};
use rand::SeedableRng;
use rand_distr::{Distribution, StandardNormal};
use serde::Serialize;

/// The Newton decrement at which a bootstrap refit stops (module doc).
pub const REFIT_DECREMENT: f64 = 1e-5;

/// A replicate's statistic this close below the observed one counts as
/// reaching it: twice the refits' tolerance ([`REFIT_DECREMENT`]).
pub const TIE: f64 = 2.0 * REFIT_DECREMENT;

/// The bootstrap of one likelihood-ratio test.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct BootstrapLrt {
    /// The null model's name.
    pub null: String,
    /// The alternative's name.
    pub alternative: String,
    /// The observed statistic `2 (l_alt - l_null)`.
    pub statistic: f64,
    /// The asymptotic chi-square p-value (df = added columns).
    pub p_asymptotic: f64,
    /// Replicates asked for (`B`).
    pub requested: usize,
    /// Replicates kept (`l`; fewer than `B` when the test stopped early).
    pub replicates: usize,
    /// Replicates whose refit failed (left out).
    pub failed: usize,
    /// Kept replicates at or above the observed statistic.
    pub exceedances: usize,
    /// The test stopped at its `exceedances`-th exceedance (Besag &
    /// Clifford 1991): `p = exceedances / replicates`.
    pub stopped_early: bool,
    /// `h / l` when stopped early, else `(1 + #{LRT* >= LRT}) / (l + 1)`.
    pub p_value: f64,
    /// Monte Carlo standard error of `p_value`, `sqrt(p (1 - p) / l)`.
    pub p_mc_se: f64,
    /// Dense factorisations of `V` made by the refits (all workers).
    pub factorisations: usize,
    /// The seed.
    pub seed: u64,
    /// Wall-clock seconds.
    pub seconds: f64,
}

impl BootstrapLrt {
    /// The replicates in words: "99 replicates", or "34 of 99 replicates,
    /// stopped at the 5th reaching the observed statistic".
    pub fn replicates_said(&self) -> String {
        if self.stopped_early {
            format!(
                "{} of {} replicates, stopped at the {} reaching the observed statistic",
                self.replicates,
                self.requested,
                ordinal(self.exceedances)
            )
        } else {
            format!("{} replicates", self.replicates)
        }
    }
}

/// `1st`, `2nd`, `3rd`, `4th`, ... `11th`, `21st`.
fn ordinal(k: usize) -> String {
    let suffix = match (k % 10, k % 100) {
        (_, 11..=13) => "th",
        (1, _) => "st",
        (2, _) => "nd",
        (3, _) => "rd",
        _ => "th",
    };
    format!("{k}{suffix}")
}

/// Bootstrap the LRT of `alt_design` against `null_design` (its columns a
/// subset) with the error model of `null_fit` (an ML fit of `null_design`),
/// observed statistic `statistic`, at most `replicates` draws seeded by
/// `seed`, stopping early at the decision level `alpha` (module doc; `None`
/// runs every replicate).
#[allow(clippy::too_many_arguments)]
pub fn bootstrap_lrt(
    names: (&str, &str),
    null_design: &Design,
    alt_design: &Design,
    null_fit: &Fit,
    dist: &Distances,
    statistic: f64,
    p_asymptotic: f64,
    replicates: usize,
    seed: u64,
    alpha: Option<f64>,
) -> Result<BootstrapLrt> {
    let t0 = std::time::Instant::now();
    let n = null_fit.n;
    if null_fit.method != LikelihoodKind::Ml {
        return Err(ModelError::Comparison("the bootstrap simulates from an ML fit of the null".into()));
    }
    null_fit.isotropic_or_refuse("the parametric bootstrap").map_err(ModelError::Comparison)?;
    let lerr = |e| ModelError::Likelihood { model: names.0.to_string(), source: e, hint: None };
    let chol = match null_fit.covariance {
        Some(c) => Some(cholesky(dist, &c.params).map_err(lerr)?),
        None => None,
    };
    let sd = null_fit.sigma2.sqrt();
    let one = |b: usize| -> Option<f64> {
        let mut rng =
            rand_chacha::ChaCha20Rng::seed_from_u64(seed ^ (0x2545_f491_u64.wrapping_mul(b as u64 + 1)));
        let z: Vec<f64> = (0..n).map(|_| StandardNormal.sample(&mut rng)).collect();
        let e: Vec<f64> = match &chol {
            Some(l) => (0..n).map(|i| (0..=i).map(|k| l[(i, k)] * z[k]).sum::<f64>() * sd).collect(),
            None => z.iter().map(|v| v * sd).collect(),
        };
        let y: Vec<f64> = (0..n).map(|i| null_fit.fitted[i] + e[i]).collect();
        // the maximised ML log-likelihood and its covariance parameters
        let refit = |d: &Design, start: Option<CovParams>| -> Option<(f64, Option<CovParams>)> {
            match (null_fit.errors, start) {
                (Errors::Independent, _) => {
                    fit_independent(d, &y, LikelihoodKind::Ml).ok().map(|f| (f.loglik, None))
                }
                (Errors::Correlated { nugget, .. }, Some(start)) => {
                    let opts =
                        SearchOptions { nugget, decrement_tol: REFIT_DECREMENT, ..SearchOptions::default() };
                    let m = maximise_from(dist, start, &d.x, &y, LikelihoodKind::Ml, &opts).ok()?;
                    Some((m.best.loglik, Some(m.best.params)))
                }
                _ => None,
            }
        };
        let (l0, at0) = refit(null_design, null_fit.covariance.map(|c| c.params))?;
        let (l1, _) = refit(alt_design, at0)?;
        let s = 2.0 * (l1 - l0);
        s.is_finite().then_some(s.max(0.0))
    };
    let exceeds = |s: f64| s >= statistic - TIE;
    // Besag & Clifford's h (module doc); past the end when not stopping.
    let h = alpha.map_or(usize::MAX, |a| ((a * replicates as f64).ceil() as usize).max(1));
    let threads = std::thread::available_parallelism().map(|t| t.get()).unwrap_or(1).min(replicates.max(1));
    let next = std::sync::atomic::AtomicUsize::new(0);
    // The replicates done so far in their order, and where the sequential
    // rule stopped (the workers stop taking new replicates past it).
    let done = std::sync::Mutex::new(Sequential::new(replicates, h));
    let factorisations = std::sync::atomic::AtomicUsize::new(0);
    std::thread::scope(|s| {
        for _ in 0..threads {
            s.spawn(|| {
                crate::spatial::factor::sequential(|| {
                    let f0 = crate::spatial::factor::factorisations_on_this_thread();
                    loop {
                        let b = next.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
                        if b >= replicates || done.lock().expect("bootstrap state").stopped_before(b) {
                            break;
                        }
                        let v = one(b);
                        done.lock().expect("bootstrap state").record(b, v.map(exceeds), v);
                    }
                    let used = crate::spatial::factor::factorisations_on_this_thread() - f0;
                    factorisations.fetch_add(used as usize, std::sync::atomic::Ordering::Relaxed);
                })
            });
        }
    });
    let done = done.into_inner().expect("bootstrap state");
    let stats = done.prefix();
    let kept: Vec<f64> = stats.iter().flatten().copied().collect();
    let b = kept.len();
    if b == 0 {
        return Err(ModelError::Comparison(format!(
            "the bootstrap of `{}` against `{}`: every refit failed",
            names.1, names.0
        )));
    }
    let exceed = kept.iter().filter(|&&s| exceeds(s)).count();
    let stopped_early = done.stop.is_some();
    let p = if stopped_early { exceed as f64 / b as f64 } else { (1 + exceed) as f64 / (b + 1) as f64 };
    Ok(BootstrapLrt {
        null: names.0.to_string(),
        alternative: names.1.to_string(),
        statistic,
        p_asymptotic,
        requested: replicates,
        replicates: b,
        failed: stats.len() - b,
        exceedances: exceed,
        stopped_early,
        p_value: p,
        p_mc_se: (p * (1.0 - p) / b as f64).sqrt(),
        factorisations: factorisations.into_inner(),
        seed,
        seconds: t0.elapsed().as_secs_f64(),
    })
}

/// The replicates of a sequential test as they come in from the workers (in
/// any order), and the first replicate index at which `h` kept replicates
/// of the prefix reached the observed statistic.
struct Sequential {
    results: Vec<Option<Option<f64>>>,
    exceeded: Vec<Option<bool>>,
    /// The prefix `0..filled` is complete; `count` exceedances in it.
    filled: usize,
    count: usize,
    h: usize,
    /// The test stops after this replicate index.
    stop: Option<usize>,
}

impl Sequential {
    fn new(replicates: usize, h: usize) -> Self {
        Sequential {
            results: vec![None; replicates],
            exceeded: vec![None; replicates],
            filled: 0,
            count: 0,
            h,
            stop: None,
        }
    }

    /// Whether replicate `b` lies past the stop (not needed).
    fn stopped_before(&self, b: usize) -> bool {
        self.stop.is_some_and(|s| b > s)
    }

    /// Replicate `b`'s statistic (`None`: its refit failed) and whether it
    /// reached the observed one.
    fn record(&mut self, b: usize, exceeds: Option<bool>, value: Option<f64>) {
        self.results[b] = Some(value);
        self.exceeded[b] = Some(exceeds.unwrap_or(false));
        while self.stop.is_none() && self.filled < self.results.len() {
            let Some(e) = self.exceeded[self.filled] else { break };
            self.count += usize::from(e);
            if self.count >= self.h {
                self.stop = Some(self.filled);
            }
            self.filled += 1;
        }
    }

    /// The statistics of the replicates the test used, in order (`None`:
    /// failed): up to the stop, else all.
    fn prefix(&self) -> Vec<Option<f64>> {
        let end = self.stop.map_or(self.results.len(), |s| s + 1);
        self.results[..end].iter().map(|r| r.expect("every replicate of the prefix was run")).collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::design::DesignSpec;
    use crate::model::gls::{LikelihoodPath, fit_correlated};
    use crate::model::testdata::model_data;
    use crate::spatial::correlation::Family;
    use statrs::distribution::{ChiSquared, ContinuousCDF};

    /// The committed small_sample data and its designs without and with the
    /// driver `draught` (line as factor).
    fn small_sample_pair() -> (crate::model::data::ModelData, Design, Design) {
        let data = model_data("small_sample.csv", "trait", &["line"], &["draught"], Some(("x", "y")), &[]);
        let spec =
            |d: Vec<String>| DesignSpec { factors: vec!["line".into()], drivers: d, ..Default::default() };
        let d0 = Design::build(&data, &spec(vec![])).unwrap();
        let d1 = Design::build(&data, &spec(vec!["draught".into()])).unwrap();
        (data, d0, d1)
    }

    /// Under independent errors the LRT of one added column has an exact
    /// distribution: `n ln(1 + F/(n - p1))` with `F ~ F(1, n - p1)`. The
    /// bootstrap p-value of the observed statistic on the committed
    /// small_sample data must agree with that exact p-value (statrs) within
    /// 3 Monte Carlo SEs, and the same seed gives the same answer.
    #[test]
    fn bootstrap_p_agrees_with_the_exact_independent_lrt() {
        let (data, d0, d1) = small_sample_pair();
        let f0 = fit_independent(&d0, &data.response, LikelihoodKind::Ml).unwrap();
        let f1 = fit_independent(&d1, &data.response, LikelihoodKind::Ml).unwrap();
        let stat = 2.0 * (f1.loglik - f0.loglik);
        let dist = Distances::from_coords(&data.x, &data.y).unwrap();
        let p_chi = 1.0 - ChiSquared::new(1.0).unwrap().cdf(stat);
        let b = bootstrap_lrt(("n", "a"), &d0, &d1, &f0, &dist, stat, p_chi, 400, 11, None).unwrap();
        let n = data.response.len() as f64;
        let df2 = n - d1.p() as f64;
        let fstat = ((stat / n).exp() - 1.0) * df2;
        let exact = crate::model::ols::f_p(fstat, 1.0, df2);
        assert!((b.p_value - exact).abs() < 3.0 * b.p_mc_se + 1.0 / 401.0, "{b:?} exact {exact}");
        let again = bootstrap_lrt(("n", "a"), &d0, &d1, &f0, &dist, stat, p_chi, 400, 11, None).unwrap();
        assert_eq!(b.p_value, again.p_value);
    }

    /// With a correlated null the bootstrap runs, keeps its replicates and
    /// reports a p-value in (0, 1] with its Monte Carlo SE.
    #[test]
    fn bootstrap_runs_under_a_correlated_null() {
        let (data, d0, d1) = small_sample_pair();
        let dist = Distances::from_coords(&data.x, &data.y).unwrap();
        let fit = |d: &Design| {
            fit_correlated(
                "m",
                d,
                &data.response,
                &dist,
                &data.pots,
                Family::Exponential,
                true,
                LikelihoodKind::Ml,
                &LikelihoodPath::exact(),
            )
            .unwrap()
        };
        let (f0, f1) = (fit(&d0), fit(&d1));
        let stat = 2.0 * (f1.loglik - f0.loglik);
        let b = bootstrap_lrt(("n", "a"), &d0, &d1, &f0, &dist, stat, 0.5, 19, 3, None).unwrap();
        assert_eq!(b.replicates + b.failed, 19);
        assert!(b.p_value > 0.0 && b.p_value <= 1.0 && b.p_mc_se > 0.0, "{b:?}");
    }

    /// The sequential rule reads the replicates in their order whatever
    /// order the workers finish them in: with `h = 2` and exceedances at
    /// replicates 1, 4 and 5, it stops after replicate 4, and the failed
    /// replicate 2 stays in the prefix (counted as failed, not exceeding).
    #[test]
    fn sequential_rule_stops_in_replicate_order() {
        let mut q = Sequential::new(8, 2);
        let v = |e: bool| Some(if e { 9.0 } else { 0.1 });
        for b in [5, 4, 0, 7] {
            let e = b == 4 || b == 5;
            q.record(b, Some(e), v(e));
        }
        assert_eq!(q.stop, None, "replicates 1 to 3 are not in yet");
        q.record(1, Some(true), v(true));
        assert_eq!(q.stop, None, "one exceedance in the prefix 0..=1");
        q.record(3, Some(false), v(false));
        q.record(2, None, None);
        assert_eq!(q.stop, Some(4));
        assert!(q.stopped_before(5) && !q.stopped_before(4));
        assert_eq!(q.prefix(), vec![v(false), v(true), None, v(false), v(true)]);
        // without a stop every replicate is used
        let mut all = Sequential::new(3, usize::MAX);
        for b in 0..3 {
            all.record(b, Some(true), v(true));
        }
        assert_eq!((all.stop, all.prefix().len()), (None, 3));
    }

    /// Early stopping never changes the decision at the level it is given
    /// (small_sample data, independent errors, where the LRT's exact
    /// p-value is known): a clearly non-significant statistic stops at the
    /// `ceil(0.05 B)`-th exceedance with p at least 0.05 (Besag & Clifford's
    /// `h / l`, within Monte Carlo error of the exact p-value) as the
    /// fixed-B test's p is; a significant one runs every replicate and
    /// equals the fixed-B test.
    #[test]
    fn early_stopping_keeps_the_decision() {
        let (data, d0, d1) = small_sample_pair();
        let f0 = fit_independent(&d0, &data.response, LikelihoodKind::Ml).unwrap();
        let dist = Distances::from_coords(&data.x, &data.y).unwrap();
        let n = data.response.len() as f64;
        let df2 = n - d1.p() as f64;
        let exact = |stat: f64| crate::model::ols::f_p(((stat / n).exp() - 1.0) * df2, 1.0, df2);
        let run = |stat: f64, alpha| {
            bootstrap_lrt(("n", "a"), &d0, &d1, &f0, &dist, stat, 0.5, 200, 5, alpha).unwrap()
        };
        // p about 0.45: stops at the 10th exceedance, after about 22 replicates
        let (seq, fixed) = (run(0.6, Some(0.05)), run(0.6, None));
        assert!(seq.stopped_early && seq.exceedances == 10 && seq.replicates < 60, "{seq:?}");
        assert_eq!(seq.p_value, 10.0 / seq.replicates as f64);
        assert!(seq.p_value >= 0.05 && fixed.p_value >= 0.05 && !fixed.stopped_early);
        assert!((seq.p_value - exact(0.6)).abs() < 3.0 * seq.p_mc_se, "{seq:?} exact {}", exact(0.6));
        assert!(seq.replicates_said().contains("stopped at the 10th"), "{}", seq.replicates_said());
        // p about 0.005: every replicate runs, the same numbers
        let (seq, fixed) = (run(7.0, Some(0.05)), run(7.0, None));
        assert!(!seq.stopped_early && seq.replicates == 200 && seq.p_value < 0.05, "{seq:?}");
        assert_eq!(seq, BootstrapLrt { seconds: seq.seconds, factorisations: seq.factorisations, ..fixed });
        assert_eq!(ordinal(1) + &ordinal(2) + &ordinal(3) + &ordinal(11) + &ordinal(22), "1st2nd3rd11th22nd");
    }
}
