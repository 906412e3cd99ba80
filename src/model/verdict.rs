//! The verdict stage: the comparison grid of ML fits (base design; base plus
//! each driver; base plus all climate drivers; each with independent errors and with
//! every declared correlation family, with and without nugget), the verdict
//! word and its reason ([`compare::decide`]), the REML refit of the chosen
//! model with its residual check (Moran's I and the residual variogram), the
//! driver ranking, the openings question (measured climate against plain
//! distance) and the adjusted means. The rules are stated in `docs/verdict.md`.
//!
//! [`run_verdict`] reads the study; [`analyse`] works on loaded
//! [`ModelData`] so that it can be tested on data with known truth.

use super::compare::{self, Candidate, LrtNull, Ranked, Shape, Verdict};
use super::data::{ModelData, ModelSpec, load_model_data};
use super::design::{Design, DesignSpec, TermKind};
use super::diagnostics::{knn, moran_residuals};
use super::error::{ModelError, Result};
use super::gls::{Errors, Fit, fit_correlated, fit_independent};
use super::imputation::{BURN_IN, Conditioning, Imputer, THIN, TraitParams};
use super::ols::least_squares;
use super::stage::MORAN_NEIGHBOURS;
use crate::io::output::StageWriter;
use crate::io::study::Study;
use crate::spatial::geometry::Points;
use crate::spatial::likelihood::{Distances, Method};
use crate::spatial::variogram::{Bins, Estimator, VariogramModel, experimental};
use serde::{Deserialize, Serialize};
use statrs::distribution::{ContinuousCDF, StudentsT};
use std::fmt::Write as _;
use std::path::PathBuf;
use std::time::Instant;

/// Prefix of the distance covariates written by the mapping stage.
pub const DISTANCE_PREFIX: &str = "distance_";

/// Significance level of the confounding and residual-structure rules
/// (common practice: 5 %).
pub const ALPHA: f64 = 0.05;

#[derive(Deserialize)]
struct Doc {
    verdict: Option<VerdictSection>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct VerdictSection {
    tie_delta: Option<f64>,
    draws: Option<usize>,
}

/// Options of the verdict stage (`[verdict]` of the study file).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct VerdictOptions {
    /// Tie margin in AIC units (`tie_delta`, default 4).
    pub tie_delta: f64,
    /// Conditional simulations per mapped driver (`draws`, default 20, at least 2).
    pub draws: usize,
    /// Seed of every random step (`[study] seed`).
    pub seed: u64,
}

impl Default for VerdictOptions {
    fn default() -> Self {
        VerdictOptions { tie_delta: compare::DEFAULT_TIE_DELTA, draws: 20, seed: 1 }
    }
}

impl VerdictOptions {
    /// Read and validate `[verdict]` (every key optional; unknown keys refused
    /// with their line and column).
    pub fn from_study(study: &Study) -> Result<VerdictOptions> {
        let doc: Doc = study.section()?;
        let mut o = VerdictOptions { seed: study.seed(), ..VerdictOptions::default() };
        if let Some(v) = doc.verdict {
            if let Some(t) = v.tie_delta {
                if !(t.is_finite() && t >= 0.0) {
                    return Err(study
                        .invalid(
                            "verdict.tie_delta",
                            format!("tie_delta must be a number >= 0, got {t}"),
                            Some("the default is 4 AIC units".into()),
                        )
                        .into());
                }
                o.tie_delta = t;
            }
            if let Some(d) = v.draws {
                if d < 2 {
                    return Err(study
                        .invalid(
                            "verdict.draws",
                            format!("draws must be at least 2, got {d}"),
                            Some("Rubin's rules need two or more draws; the default is 20".into()),
                        )
                        .into());
                }
                o.draws = d;
            }
        }
        Ok(o)
    }
}

/// One ML fit of the grid.
#[derive(Clone, Debug, Serialize)]
pub struct ModelRow {
    /// Model name: `base`, `base+<driver>...`, then ` | <errors>` for correlated errors.
    pub name: String,
    /// Drivers in the fixed part.
    pub drivers: Vec<String>,
    /// `none` or the family name.
    pub correlation: String,
    /// Whether a nugget share was estimated.
    pub nugget: bool,
    /// ML log-likelihood.
    pub loglik: f64,
    /// AIC.
    pub aic: f64,
    /// BIC.
    pub bic: f64,
    /// Estimated parameters.
    pub n_params: usize,
    /// AIC minus the smallest AIC.
    pub delta_aic: f64,
    /// Akaike weight.
    pub akaike_weight: f64,
    /// Range (metres) of correlated fits.
    pub range: Option<f64>,
    /// Nugget share of correlated fits.
    pub nugget_share: Option<f64>,
    /// The search converged (always for independent errors).
    pub converged: bool,
}

/// A likelihood-ratio test of a nested pair.
#[derive(Clone, Debug, Serialize)]
pub struct LrtRow {
    /// The smaller model.
    pub null: String,
    /// The larger model.
    pub alternative: String,
    /// `2 (l1 - l0)`.
    pub statistic: f64,
    /// Reference distribution in words (e.g. `chi2(1)`, `0.5 chi2(0) + 0.5 chi2(1)`).
    pub distribution: String,
    /// p-value.
    pub p_value: f64,
    /// Marked approximate (independent versus correlated errors, docs/verdict.md).
    pub approximate: bool,
}

/// A coefficient of the chosen model (REML refit).
#[derive(Clone, Debug, Serialize)]
pub struct CoefRow {
    /// Column name.
    pub term: String,
    /// Estimate.
    pub estimate: f64,
    /// Standard error.
    pub se: f64,
    /// Two-sided p-value.
    pub p_value: f64,
}

/// Moran's I of the chosen model's normalised residuals.
#[derive(Clone, Debug, Serialize)]
pub struct MoranSummary {
    /// Neighbours per pot.
    pub k: usize,
    /// I.
    pub i: f64,
    /// E\[I\].
    pub expected: f64,
    /// Var\[I\].
    pub variance: f64,
    /// z.
    pub z: f64,
    /// Two-sided p.
    pub p_value: f64,
}

/// One bin of the residual variogram (normalised residuals: semivariance 1 when no structure is left).
#[derive(Clone, Debug, Serialize)]
pub struct ResidualBin {
    /// Mean pair distance, metres.
    pub lag: f64,
    /// Semivariance (dimensionless).
    pub semivariance: f64,
    /// Pairs.
    pub pairs: usize,
}

/// The residual check of the chosen model.
#[derive(Clone, Debug, Serialize)]
pub struct ResidualCheck {
    /// Moran's I, when defined.
    pub moran: Option<MoranSummary>,
    /// Experimental variogram of the normalised residuals (Matheron estimator).
    pub variogram: Vec<ResidualBin>,
    /// Structure is left: Moran's p < 0.05.
    pub structure_left: bool,
    /// The check in one sentence.
    pub statement: String,
}

/// One row of the driver ranking.
#[derive(Clone, Debug, Serialize)]
pub struct DriverSummary {
    /// Driver name.
    pub name: String,
    /// `climate` or `distance`.
    pub kind: String,
    /// The model the estimate comes from.
    pub source_model: String,
    /// Effect per unit of the driver (trait units per driver unit).
    pub estimate: f64,
    /// Effect per standard deviation of the driver over the pots.
    pub estimate_per_sd: f64,
    /// Standard deviation of the driver over the pots.
    pub driver_sd: f64,
    /// Plug-in SE.
    pub se: f64,
    /// Estimate pooled over imputations of the mapped driver (Rubin's rules);
    /// `None` when not computed.
    pub estimate_with_mapping_uncertainty: Option<f64>,
    /// SE with the mapped driver's uncertainty (Rubin's rules); `None` when not computed.
    pub se_with_mapping_uncertainty: Option<f64>,
    /// 95 % CI lower end of the pooled estimate (t on Rubin's df).
    pub ci_low_with_mapping_uncertainty: Option<f64>,
    /// 95 % CI upper end of the pooled estimate.
    pub ci_high_with_mapping_uncertainty: Option<f64>,
    /// 95 % CI lower end (t on n - p df).
    pub ci_low: f64,
    /// 95 % CI upper end.
    pub ci_high: f64,
    /// Two-sided p.
    pub p_value: f64,
    /// AIC(base) - AIC(base + driver), independent errors (positive: the driver helps).
    pub delta_aic: f64,
    /// The same with the best correlation of the base model in both.
    pub delta_aic_with_correlation: Option<f64>,
    /// p of the driver with independent errors (ML fit of base + driver).
    pub p_independent: f64,
    /// p of the driver with the best correlation (ML fit), when fitted.
    pub p_with_correlation: Option<f64>,
    /// Variance inflation against the other drivers, `1/(1 - R²)`; `None` with one driver.
    pub vif: Option<f64>,
    /// Effect vanishes once correlation is modelled (rule in docs/verdict.md).
    pub confounded: bool,
}

/// Measured climate against plain distance to the openings.
#[derive(Clone, Debug, Serialize)]
pub struct OpeningsSummary {
    /// Best climate driver alone (independent errors) by AIC.
    pub best_climate: Option<String>,
    /// Best distance driver alone by AIC.
    pub best_distance: Option<String>,
    /// AIC(best distance) - AIC(best climate): positive, climate explains better.
    pub aic_difference: Option<f64>,
    /// The answer in one sentence.
    pub statement: String,
}

/// An adjusted mean of one level (or level combination).
#[derive(Clone, Debug, Serialize)]
pub struct AdjustedMeanRow {
    /// Factor or factors joined by `:`.
    pub factor: String,
    /// Level or levels joined by `:`.
    pub level: String,
    /// Mean under the chosen model at the drivers' means.
    pub mean: f64,
    /// Its SE, `sqrt(L' Cov(beta) L)`.
    pub se: f64,
    /// The same under the plain factorial model (independent errors, no drivers).
    pub plain_mean: f64,
    /// SE of the plain mean.
    pub plain_se: f64,
    /// `mean - plain_mean`.
    pub change: f64,
}

/// Everything the verdict stage computed.
#[derive(Clone, Debug, Serialize)]
pub struct VerdictResult {
    /// `covariate`, `correlation`, `both` or `none`.
    pub verdict: String,
    /// One sentence.
    pub reason: String,
    /// The model the verdict rests on.
    pub best_model: String,
    /// The smallest AIC.
    pub best_by_aic: String,
    /// Options used.
    pub options: VerdictOptions,
    /// Trait name.
    pub trait_name: String,
    /// Pots analysed.
    pub n_pots: usize,
    /// The grid, sorted by AIC.
    pub models: Vec<ModelRow>,
    /// Likelihood-ratio tests of nested pairs.
    pub lrts: Vec<LrtRow>,
    /// Coefficients of the chosen model refitted by REML.
    pub chosen_coefficients: Vec<CoefRow>,
    /// Residual check of the chosen model.
    pub residual_check: ResidualCheck,
    /// Driver ranking.
    pub drivers: Vec<DriverSummary>,
    /// Climate against distance, when both kinds are declared.
    pub openings: Option<OpeningsSummary>,
    /// Adjusted means.
    pub adjusted_means: Vec<AdjustedMeanRow>,
    /// Notes (skipped fits, mapping uncertainty not computed, ...).
    pub notes: Vec<String>,
    /// Fits made.
    pub n_fits: usize,
    /// Wall-clock time of the grid and refits, seconds.
    pub seconds: f64,
    /// Pot ids, x, y (for the report's residual maps).
    #[serde(skip)]
    pub positions: Vec<(String, f64, f64)>,
    /// Raw residuals of the plain factorial model.
    #[serde(skip)]
    pub plain_residuals: Vec<f64>,
    /// Raw residuals of the chosen model (REML).
    #[serde(skip)]
    pub chosen_residuals: Vec<f64>,
    /// Moran's I of the plain factorial model's residuals.
    #[serde(skip)]
    pub plain_moran: Option<MoranSummary>,
    /// Drivers and errors of the chosen model.
    #[serde(skip)]
    pub chosen_shape: (Vec<String>, Errors),
}

fn lerr(model: &str, e: crate::spatial::likelihood::LikelihoodError) -> ModelError {
    ModelError::Likelihood { model: model.into(), source: e, hint: None }
}

/// Name of a grid model.
pub fn model_name(drivers: &[String], errors: &Errors) -> String {
    let mut s = String::from("base");
    for d in drivers {
        s.push('+');
        s.push_str(d);
    }
    if !matches!(errors, Errors::Independent) {
        s.push_str(" | ");
        s.push_str(&errors.label());
    }
    s
}

fn design_for(data: &ModelData, spec: &ModelSpec, drivers: &[String]) -> Result<Design> {
    Design::build(
        data,
        &DesignSpec {
            blocks: spec.blocks.clone(),
            factors: spec.factors.clone(),
            interactions: spec.interactions.clone(),
            drivers: drivers.to_vec(),
        },
    )
}

fn fit(design: &Design, data: &ModelData, dist: &Distances, errors: Errors, method: Method) -> Result<Fit> {
    match errors {
        Errors::Independent => fit_independent(design, &data.response, method),
        Errors::Correlated { family, nugget } => fit_correlated(
            &model_name(&design.drivers, &errors),
            design,
            &data.response,
            dist,
            &data.pots,
            family,
            nugget,
            method,
        ),
    }
}

struct GridFit {
    drivers: Vec<String>,
    errors: Errors,
    fit: Fit,
}

fn mean_sd(v: &[f64]) -> (f64, f64) {
    let n = v.len() as f64;
    let m = v.iter().sum::<f64>() / n;
    let var = v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (n - 1.0).max(1.0);
    (m, var.sqrt())
}

fn t_quantile(df: f64) -> f64 {
    StudentsT::new(0.0, 1.0, df.max(1.0)).map(|t| t.inverse_cdf(0.975)).unwrap_or(1.959964)
}

/// Load the study's `[model]` and `[verdict]` data and run the verdict.
pub fn run_verdict(study: &Study, opts: &VerdictOptions) -> Result<VerdictResult> {
    let mut spec = ModelSpec::from_study(study)?;
    let mut data = load_model_data(study, &spec)?;
    let added = crate::model::data::add_opening_drivers(study, &mut spec, &mut data);
    let mut r = analyse(&data, &spec, opts)?;
    if !added.is_empty() {
        r.notes.push(format!(
            "{} added as candidate driver(s): every [[openings]] entry is compared as the plain distance from each pot to the opening",
            added.iter().map(|a| format!("`{a}`")).collect::<Vec<_>>().join(", ")
        ));
    }
    let climate: Vec<String> =
        r.chosen_shape.0.iter().filter(|d| !d.starts_with(DISTANCE_PREFIX)).cloned().collect();
    if climate.is_empty() {
        return Ok(r);
    }
    let sensor_values = load_sensor_values(study, &climate)?;
    let start = Instant::now();
    for d in &climate {
        let Some(sv) = sensor_values.iter().find(|s| &s.name == d) else {
            r.notes.push(format!(
                "`{d}`: no sensor-level values in {SENSOR_FILE} (or no [sensors] table), so the uncertainty of the mapped driver is not propagated; its SE treats the mapped values as known"
            ));
            continue;
        };
        let m = mapping_uncertainty(&data, &spec, &r.chosen_shape, sv, opts)?;
        if let Some(row) = r.drivers.iter_mut().find(|x| &x.name == d) {
            row.estimate_with_mapping_uncertainty = Some(m.pooled.estimate);
            row.se_with_mapping_uncertainty = Some(m.pooled.se);
            row.ci_low_with_mapping_uncertainty = Some(m.ci.0);
            row.ci_high_with_mapping_uncertainty = Some(m.ci.1);
        }
        r.notes.push(m.note);
    }
    r.seconds += start.elapsed().as_secs_f64();
    Ok(r)
}

/// The sensor-level indicator file written by the climate stage, inside the output folder.
pub const SENSOR_FILE: &str = "sensor_indicators.csv";

/// Sensor-level values of one mapped indicator.
#[derive(Clone, Debug)]
pub struct SensorValues {
    /// Indicator name.
    pub name: String,
    /// Sensor positions and ids.
    pub points: Points,
    /// Indicator value per sensor.
    pub values: Vec<f64>,
}

/// Read `<output>/sensor_indicators.csv` (columns `sensor`, `<indicator>`, ...)
/// and the sensor positions for the named indicators; sensors with an empty
/// value are left out. Missing file or `[sensors]`: an empty list.
pub fn load_sensor_values(study: &Study, names: &[String]) -> Result<Vec<SensorValues>> {
    let path = study.output_dir().join(SENSOR_FILE);
    let Some(sensors) = crate::io::layout::load_sensors(study)? else {
        return Ok(Vec::new());
    };
    if !path.exists() {
        return Ok(Vec::new());
    }
    let t = crate::io::table::Table::read(&path, b',')?;
    let ids = t.text("sensor")?;
    let mut out = Vec::new();
    for name in names.iter().filter(|n| t.headers.contains(n)) {
        let v = t.optional_numbers(name)?;
        let mut p = Points { ids: vec![], x: vec![], y: vec![] };
        let mut values = Vec::new();
        for (k, id) in ids.iter().enumerate() {
            let Some(val) = v[k] else { continue };
            let Some(j) = sensors.ids.iter().position(|s| s == id.trim()) else {
                return Err(t
                    .bad(
                        t.lines[k],
                        "sensor",
                        id,
                        "this sensor is not in the [sensors] table",
                        Some("rerun the climate stage for the current sensor table".into()),
                    )
                    .into());
            };
            p.ids.push(id.trim().to_string());
            p.x.push(sensors.x[j]);
            p.y.push(sensors.y[j]);
            values.push(val);
        }
        out.push(SensorValues { name: name.clone(), points: p, values });
    }
    Ok(out)
}

/// A mapped driver's coefficient pooled over imputations of the driver.
#[derive(Clone, Debug, PartialEq)]
pub struct MappingDraws {
    /// Rubin's rules on the per-imputation fits.
    pub pooled: compare::Pooled,
    /// Per imputation: the driver's `(estimate, se)` in the REML refit.
    pub fits: Vec<(f64, f64)>,
    /// The plug-in `(estimate, se)`: REML fit of the same model on the map.
    pub plug_in: (f64, f64),
    /// 95 % interval `Q̄ ± t(df) √T`, `df` Rubin's degrees of freedom.
    pub ci: (f64, f64),
    /// Autocorrelation of the driver's coefficient in the chain at the
    /// thinning lag (`None` for draws from the loggers alone).
    pub lag_autocorrelation: Option<f64>,
    /// The variogram used for the prior.
    pub variogram: VariogramModel,
    /// What the notes say, in one sentence.
    pub note: String,
}

/// Fewest sensors for fitting a variogram to one indicator (common practice;
/// below it the documented default model is used).
pub const MIN_SENSORS_FOR_VARIOGRAM: usize = 6;

/// The variogram of one indicator's sensor values: fitted by weighted least
/// squares (Cressie 1985; exponential with nugget) to the Matheron estimator
/// on the default bins; with fewer than [`MIN_SENSORS_FOR_VARIOGRAM`] sensors
/// or a failed fit the default is exponential, no nugget, partial sill = the
/// sample variance of the sensor values, range = a third of the largest
/// sensor distance (common practice, stated in docs/verdict.md). Returns the
/// model and which of the two was used, in words.
pub fn sensor_variogram(sv: &SensorValues) -> (VariogramModel, &'static str) {
    use crate::spatial::correlation::Family;
    use crate::spatial::variogram::{FitOptions, fit_wls};
    let (_, sd) = mean_sd(&sv.values);
    let default = VariogramModel {
        family: Family::Exponential,
        nugget: 0.0,
        partial_sill: sd * sd,
        range: sv.points.max_distance() / 3.0,
    };
    let fitted = if sv.values.len() >= MIN_SENSORS_FOR_VARIOGRAM {
        Bins::default_for(&sv.points)
            .ok()
            .and_then(|b| experimental(&sv.points, &sv.values, &b, Estimator::Matheron, None).ok())
            .and_then(|e| fit_wls(&e, Family::Exponential, &FitOptions::default()))
            .map(|f| f.model)
    } else {
        None
    };
    match fitted {
        Some(m) => (m, "variogram fitted to the sensor values"),
        None => (default, "default variogram (too few sensors or no fit)"),
    }
}

/// The uncertainty of one mapped driver of the chosen model, propagated by
/// multiple imputation (the method and its approximations are in
/// `docs/verdict.md`, "Mapped drivers carry uncertainty"):
///
/// 1. prior `X | W ~ N(mu, S)` at the pots: `mu` the driver values the model
///    used (the mapping stage's prediction), `S` the ordinary-kriging error
///    covariance of the signal from the sensor values with
///    [`sensor_variogram`] ([`crate::spatial::kriging::signal_kriging`]);
/// 2. the chosen model (drivers and error structure) fitted by REML on the map
///    gives the chain's start and its fixed correlation matrix;
/// 3. `opts.draws` imputations from `X | W, Y` by data augmentation
///    ([`Imputer::impute`]; Tanner & Wong 1987);
/// 4. the chosen model refitted by REML on each imputation; the driver's
///    coefficient combined by Rubin's rules (Rubin 1987, §3.1).
///
/// Other drivers of the model stay at their plug-in values. Seeded ChaCha20
/// from `opts.seed` and the driver's position; the stream does not depend on
/// the thread count. Cost: one eigendecomposition of order n (pots), the
/// chain at O(n p) per iteration, and `opts.draws + 1` REML fits.
pub fn mapping_uncertainty(
    data: &ModelData,
    spec: &ModelSpec,
    shape: &(Vec<String>, Errors),
    sv: &SensorValues,
    opts: &VerdictOptions,
) -> Result<MappingDraws> {
    let (model, how) = sensor_variogram(sv);
    impute_and_pool(data, spec, shape, sv, (model, how), Conditioning::LoggersAndTrait, opts)
}

/// [`mapping_uncertainty`] with a given variogram `(model, how in words)` and a
/// choice of what the draws condition on ([`Conditioning::LoggersOnly`] only
/// for measuring its attenuation).
pub fn impute_and_pool(
    data: &ModelData,
    spec: &ModelSpec,
    shape: &(Vec<String>, Errors),
    sv: &SensorValues,
    (model, how): (VariogramModel, &str),
    conditioning: Conditioning,
    opts: &VerdictOptions,
) -> Result<MappingDraws> {
    use crate::spatial::kriging::signal_kriging;
    use crate::spatial::likelihood::cholesky;
    use rand::SeedableRng;
    let name = sv.name.as_str();
    let bad =
        |message: String, hint: Option<String>| ModelError::Imputation { driver: name.into(), message, hint };
    let ns = sv.values.len();
    if ns < 3 {
        return Err(bad(
            format!("only {ns} sensors report it; the imputation needs at least 3"),
            Some("check sensor_indicators.csv from the climate stage".into()),
        ));
    }
    if !(model.sill().is_finite() && model.sill() > 0.0) {
        return Err(bad("the sensor values do not vary".into(), None));
    }
    let j = data.drivers.iter().position(|(n, _)| n == name).ok_or_else(|| {
        bad("not among the loaded drivers".into(), Some("name it in [model] drivers".into()))
    })?;
    let pots = Points { ids: data.pots.clone(), x: data.x.clone(), y: data.y.clone() };
    let sk = signal_kriging(&sv.points, &pots, &model)
        .map_err(|e| bad(format!("kriging the sensor values failed: {e}"), None))?;
    let n = pots.len();
    let s = faer::Mat::from_fn(n, n, |a, b| sk.error_cov[(a, b)]);
    let mu = data.drivers[j].1.clone();
    let sensor_map: Vec<f64> =
        (0..n).map(|t| (0..ns).map(|r| sk.weights[(r, t)] * sv.values[r]).sum::<f64>()).collect();
    let rms_gap = (mu.iter().zip(&sensor_map).map(|(a, b)| (a - b).powi(2)).sum::<f64>() / n as f64).sqrt();
    let mean_sd_map = ((0..n).map(|i| s[(i, i)].max(0.0)).sum::<f64>() / n as f64).sqrt();

    // The chosen model on the map: start of the chain and its correlation matrix.
    let dist = Distances::from_coords(&data.x, &data.y).map_err(|e| lerr("positions", e))?;
    let design = design_for(data, spec, &shape.0)?;
    let plug = fit(&design, data, &dist, shape.1, Method::Reml)?;
    let c = plug
        .names
        .iter()
        .position(|c| c == name)
        .ok_or_else(|| bad("not in the chosen model".into(), None))?;
    let chol_r = match &plug.covariance {
        Some(cov) => {
            Some(cholesky(&dist, &cov.params).map_err(|e| lerr(&model_name(&shape.0, &shape.1), e))?)
        }
        None => None,
    };
    let other: Vec<Vec<f64>> = (0..design.p()).filter(|&k| k != c).map(|k| design.x[k].clone()).collect();
    let imputer = Imputer::new(name, mu, &s, chol_r.as_ref(), &other, &data.response)?;
    let start = TraitParams {
        beta: (0..plug.beta.len()).filter(|&k| k != c).map(|k| plug.beta[k]).collect(),
        gamma: plug.beta[c],
        sigma2: plug.sigma2,
    };
    let mut rng =
        rand_chacha::ChaCha20Rng::seed_from_u64(opts.seed ^ (0x9e37_79b9_u64.wrapping_mul(j as u64 + 1)));
    let imp = imputer.impute(&start, opts.draws, conditioning, &mut rng)?;

    let mut fits = Vec::with_capacity(imp.draws.len());
    let mut d = data.clone();
    for x in imp.draws {
        d.drivers[j].1 = x;
        let design = design_for(&d, spec, &shape.0)?;
        let f = fit(&design, &d, &dist, shape.1, Method::Reml)?;
        fits.push((f.beta[c], f.se[c]));
    }
    let pooled = compare::rubin(&fits).ok_or_else(|| bad("Rubin's rules undefined".into(), None))?;
    let tq = if pooled.df.is_finite() { t_quantile(pooled.df) } else { 1.959964 };
    let ci = (pooled.estimate - tq * pooled.se, pooled.estimate + tq * pooled.se);
    let drawn = match conditioning {
        Conditioning::LoggersAndTrait => format!(
            "drawn from the driver given the loggers and the trait (data augmentation: burn-in {BURN_IN}, every {THIN}th draw kept{})",
            imp.lag_autocorrelation
                .map(|r| format!(", autocorrelation of the coefficient at that lag {r:.2}"))
                .unwrap_or_default()
        ),
        Conditioning::LoggersOnly => "drawn from the driver given the loggers alone".into(),
    };
    let note = format!(
        "`{name}`: the chosen model was refitted on {} imputations of the mapped driver {drawn}; {how}: {} nugget {:.3}, partial sill {:.3}, range {:.2} m, {ns} sensors; mean kriging SE of the driver at the pots {:.3}, RMS gap between the map and the sensor-level kriging {:.3}. Rubin's rules: estimate {:.4}, SE {:.4} (within {:.4}, between {:.4}, df {:.0}) against the plug-in {:.4}, SE {:.4}. Approximations: the per-pot summary is simulated, not the climate series; the variogram and the correlation parameters inside the chain are held at their estimates",
        opts.draws,
        model.family.name(),
        model.nugget,
        model.partial_sill,
        model.range,
        mean_sd_map,
        rms_gap,
        pooled.estimate,
        pooled.se,
        pooled.within.sqrt(),
        pooled.between.sqrt(),
        pooled.df.min(1e9),
        plug.beta[c],
        plug.se[c],
    );
    Ok(MappingDraws {
        pooled,
        fits,
        plug_in: (plug.beta[c], plug.se[c]),
        ci,
        lag_autocorrelation: imp.lag_autocorrelation,
        variogram: model,
        note,
    })
}

/// Run the comparison grid, the verdict, the driver ranking and the adjusted
/// means on loaded data. Cost: one ML fit per grid model (each correlated fit
/// is a likelihood search of O(n³) evaluations), plus one REML refit.
pub fn analyse(data: &ModelData, spec: &ModelSpec, opts: &VerdictOptions) -> Result<VerdictResult> {
    let start = Instant::now();
    let n = data.response.len();
    // Build the full design first: collinear drivers are refused here with their names.
    let full = design_for(data, spec, &spec.drivers)?;
    let dist = Distances::from_coords(&data.x, &data.y).map_err(|e| lerr("positions", e))?;
    let mut notes = Vec::new();
    // Every driver alone; the measured climate drivers together. A distance
    // to an opening is a smooth function of position, a stand-in for any
    // smooth effect near the opening: it is compared alone (climate against
    // plain distance), never added to the climate drivers, where it would
    // compete with the correlated residual instead (docs/verdict.md).
    let mut driver_sets: Vec<Vec<String>> = vec![vec![]];
    for d in &spec.drivers {
        driver_sets.push(vec![d.clone()]);
    }
    let climate: Vec<String> =
        spec.drivers.iter().filter(|d| !d.starts_with(DISTANCE_PREFIX)).cloned().collect();
    if climate.len() > 1 {
        driver_sets.push(climate);
    }
    let mut error_models = vec![Errors::Independent];
    let coincident = !dist.coincident().is_empty();
    for &family in &spec.correlations {
        if coincident && spec.nugget {
            notes.push(format!(
                "{}: not fitted without a nugget, pots share positions (the correlation matrix would be singular)",
                family.name()
            ));
        } else {
            error_models.push(Errors::Correlated { family, nugget: false });
        }
        if spec.nugget {
            error_models.push(Errors::Correlated { family, nugget: true });
        }
    }
    let mut grid: Vec<GridFit> = Vec::new();
    for drivers in &driver_sets {
        let design = if drivers.len() == spec.drivers.len() && !drivers.is_empty() {
            full.clone()
        } else {
            design_for(data, spec, drivers)?
        };
        for &errors in &error_models {
            let f = fit(&design, data, &dist, errors, Method::Ml)?;
            grid.push(GridFit { drivers: drivers.clone(), errors, fit: f });
        }
    }
    let cands: Vec<Candidate> = grid
        .iter()
        .map(|g| {
            Candidate::new(
                model_name(&g.drivers, &g.errors),
                compare::Method::Ml,
                Shape {
                    drivers: g.drivers.clone(),
                    correlation: match g.errors {
                        Errors::Independent => None,
                        Errors::Correlated { family, .. } => Some(family.name()),
                    },
                    nugget: g.errors.has_nugget(),
                },
                g.fit.loglik,
                g.fit.n_params,
                n,
            )
            .map_err(|e| ModelError::Comparison(e.to_string()))
        })
        .collect::<Result<_>>()?;
    let ranked = compare::rank(&cands).map_err(|e| ModelError::Comparison(e.to_string()))?;
    let verdict: Verdict =
        compare::decide(&ranked, opts.tie_delta).map_err(|e| ModelError::Comparison(e.to_string()))?;
    let by_name = |name: &str| -> &GridFit {
        grid.iter()
            .find(|g| model_name(&g.drivers, &g.errors) == name)
            .expect("every candidate is a grid fit")
    };
    let models = model_rows(&ranked, &grid);
    let lrts = lrt_rows(&grid);

    // The chosen model, refitted by REML.
    let chosen_ml = by_name(&verdict.chosen);
    let chosen_design = design_for(data, spec, &chosen_ml.drivers)?;
    let chosen = fit(&chosen_design, data, &dist, chosen_ml.errors, Method::Reml)?;
    let base_design = design_for(data, spec, &[])?;
    let plain = fit_independent(&base_design, &data.response, Method::Reml)?;
    let chosen_coefficients = (0..chosen.beta.len())
        .map(|j| CoefRow {
            term: chosen.names[j].clone(),
            estimate: chosen.beta[j],
            se: chosen.se[j],
            p_value: chosen.p_value[j],
        })
        .collect();
    let nb = knn(&data.x, &data.y, MORAN_NEIGHBOURS);
    let moran_of = |f: &Fit| {
        nb.as_ref().and_then(|nb| moran_residuals(&f.normalised, &f.whitened_x, nb)).map(|m| MoranSummary {
            k: m.k,
            i: m.i,
            expected: m.expected,
            variance: m.variance,
            z: m.z,
            p_value: m.p,
        })
    };
    let residual_check = residual_check(data, &chosen, moran_of(&chosen), &verdict.chosen);

    // Driver ranking.
    let best_corr: Option<Errors> = grid
        .iter()
        .filter(|g| g.drivers.is_empty() && !matches!(g.errors, Errors::Independent))
        .min_by(|a, b| a.fit.aic.total_cmp(&b.fit.aic))
        .map(|g| g.errors);
    let find = |drivers: &[String], errors: Errors| -> Option<&GridFit> {
        grid.iter().find(|g| g.drivers == drivers && g.errors == errors)
    };
    let base_ind = find(&[], Errors::Independent).expect("base model");
    let t975 = t_quantile((n - chosen.beta.len()) as f64);
    let mut drivers = Vec::new();
    for (name, values) in &data.drivers {
        let single = vec![name.clone()];
        let ind = find(&single, Errors::Independent).expect("single-driver model");
        let coef = |f: &Fit| -> (f64, f64, f64) {
            let j = f.names.iter().position(|c| c == name).expect("driver column");
            (f.beta[j], f.se[j], f.p_value[j])
        };
        let (source_model, (est, se, p), df) = if chosen.drivers.contains(name) {
            (verdict.chosen.clone(), coef(&chosen), (n - chosen.beta.len()) as f64)
        } else {
            let g = find(&single, chosen_ml.errors).unwrap_or(ind);
            (model_name(&g.drivers, &g.errors), coef(&g.fit), (n - g.fit.beta.len()) as f64)
        };
        let tq = if df == (n - chosen.beta.len()) as f64 { t975 } else { t_quantile(df) };
        let (_, sd) = mean_sd(values);
        let corr = best_corr.and_then(|e| Some((find(&[], e)?, find(&single, e)?)));
        let p_ind = coef(&ind.fit).2;
        let p_corr = corr.map(|(_, g)| coef(&g.fit).2);
        let delta_ind = base_ind.fit.aic - ind.fit.aic;
        let delta_corr = corr.map(|(b, g)| b.fit.aic - g.fit.aic);
        let confounded = p_ind < ALPHA && p_corr.is_some_and(|p| p >= ALPHA);
        let others: Vec<&Vec<f64>> = data.drivers.iter().filter(|(o, _)| o != name).map(|(_, v)| v).collect();
        let vif = vif(values, &others);
        drivers.push(DriverSummary {
            name: name.clone(),
            kind: if name.starts_with(DISTANCE_PREFIX) { "distance" } else { "climate" }.into(),
            source_model,
            estimate: est,
            estimate_per_sd: est * sd,
            driver_sd: sd,
            se,
            estimate_with_mapping_uncertainty: None,
            se_with_mapping_uncertainty: None,
            ci_low_with_mapping_uncertainty: None,
            ci_high_with_mapping_uncertainty: None,
            ci_low: est - tq * se,
            ci_high: est + tq * se,
            p_value: p,
            delta_aic: delta_ind,
            delta_aic_with_correlation: delta_corr,
            p_independent: p_ind,
            p_with_correlation: p_corr,
            vif,
            confounded,
        });
    }
    let openings = openings_summary(&drivers);
    let adjusted_means = adjusted_means(data, spec, &chosen_design, &chosen, &base_design, &plain);
    let positions = (0..n).map(|i| (data.pots[i].clone(), data.x[i], data.y[i])).collect();
    Ok(VerdictResult {
        verdict: verdict.verdict.word().into(),
        reason: verdict.reason.clone(),
        best_model: verdict.chosen.clone(),
        best_by_aic: verdict.best_by_aic.clone(),
        options: opts.clone(),
        trait_name: data.trait_name.clone(),
        n_pots: n,
        models,
        lrts,
        chosen_coefficients,
        residual_check,
        drivers,
        openings,
        adjusted_means,
        notes,
        n_fits: grid.len() + 2,
        seconds: start.elapsed().as_secs_f64(),
        positions,
        plain_residuals: plain.residuals.clone(),
        chosen_residuals: chosen.residuals.clone(),
        plain_moran: moran_of(&plain),
        chosen_shape: (chosen_ml.drivers.clone(), chosen_ml.errors),
    })
}

fn model_rows(ranked: &[Ranked], grid: &[GridFit]) -> Vec<ModelRow> {
    ranked
        .iter()
        .map(|r| {
            let g = grid
                .iter()
                .find(|g| model_name(&g.drivers, &g.errors) == r.candidate.name)
                .expect("every candidate is a grid fit");
            ModelRow {
                name: r.candidate.name.clone(),
                drivers: r.candidate.drivers.clone(),
                correlation: g.errors.correlation_name(),
                nugget: r.candidate.nugget,
                loglik: r.candidate.loglik,
                aic: r.aic,
                bic: r.bic,
                n_params: r.candidate.n_params,
                delta_aic: r.delta_aic,
                akaike_weight: r.akaike_weight,
                range: g.fit.covariance.map(|c| c.params.range),
                nugget_share: g.fit.covariance.map(|c| c.params.eta),
                converged: g.fit.converged(),
            }
        })
        .collect()
}

/// Likelihood-ratio tests of the nested pairs of the grid (rules in docs/verdict.md).
fn lrt_rows(grid: &[GridFit]) -> Vec<LrtRow> {
    let mut out = Vec::new();
    let mut push = |a: &GridFit, b: &GridFit, null: LrtNull, approximate: bool| {
        let stat = (2.0 * (b.fit.loglik - a.fit.loglik)).max(0.0);
        let distribution = match null {
            LrtNull::ChiSquare { df } => format!("chi2({df})"),
            LrtNull::BoundaryMixture { df } => format!("0.5 chi2({}) + 0.5 chi2({df})", df - 1.0),
        };
        out.push(LrtRow {
            null: model_name(&a.drivers, &a.errors),
            alternative: model_name(&b.drivers, &b.errors),
            statistic: stat,
            distribution,
            p_value: compare::lrt_p_value(stat, null),
            approximate,
        });
    };
    for a in grid {
        for b in grid {
            // Fixed-effect nesting under the same error model.
            if a.errors == b.errors
                && a.drivers.len() < b.drivers.len()
                && a.drivers.iter().all(|d| b.drivers.contains(d))
            {
                let df = (b.fit.beta.len() - a.fit.beta.len()) as f64;
                push(a, b, LrtNull::ChiSquare { df }, false);
            }
            if a.drivers != b.drivers {
                continue;
            }
            match (a.errors, b.errors) {
                (
                    Errors::Correlated { family: f0, nugget: false },
                    Errors::Correlated { family: f1, nugget: true },
                ) if f0 == f1 => push(a, b, LrtNull::BoundaryMixture { df: 1.0 }, false),
                (Errors::Independent, Errors::Correlated { nugget, .. }) => {
                    let d = 1.0 + f64::from(u8::from(nugget));
                    push(a, b, LrtNull::BoundaryMixture { df: d }, true)
                }
                _ => {}
            }
        }
    }
    out
}

fn residual_check(data: &ModelData, chosen: &Fit, moran: Option<MoranSummary>, name: &str) -> ResidualCheck {
    let points = Points { ids: data.pots.clone(), x: data.x.clone(), y: data.y.clone() };
    let variogram: Vec<ResidualBin> = Bins::default_for(&points)
        .ok()
        .and_then(|bins| experimental(&points, &chosen.normalised, &bins, Estimator::Matheron, None).ok())
        .map(|emp| {
            emp.bins
                .iter()
                .filter_map(|b| {
                    b.semivariance.map(|s| ResidualBin { lag: b.lag, semivariance: s, pairs: b.pairs })
                })
                .collect()
        })
        .unwrap_or_default();
    let structure_left = moran.as_ref().is_some_and(|m| m.p_value < ALPHA);
    let vg = match (variogram.first(), variogram.last()) {
        (Some(a), Some(b)) => format!(
            "; the variogram of the normalised residuals is {:.2} at {:.2} m and {:.2} at {:.2} m (about 1 at every lag when no structure is left)",
            a.semivariance, a.lag, b.semivariance, b.lag
        ),
        _ => String::new(),
    };
    let statement = match &moran {
        Some(m) if structure_left => format!(
            "Spatial structure is left in the residuals of `{name}`: Moran's I = {:.3} (expected {:.3}, p = {:.3}){vg}; the chosen model does not capture the whole pattern.",
            m.i, m.expected, m.p_value
        ),
        Some(m) => format!(
            "No spatial structure is left in the residuals of `{name}`: Moran's I = {:.3} (expected {:.3}, p = {:.3}){vg}.",
            m.i, m.expected, m.p_value
        ),
        None => format!("Moran's I of the residuals of `{name}` is undefined for these data{vg}."),
    };
    ResidualCheck { moran, variogram, structure_left, statement }
}

/// Variance inflation of `v` against `others`: `1/(1 - R²)` of the regression
/// of `v` on an intercept and `others` (common practice; Kutner et al. 2005, §10.5).
fn vif(v: &[f64], others: &[&Vec<f64>]) -> Option<f64> {
    if others.is_empty() {
        return None;
    }
    let mut x = vec![vec![1.0; v.len()]];
    x.extend(others.iter().map(|o| (*o).clone()));
    let (_, rss, _) = least_squares(&x, v)?;
    let (m, _) = mean_sd(v);
    let tss: f64 = v.iter().map(|a| (a - m).powi(2)).sum();
    let r2 = 1.0 - rss / tss;
    (r2 < 1.0).then(|| 1.0 / (1.0 - r2))
}

fn openings_summary(drivers: &[DriverSummary]) -> Option<OpeningsSummary> {
    let best = |kind: &str| {
        drivers.iter().filter(|d| d.kind == kind).max_by(|a, b| a.delta_aic.total_cmp(&b.delta_aic))
    };
    let (c, d) = (best("climate"), best("distance"));
    let d_ = d?;
    let statement = match c {
        None => format!(
            "Only distances to openings were offered: `{}` is the best of them (it improves AIC by {:.1} over the base model).",
            d_.name, d_.delta_aic
        ),
        Some(c) => {
            let diff = c.delta_aic - d_.delta_aic;
            if diff.abs() <= 2.0 {
                format!(
                    "The measured climate (`{}`) and the plain distance (`{}`) explain the pattern about equally well (AIC within {:.1}).",
                    c.name,
                    d_.name,
                    diff.abs()
                )
            } else if diff > 0.0 {
                format!(
                    "The measured climate (`{}`) explains the pattern better than the plain distance (`{}`), by {:.1} AIC units.",
                    c.name, d_.name, diff
                )
            } else {
                format!(
                    "The plain distance (`{}`) explains the pattern better than the measured climate (`{}`), by {:.1} AIC units: something near the opening that the loggers did not record (a draught they missed) may act on the plants.",
                    d_.name, c.name, -diff
                )
            }
        }
    };
    Some(OpeningsSummary {
        best_climate: c.map(|c| c.name.clone()),
        best_distance: Some(d_.name.clone()),
        aic_difference: c.map(|c| c.delta_aic - d_.delta_aic),
        statement,
    })
}

/// The design row of one cell: levels of every block and factor, drivers at `driver_values`.
fn cell_row(
    design: &Design,
    data: &ModelData,
    block_levels: &[usize],
    factor_levels: &[usize],
    driver_values: &[f64],
) -> Vec<f64> {
    let mut row = vec![0.0; design.p()];
    let ind = |level: usize, nlev: usize| -> Vec<f64> {
        (1..nlev).map(|l| f64::from(u8::from(l == level))).collect()
    };
    for term in &design.terms {
        let vals: Vec<f64> = match &term.kind {
            TermKind::Intercept => vec![1.0],
            TermKind::Block => {
                let b = data.blocks.iter().position(|f| f.name == term.name).expect("block");
                ind(block_levels[b], data.blocks[b].levels.len())
            }
            TermKind::Factor => {
                let k = term.factors[0];
                ind(factor_levels[k], data.factors[k].levels.len())
            }
            TermKind::Interaction(idx) => {
                let mut acc = vec![1.0];
                for &k in idx {
                    let v = ind(factor_levels[k], data.factors[k].levels.len());
                    acc = acc.iter().flat_map(|a| v.iter().map(move |b| a * b)).collect();
                }
                acc
            }
            TermKind::Driver => {
                let j = design.drivers.iter().position(|d| *d == term.name).expect("driver");
                vec![driver_values[j]]
            }
        };
        for (c, v) in term.columns.clone().zip(vals) {
            row[c] = v;
        }
    }
    row
}

/// Adjusted means (equal weights over the levels of the other factors and
/// blocks, drivers at their means over the pots): `L'beta` with `L` the mean
/// of the design rows of the cells at the level, SE `sqrt(L' Cov(beta) L)`
/// (Searle, Speed & Milliken 1980).
fn adjusted_means(
    data: &ModelData,
    spec: &ModelSpec,
    design: &Design,
    fit: &Fit,
    plain_design: &Design,
    plain: &Fit,
) -> Vec<AdjustedMeanRow> {
    let sizes: Vec<usize> = data.blocks.iter().chain(&data.factors).map(|f| f.levels.len()).collect();
    let total: usize = sizes.iter().product();
    if total > 1_000_000 || data.factors.is_empty() {
        return Vec::new();
    }
    let nb = data.blocks.len();
    let dmeans: Vec<f64> = design
        .drivers
        .iter()
        .map(|d| mean_sd(&data.drivers.iter().find(|(n, _)| n == d).expect("driver").1).0)
        .collect();
    // Every cell: (levels, row under the chosen model, row under the plain model).
    let mut cells = Vec::with_capacity(total);
    for c in 0..total {
        let mut rem = c;
        let mut lev = vec![0; sizes.len()];
        for s in (0..sizes.len()).rev() {
            lev[s] = rem % sizes[s];
            rem /= sizes[s];
        }
        let r1 = cell_row(design, data, &lev[..nb], &lev[nb..], &dmeans);
        let r0 = cell_row(plain_design, data, &lev[..nb], &lev[nb..], &[]);
        cells.push((lev, r1, r0));
    }
    let mut groups: Vec<Vec<usize>> = (0..data.factors.len()).map(|k| vec![k]).collect();
    for inter in &spec.interactions {
        groups.push(inter.iter().filter_map(|nm| data.factors.iter().position(|f| &f.name == nm)).collect());
    }
    let estimate = |l: &[f64], f: &Fit| -> (f64, f64) {
        let p = l.len();
        let m: f64 = l.iter().zip(&f.beta).map(|(a, b)| a * b).sum();
        let mut v = 0.0;
        for i in 0..p {
            for j in 0..p {
                v += l[i] * f.cov_beta[i * p + j] * l[j];
            }
        }
        (m, v.max(0.0).sqrt())
    };
    let mut out = Vec::new();
    for g in groups {
        let gsizes: Vec<usize> = g.iter().map(|&k| data.factors[k].levels.len()).collect();
        let gtotal: usize = gsizes.iter().product();
        for combo in 0..gtotal {
            let mut rem = combo;
            let mut want = vec![0; g.len()];
            for s in (0..g.len()).rev() {
                want[s] = rem % gsizes[s];
                rem /= gsizes[s];
            }
            let sel: Vec<&(Vec<usize>, Vec<f64>, Vec<f64>)> = cells
                .iter()
                .filter(|(lev, _, _)| g.iter().zip(&want).all(|(&k, &w)| lev[nb + k] == w))
                .collect();
            let w = 1.0 / sel.len() as f64;
            let mut l1 = vec![0.0; design.p()];
            let mut l0 = vec![0.0; plain_design.p()];
            for (_, r1, r0) in &sel {
                l1.iter_mut().zip(r1).for_each(|(a, b)| *a += w * b);
                l0.iter_mut().zip(r0).for_each(|(a, b)| *a += w * b);
            }
            let (m1, s1) = estimate(&l1, fit);
            let (m0, s0) = estimate(&l0, plain);
            out.push(AdjustedMeanRow {
                factor: g.iter().map(|&k| data.factors[k].name.as_str()).collect::<Vec<_>>().join(":"),
                level: g
                    .iter()
                    .zip(&want)
                    .map(|(&k, &w)| data.factors[k].levels[w].as_str())
                    .collect::<Vec<_>>()
                    .join(":"),
                mean: m1,
                se: s1,
                plain_mean: m0,
                plain_se: s0,
                change: m1 - m0,
            });
        }
    }
    out
}

fn num(v: f64) -> String {
    if v.is_finite() { format!("{v:?}") } else { String::new() }
}

fn opt(v: Option<f64>) -> String {
    v.map(num).unwrap_or_default()
}

fn csv_field(s: &str) -> String {
    if s.contains([',', '"', '\n']) { format!("\"{}\"", s.replace('"', "\"\"")) } else { s.to_string() }
}

/// Render `comparison.csv` (the grid, sorted by AIC).
pub fn comparison_csv(r: &VerdictResult) -> String {
    let mut s = String::from(
        "model,drivers,correlation,nugget,loglik,aic,bic,n_params,delta_aic,akaike_weight,range,nugget_share,converged,chosen\n",
    );
    for m in &r.models {
        let _ = writeln!(
            s,
            "{},{},{},{},{},{},{},{},{},{},{},{},{},{}",
            csv_field(&m.name),
            csv_field(&m.drivers.join("+")),
            csv_field(&m.correlation),
            m.nugget,
            num(m.loglik),
            num(m.aic),
            num(m.bic),
            m.n_params,
            num(m.delta_aic),
            num(m.akaike_weight),
            opt(m.range),
            opt(m.nugget_share),
            m.converged,
            m.name == r.best_model
        );
    }
    s
}

/// Render `drivers.csv`.
pub fn drivers_csv(r: &VerdictResult) -> String {
    let mut s = String::from(
        "driver,kind,source_model,estimate,estimate_per_sd,driver_sd,se,ci_low,ci_high,p_value,delta_aic,delta_aic_with_correlation,p_independent,p_with_correlation,vif,confounded,estimate_with_mapping_uncertainty,se_with_mapping_uncertainty,ci_low_with_mapping_uncertainty,ci_high_with_mapping_uncertainty\n",
    );
    for d in &r.drivers {
        let _ = writeln!(
            s,
            "{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{}",
            csv_field(&d.name),
            d.kind,
            csv_field(&d.source_model),
            num(d.estimate),
            num(d.estimate_per_sd),
            num(d.driver_sd),
            num(d.se),
            num(d.ci_low),
            num(d.ci_high),
            num(d.p_value),
            num(d.delta_aic),
            opt(d.delta_aic_with_correlation),
            num(d.p_independent),
            opt(d.p_with_correlation),
            opt(d.vif),
            d.confounded,
            opt(d.estimate_with_mapping_uncertainty),
            opt(d.se_with_mapping_uncertainty),
            opt(d.ci_low_with_mapping_uncertainty),
            opt(d.ci_high_with_mapping_uncertainty)
        );
    }
    s
}

/// Render `adjusted_means.csv`.
pub fn adjusted_means_csv(r: &VerdictResult) -> String {
    let mut s = String::from("factor,level,mean,se,plain_mean,plain_se,change\n");
    for a in &r.adjusted_means {
        let _ = writeln!(
            s,
            "{},{},{},{},{},{},{}",
            csv_field(&a.factor),
            csv_field(&a.level),
            num(a.mean),
            num(a.se),
            num(a.plain_mean),
            num(a.plain_se),
            num(a.change)
        );
    }
    s
}

/// Write `summary.json`, `comparison.csv`, `drivers.csv` and
/// `adjusted_means.csv` into the output folder atomically.
pub fn write_outputs(study: &Study, r: &VerdictResult) -> Result<Vec<PathBuf>> {
    let mut w = StageWriter::new(&study.output_dir(), "verdict")?;
    let json = serde_json::to_string_pretty(r).expect("plain data serialises");
    w.write("summary.json", json.as_bytes())?;
    w.write("comparison.csv", comparison_csv(r).as_bytes())?;
    w.write("drivers.csv", drivers_csv(r).as_bytes())?;
    w.write("adjusted_means.csv", adjusted_means_csv(r).as_bytes())?;
    Ok(w.commit()?)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::data::FactorData;
    use crate::spatial::correlation::Family;
    use crate::spatial::likelihood::{CovParams, cholesky};
    use approx::assert_abs_diff_eq;
    use rand::SeedableRng;
    use rand_chacha::ChaCha20Rng;
    use rand_distr::{Distribution, StandardNormal};

    /// Which truth a simulated study has.
    #[derive(Clone, Copy, Debug)]
    enum Truth {
        DriverOnly,
        CorrelationOnly,
        Both,
        Neither,
    }

    /// True driver effect per unit (trait units per driver unit).
    const EFFECT: f64 = -1.5;

    fn spec(drivers: &[&str]) -> ModelSpec {
        ModelSpec {
            trait_column: "height".into(),
            factors: vec!["accession".into(), "regime".into()],
            interactions: vec![],
            drivers: drivers.iter().map(|s| s.to_string()).collect(),
            blocks: vec![],
            correlations: vec![Family::Exponential],
            nugget: true,
            trait_unit: None,
        }
    }

    /// A 10 x 8 bench of pots 0.5 m apart, 4 accessions x 2 regimes assigned
    /// at random (10 pots per cell), a driver `cold` (a draught decaying
    /// over about a metre from a door at x = 0, and a wave along y: invented for the test), and the trait
    /// `10 + accession + regime + [EFFECT * cold] + [exponential field,
    /// range 1.5 m, variance 6.25] + iid N(0, 1)` (terms in brackets by truth).
    fn simulate(truth: Truth, seed: u64) -> ModelData {
        let mut rng = ChaCha20Rng::seed_from_u64(seed);
        let (nx, ny) = (10, 8);
        let n = nx * ny;
        let x: Vec<f64> = (0..n).map(|i| (i % nx) as f64 * 0.5).collect();
        let y: Vec<f64> = (0..n).map(|i| (i / nx) as f64 * 0.5).collect();
        let mut cells: Vec<usize> = (0..n).map(|i| i % 8).collect();
        // Fisher-Yates shuffle with the seeded generator.
        for i in (1..n).rev() {
            let u: f64 = rand_distr::Uniform::new(0.0, 1.0).unwrap().sample(&mut rng);
            let j = ((u * (i + 1) as f64) as usize).min(i);
            cells.swap(i, j);
        }
        let acc: Vec<String> = cells.iter().map(|c| format!("A{}", c % 4)).collect();
        let reg: Vec<String> =
            cells.iter().map(|c| if c / 4 == 0 { "wet" } else { "dry" }.to_string()).collect();
        let cold: Vec<f64> =
            (0..n).map(|i| 2.0 + 3.0 * (-x[i] / 0.8).exp() + 0.5 * (1.2 * y[i]).cos()).collect();
        let dist = Distances::from_coords(&x, &y).unwrap();
        let l = cholesky(&dist, &CovParams { family: Family::Exponential, range: 1.5, eta: 0.0 }).unwrap();
        let z: Vec<f64> = (0..n).map(|_| StandardNormal.sample(&mut rng)).collect();
        let field: Vec<f64> = (0..n).map(|i| 2.5 * (0..=i).map(|j| l[(i, j)] * z[j]).sum::<f64>()).collect();
        let (drv, cor) = match truth {
            Truth::DriverOnly => (true, false),
            Truth::CorrelationOnly => (false, true),
            Truth::Both => (true, true),
            Truth::Neither => (false, false),
        };
        let response: Vec<f64> = (0..n)
            .map(|i| {
                let a = [0.0, 1.0, -0.5, 2.0][cells[i] % 4];
                let r = if cells[i] / 4 == 0 { 0.0 } else { -1.0 };
                let e: f64 = StandardNormal.sample(&mut rng);
                10.0 + a + r + if drv { EFFECT * cold[i] } else { 0.0 } + if cor { field[i] } else { 0.0 } + e
            })
            .collect();
        let refs = |v: &[String]| -> Vec<String> { v.to_vec() };
        let a = refs(&acc);
        let b = refs(&reg);
        ModelData {
            source: PathBuf::from("simulated"),
            trait_name: "height".into(),
            pots: (0..n).map(|i| format!("p{i}")).collect(),
            lines: (0..n).map(|i| i + 2).collect(),
            x,
            y,
            response,
            blocks: vec![],
            factors: vec![
                FactorData::from_labels("accession", &a.iter().map(String::as_str).collect::<Vec<_>>()),
                FactorData::from_labels("regime", &b.iter().map(String::as_str).collect::<Vec<_>>()),
            ],
            drivers: vec![("cold".into(), cold)],
            excluded: vec![],
        }
    }

    fn expected(t: Truth) -> &'static str {
        match t {
            Truth::DriverOnly => "covariate",
            Truth::CorrelationOnly => "correlation",
            Truth::Both => "both",
            Truth::Neither => "none",
        }
    }

    const TRUTHS: [Truth; 4] = [Truth::DriverOnly, Truth::CorrelationOnly, Truth::Both, Truth::Neither];

    /// Fast check: three seeds per verdict on simulated data with known
    /// truth (the first three of the full study below), at least two right
    /// each (a single seed can be wrong by chance: the full study measures
    /// the rate).
    #[test]
    fn verdict_is_right_on_simulated_truth() {
        for t in TRUTHS {
            let mut right = 0;
            for seed in 1000..1003 {
                let d = simulate(t, seed);
                let r = analyse(&d, &spec(&["cold"]), &VerdictOptions::default()).unwrap();
                assert_eq!(r.models.len(), 6);
                right += usize::from(r.verdict == expected(t));
            }
            assert!(right >= 2, "{t:?}: {right}/3");
        }
    }

    /// The full truth study (slow: `cargo test --lib verdict -- --ignored --nocapture`):
    /// 10 seeds per verdict; counts of right verdicts and of 95 % CIs of the
    /// driver effect that cover the true value.
    #[test]
    #[ignore]
    fn truth_study_ten_seeds() {
        let mut counts = Vec::new();
        for t in TRUTHS {
            let (mut right, mut covered, mut with_driver) = (0, 0, 0);
            let mut wrong = Vec::new();
            for seed in 0..10 {
                let d = simulate(t, 1000 + seed);
                let r = analyse(&d, &spec(&["cold"]), &VerdictOptions::default()).unwrap();
                right += usize::from(r.verdict == expected(t));
                if r.verdict != expected(t) {
                    wrong.push(r.verdict.clone());
                }
                let dr = &r.drivers[0];
                let truth = if matches!(t, Truth::DriverOnly | Truth::Both) { EFFECT } else { 0.0 };
                if r.best_model.contains("cold") {
                    with_driver += 1;
                    covered += usize::from(dr.ci_low <= truth && truth <= dr.ci_high);
                }
            }
            println!(
                "{t:?}: verdict right {right}/10 (wrong: {wrong:?}); CI covers truth {covered}/{with_driver} (chosen models with the driver)"
            );
            counts.push((t, right));
        }
        assert!(counts.iter().all(|c| c.1 >= 9), "{counts:?}");
    }

    fn balanced(unbalanced: bool) -> ModelData {
        // 2 x 2 layout; cell (a, b) values invented for the check.
        let mut acc = Vec::new();
        let mut reg = Vec::new();
        let mut resp = Vec::new();
        let vals = [[1.0, 2.0, 3.5], [4.0, 4.5, 6.0], [2.0, 3.0, 3.0], [7.0, 8.0, 8.5]];
        for (c, v) in vals.iter().enumerate() {
            let k = if unbalanced && c == 0 { 2 } else { 3 };
            for &y in &v[..k] {
                acc.push(if c % 2 == 0 { "a1" } else { "a2" });
                reg.push(if c / 2 == 0 { "r1" } else { "r2" });
                resp.push(y);
            }
        }
        let n = resp.len();
        ModelData {
            source: PathBuf::from("hand"),
            trait_name: "t".into(),
            pots: (0..n).map(|i| format!("p{i}")).collect(),
            lines: (0..n).map(|i| i + 2).collect(),
            x: (0..n).map(|i| i as f64).collect(),
            y: vec![0.0; n],
            response: resp,
            blocks: vec![],
            factors: vec![FactorData::from_labels("a", &acc), FactorData::from_labels("r", &reg)],
            drivers: vec![],
            excluded: vec![],
        }
    }

    /// Adjusted means by hand: with the interaction in the model the fitted
    /// cell means are the cell averages, and the equal-weight mean of a level
    /// is the plain average of its cell means (Searle, Speed & Milliken 1980).
    /// Cells (hand): a1r1 = 2.1667 (1.5 with the third value dropped),
    /// a2r1 = 4.8333, a1r2 = 2.6667, a2r2 = 7.8333.
    #[test]
    fn adjusted_means_match_hand_computation() {
        for unbalanced in [false, true] {
            let d = balanced(unbalanced);
            let mut s = spec(&[]);
            s.factors = vec!["a".into(), "r".into()];
            s.interactions = vec![vec!["a".into(), "r".into()]];
            s.correlations = vec![];
            let r = analyse(&d, &s, &VerdictOptions::default()).unwrap();
            assert_eq!(r.verdict, "none");
            let c11 = if unbalanced { 1.5 } else { 6.5 / 3.0 };
            let (c21, c12, c22) = (14.5 / 3.0, 8.0 / 3.0, 23.5 / 3.0);
            let get =
                |f: &str, l: &str| r.adjusted_means.iter().find(|m| m.factor == f && m.level == l).unwrap();
            assert_abs_diff_eq!(get("a", "a1").mean, (c11 + c12) / 2.0, epsilon = 1e-10);
            assert_abs_diff_eq!(get("a", "a2").mean, (c21 + c22) / 2.0, epsilon = 1e-10);
            assert_abs_diff_eq!(get("r", "r2").mean, (c12 + c22) / 2.0, epsilon = 1e-10);
            assert_abs_diff_eq!(get("a:r", "a2:r1").mean, c21, epsilon = 1e-10);
            // SE of a cell mean: s / sqrt(n_cell), s² the pooled within-cell variance.
            let n = d.response.len() as f64;
            let rss: f64 = r.chosen_residuals.iter().map(|e| e * e).sum();
            let s2 = rss / (n - 4.0);
            assert_abs_diff_eq!(get("a:r", "a2:r1").se, (s2 / 3.0).sqrt(), epsilon = 1e-10);
            // a1: (c11 + c12)/2, var = s²/4 (1/n11 + 1/n12).
            let n11 = if unbalanced { 2.0 } else { 3.0 };
            assert_abs_diff_eq!(
                get("a", "a1").se,
                (s2 / 4.0 * (1.0 / n11 + 1.0 / 3.0)).sqrt(),
                epsilon = 1e-10
            );
            assert_abs_diff_eq!(get("a", "a1").change, 0.0, epsilon = 1e-10);
        }
    }

    /// The pooling path: 12 sensors measure `cold` (the test's driver plus
    /// nothing else), the pots carry the driver itself; the chosen model is
    /// refitted on 20 imputations. Checks: the pooled values are Rubin's
    /// formulas on the per-imputation fits (Rubin 1987, §3.1: Q̄, Ū, B,
    /// T = Ū + (1 + 1/m) B, recomputed here by hand), the imputations differ
    /// (B > 0), the plug-in is the REML fit on the map, and the same seed gives
    /// the same draws.
    #[test]
    fn mapping_uncertainty_pools_by_rubin() {
        let d = simulate(Truth::DriverOnly, 21);
        let sx: Vec<f64> = (0..12).map(|k| 0.25 + (k % 4) as f64 * 1.4).collect();
        let sy: Vec<f64> = (0..12).map(|k| 0.25 + (k / 4) as f64 * 1.5).collect();
        let cold = |x: f64, y: f64| 2.0 + 3.0 * (-x / 0.8).exp() + 0.5 * (1.2 * y).cos();
        let sv = SensorValues {
            name: "cold".into(),
            points: Points { ids: (0..12).map(|k| format!("s{k}")).collect(), x: sx.clone(), y: sy.clone() },
            values: (0..12).map(|k| cold(sx[k], sy[k])).collect(),
        };
        let opts = VerdictOptions { draws: 20, ..VerdictOptions::default() };
        let shape = (vec!["cold".to_string()], Errors::Independent);
        let p1 = mapping_uncertainty(&d, &spec(&["cold"]), &shape, &sv, &opts).unwrap();
        let fits = &p1.fits;
        assert_eq!(fits.len(), 20);
        let m = fits.len() as f64;
        let qbar = fits.iter().map(|f| f.0).sum::<f64>() / m;
        let ubar = fits.iter().map(|f| f.1 * f.1).sum::<f64>() / m;
        let b = fits.iter().map(|f| (f.0 - qbar).powi(2)).sum::<f64>() / (m - 1.0);
        assert_abs_diff_eq!(p1.pooled.estimate, qbar, epsilon = 1e-12);
        assert_abs_diff_eq!(p1.pooled.total, ubar + (1.0 + 1.0 / m) * b, epsilon = 1e-12);
        assert!(b > 0.0 && p1.pooled.se > ubar.sqrt(), "{}", p1.note);
        assert!(p1.ci.0 < qbar && qbar < p1.ci.1);
        let design = design_for(&d, &spec(&["cold"]), &shape.0).unwrap();
        let plug = fit_independent(&design, &d.response, Method::Reml).unwrap();
        let c = plug.names.iter().position(|n| n == "cold").unwrap();
        assert_eq!(p1.plug_in, (plug.beta[c], plug.se[c]));
        let p2 = mapping_uncertainty(&d, &spec(&["cold"]), &shape, &sv, &opts).unwrap();
        assert_eq!(p1, p2);
    }

    #[test]
    fn collinear_drivers_are_refused_with_their_names() {
        let mut d = simulate(Truth::DriverOnly, 3);
        let twice: Vec<f64> = d.drivers[0].1.iter().map(|v| 2.0 * v + 1.0).collect();
        d.drivers.push(("cold_twice".into(), twice));
        let e =
            analyse(&d, &spec(&["cold", "cold_twice"]), &VerdictOptions::default()).unwrap_err().to_string();
        assert!(e.contains("aliased") && e.contains("cold_twice"), "{e}");
    }

    #[test]
    fn lrt_rules_follow_docs() {
        let d = simulate(Truth::Both, 11);
        let r = analyse(&d, &spec(&["cold"]), &VerdictOptions::default()).unwrap();
        let get = |a: &str, b: &str| r.lrts.iter().find(|l| l.null == a && l.alternative == b).unwrap();
        let fixed = get("base", "base+cold");
        assert_eq!(fixed.distribution, "chi2(1)");
        assert!(!fixed.approximate);
        let nug = get("base | exponential", "base | exponential+nugget");
        assert_eq!(nug.distribution, "0.5 chi2(0) + 0.5 chi2(1)");
        let ind = get("base", "base | exponential+nugget");
        assert_eq!(ind.distribution, "0.5 chi2(1) + 0.5 chi2(2)");
        assert!(ind.approximate);
        let m = |name: &str| r.models.iter().find(|m| m.name == name).unwrap().loglik;
        assert_abs_diff_eq!(fixed.statistic, 2.0 * (m("base+cold") - m("base")).max(0.0), epsilon = 1e-12);
    }
}
