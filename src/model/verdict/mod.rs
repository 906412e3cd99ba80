//! The verdict stage: the comparison grid of ML fits (base design; base plus
//! each driver; base plus all climate drivers; each with independent errors and with
//! every declared correlation family, with and without nugget), the verdict
//! word and its reason ([`compare::decide`]), the REML refit of the chosen
//! model with its residual check (Moran's I and the residual variogram), the
//! driver ranking, the openings question (measured climate against plain
//! distance) and the adjusted means. The rules are stated in `docs/verdict.md`.
//!
//! [`run_verdict`] reads the study; [`analyse`] works on loaded
//! [`ModelData`] so that it can be tested on data with known truth. This file
//! holds the options, the two entry points and the order of the work; the
//! files of the stage, in reading order:
//!
//! - `result`: the result types (one row type per output table);
//! - `grid`: which models the grid holds (driver sets times error models) and
//!   the one helper that fits any of them by ML or REML;
//! - `rule`: the grid ranked by AIC, the verdict word and reason
//!   ([`compare::decide`]), the rows of `comparison.csv` and the
//!   likelihood-ratio tests of nested pairs;
//! - `summaries`: what is said about the chosen model: the residual check,
//!   the driver ranking, the openings question and the adjusted means;
//! - `uncertainty`: the mapped drivers' uncertainty, propagated by multiple
//!   imputation and Rubin's rules;
//! - `headline`: the answer in plain numbers (typical effect, certainty,
//!   warnings, what next);
//! - `write`: `summary.json`, `comparison.csv`, `drivers.csv` and
//!   `adjusted_means.csv`.

mod calibrate;
mod grid;
mod headline;
mod result;
mod rule;
mod summaries;
mod uncertainty;
mod write;

pub use self::calibrate::{BOOTSTRAP_SKIP_P, Calibration, CalibrationStep, DriverTest};
pub use self::grid::model_name;
pub use self::headline::{
    Certainty, Headline, NextLogger, TYPICAL_SPAN, TypicalEffect, WEAK_MAP_RATIO, headline, percentile,
};
pub use self::result::{
    AdjustedMeanRow, CoefRow, DriverSummary, LeftOutPot, LikelihoodUsed, LrtRow, ModelRow, MoranSummary,
    OpeningsSummary, ResidualBin, ResidualCheck, VerdictResult,
};
pub use self::summaries::RESIDUAL_VARIOGRAM_POTS;
pub use self::uncertainty::{
    MIN_SENSORS_FOR_VARIOGRAM, MappingDraws, SENSOR_FILE, SensorValues, impute_and_pool, load_sensor_values,
    mapping_uncertainty, mapping_uncertainty_with, sensor_variogram, window_prior_cov,
};
pub use self::write::{adjusted_means_csv, comparison_csv, drivers_csv, write_outputs};
pub use crate::spatial::geometry::DISTANCE_PREFIX;

use self::grid::{GridFit, design_for, fit, fit_grid, lerr};
use self::rule::{lrt_rows, model_rows, rank_and_decide};
use self::summaries::{adjusted_means, driver_summaries, openings_summary, residual_check};
use super::compare;
use super::data::{ModelData, ModelSpec, load_model_data};
use super::diagnostics::{MORAN_NEIGHBOURS, knn, moran_residuals};
use super::error::Result;
use super::gls::{Fit, LikelihoodPath, fit_independent};
use crate::io::study::Study;
use crate::model::timings::{FitTime, ImputationTime, Timings};
use crate::spatial::likelihood::{Distances, LikelihoodKind};
use serde::{Deserialize, Serialize};
use statrs::distribution::{ContinuousCDF, StudentsT};
use std::time::Instant;

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
    bootstrap: Option<usize>,
}

/// Options of the verdict stage (`[verdict]` of the study file).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct VerdictOptions {
    /// Tie margin in AIC units (`tie_delta`, default 4).
    pub tie_delta: f64,
    /// Conditional simulations per mapped driver (`draws`, default 20, at least 2).
    pub draws: usize,
    /// Replicates of the parametric bootstrap of the decisive
    /// likelihood-ratio test (`bootstrap`, default 99; 0 turns it off).
    pub bootstrap: usize,
    /// Seed of every random step (`[study] seed`).
    pub seed: u64,
}

/// Default replicates of the bootstrap of the decisive likelihood-ratio test:
/// 99, so that `(1 + k) / (B + 1)` is a multiple of 0.01 and its Monte Carlo
/// SE at p = 0.05 is 0.022 (common practice: Davison & Hinkley 1997, §4.2.5,
/// recommend 99 as a minimum for a test at 5 %; from memory).
pub const DEFAULT_BOOTSTRAP: usize = 99;

impl Default for VerdictOptions {
    fn default() -> Self {
        VerdictOptions {
            tie_delta: compare::DEFAULT_TIE_DELTA,
            draws: 20,
            bootstrap: DEFAULT_BOOTSTRAP,
            seed: 1,
        }
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
            if let Some(b) = v.bootstrap {
                o.bootstrap = b;
            }
        }
        Ok(o)
    }
}

pub(super) fn mean_sd(v: &[f64]) -> (f64, f64) {
    let n = v.len() as f64;
    let m = v.iter().sum::<f64>() / n;
    let var = v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (n - 1.0).max(1.0);
    (m, var.sqrt())
}

/// The 97.5 % point of Student's t on `df` degrees of freedom (at least 1).
/// Above [`T_EXPANSION_DF`] (and for an infinite `df`) by the expansion of
/// t about the normal quantile `z` to the `df⁻²` term, whose next term is
/// below 1e-17 there (Abramowitz & Stegun 1964, eq. 26.7.5): statrs' inverse
/// of the regularised incomplete beta function runs for minutes at such
/// `df`, which Rubin's degrees of freedom reach when the imputations barely
/// differ.
pub(super) fn t_quantile(df: f64) -> f64 {
    if df >= T_EXPANSION_DF {
        let z = 1.959_963_984_540_054_f64;
        let g1 = (z.powi(3) + z) / 4.0;
        let g2 = (5.0 * z.powi(5) + 16.0 * z.powi(3) + 3.0 * z) / 96.0;
        return z + g1 / df + g2 / (df * df);
    }
    StudentsT::new(0.0, 1.0, df.max(1.0)).map(|t| t.inverse_cdf(0.975)).unwrap_or(1.959964)
}

/// Degrees of freedom from which [`t_quantile`] uses the expansion.
const T_EXPANSION_DF: f64 = 1e6;

/// Load the study's `[model]` and `[verdict]` data and run the verdict: the
/// standalone `potclim verdict`, which reads the earlier stages' results from
/// `<output>/pot_covariates.csv` and `<output>/sensor_indicators.csv` (a run
/// of the whole pipeline passes them in memory to [`verdict_on`] instead).
pub fn run_verdict(study: &Study, opts: &VerdictOptions) -> Result<VerdictResult> {
    let mut spec = ModelSpec::from_study(study)?;
    let mut data = load_model_data(study, &spec)?;
    let added = crate::model::data::add_opening_drivers(study, &mut spec, &mut data);
    let climate: Vec<String> =
        spec.drivers.iter().filter(|d| !d.starts_with(DISTANCE_PREFIX)).cloned().collect();
    let sensor_values = load_sensor_values(study, &climate)?;
    let cov_path = study.output_dir().join(crate::model::data::COVARIATES_FILE);
    let covariates =
        if cov_path.exists() { Some(crate::model::data::PotCovariates::read(&cov_path)?) } else { None };
    let window_ses = match &covariates {
        Some(cov) => crate::model::data::window_ses(&crate::io::layout::load_pots(study)?, &data, cov),
        None => Vec::new(),
    };
    let mut r =
        verdict_on(&data, &spec, &added, &sensor_values, &window_ses, opts, &crate::model::progress::Silent)?;
    r.headline = Some(headline(&r, &data, covariates.as_ref()));
    Ok(r)
}

/// The verdict on loaded data: [`analyse`], then the uncertainty of each
/// mapped climate driver of the chosen model propagated from `sensor_values`
/// and the map's window SEs `window_ses` (per driver, aligned with
/// `data.pots`; [`crate::model::data::window_ses`]); a driver without sensor
/// values keeps its plug-in SE, one without window SEs gets the fallback
/// prior, and one whose imputations collapsed gets no pooled values, each
/// with a note.
/// `added` names the opening distances [`crate::model::data::add_opening_drivers`]
/// added. The pots left out for a missing trait value are listed in
/// [`VerdictResult::left_out`] and in a note. The grid's fits and the
/// imputations' refits are steps of `progress`.
pub fn verdict_on(
    data: &ModelData,
    spec: &ModelSpec,
    added: &[String],
    sensor_values: &[SensorValues],
    window_ses: &[(String, Vec<f64>)],
    opts: &VerdictOptions,
    progress: &dyn crate::model::progress::FitProgress,
) -> Result<VerdictResult> {
    let mut r = analyse_with(data, spec, opts, progress)?;
    r.left_out = data
        .excluded
        .iter()
        .map(|(pot, line)| LeftOutPot {
            pot: pot.clone(),
            line: *line,
            reason: format!("`{}` is missing", data.trait_name),
        })
        .collect();
    if !r.left_out.is_empty() {
        let list: Vec<String> = r.left_out.iter().map(|p| format!("{} (line {})", p.pot, p.line)).collect();
        r.notes.push(format!(
            "{} pot(s) left out because `{}` is missing: {}",
            r.left_out.len(),
            data.trait_name,
            list.join(", ")
        ));
    }
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
    if let Some(used) = r.likelihood.as_mut() {
        // the imputations need the dense prior covariance of the driver at the pots
        let why = format!(
            "the uncertainty of the mapped driver(s) {} is not propagated by imputation under the nearest-neighbour likelihood ({} neighbours): the imputation needs the dense n x n covariance of the driver at the pots; their SEs treat the mapped values as known",
            climate.iter().map(|d| format!("`{d}`")).collect::<Vec<_>>().join(", "),
            used.neighbours
        );
        used.replaced.push(why.clone());
        r.notes.push(why);
        return Ok(r);
    }
    let start = Instant::now();
    for d in &climate {
        let Some(sv) = sensor_values.iter().find(|s| &s.name == d) else {
            r.notes.push(format!(
                "`{d}`: no sensor-level values in {SENSOR_FILE} (or no [sensors] table), so the uncertainty of the mapped driver is not propagated; its SE treats the mapped values as known"
            ));
            continue;
        };
        let (t, f0) = (Instant::now(), crate::spatial::factor::factorisations_on_this_thread());
        let se = window_ses.iter().find(|(n, _)| n == d).map(|(_, v)| v.as_slice());
        let m = mapping_uncertainty_with(data, spec, &r.chosen_shape, sv, se, opts, progress)?;
        r.timings.imputations.push(ImputationTime {
            driver: d.clone(),
            refits: m.fits.len(),
            factorisations: (crate::spatial::factor::factorisations_on_this_thread() - f0) as usize
                + m.refit_factorisations,
            seconds: t.elapsed().as_secs_f64(),
        });
        if let Some(row) = r.drivers.iter_mut().find(|x| &x.name == d)
            && let (Some(pooled), Some(ci), None) = (&m.pooled, m.ci, &m.collapsed)
        {
            row.estimate_with_mapping_uncertainty = Some(pooled.estimate);
            row.se_with_mapping_uncertainty = Some(pooled.se);
            row.ci_low_with_mapping_uncertainty = Some(ci.0);
            row.ci_high_with_mapping_uncertainty = Some(ci.1);
        }
        r.mapping_notes.push(m.note.clone());
        r.notes.push(m.note);
    }
    r.seconds += start.elapsed().as_secs_f64();
    Ok(r)
}

/// Run the comparison grid, the verdict, the driver ranking and the adjusted
/// means on loaded data. Cost: one ML fit per grid model (each correlated fit
/// is a likelihood search of O(n³) evaluations), plus one REML refit.
pub fn analyse(data: &ModelData, spec: &ModelSpec, opts: &VerdictOptions) -> Result<VerdictResult> {
    analyse_with(data, spec, opts, &crate::model::progress::Silent)
}

/// [`analyse`], reporting each fit of the grid as a step of `progress`.
pub fn analyse_with(
    data: &ModelData,
    spec: &ModelSpec,
    opts: &VerdictOptions,
    progress: &dyn crate::model::progress::FitProgress,
) -> Result<VerdictResult> {
    let start = Instant::now();
    let n = data.response.len();
    // The likelihood first: a forced exact path too large for memory is
    // refused from the pot count, before any n x n allocation.
    let path = LikelihoodPath::for_data(spec, data)?;
    // Build the full design first: collinear drivers are refused here with their names.
    let full = design_for(data, spec, &spec.drivers)?;
    let dist = data.distances().map_err(|e| lerr("positions", e))?;
    let mut notes = Vec::new();
    let mut shared = Vec::new();
    let grid = fit_grid(data, spec, &full, &dist, &path, &mut notes, &mut shared, progress)?;
    let all: Vec<&GridFit> = grid.iter().collect();
    let (ranked, _) = rank_and_decide(&all, n, opts.tie_delta)?;
    let (verdict, calibration, chosen_reml) = self::calibrate::calibrated_verdict(
        data,
        spec,
        &grid,
        &dist,
        &path,
        opts.tie_delta,
        opts.bootstrap,
        opts.seed,
    )?;
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
    let chosen = match chosen_reml {
        Some(f) => f,
        None => fit(&chosen_design, data, &dist, chosen_ml.errors, LikelihoodKind::Reml, &path)?,
    };
    let base_design = design_for(data, spec, &[])?;
    let plain = fit_independent(&base_design, &data.response, LikelihoodKind::Reml)?;
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
    let mut replaced = Vec::new();
    let residual_check = residual_check(data, &chosen, moran_of(&chosen), &verdict.chosen, &mut replaced);

    let mut drivers = driver_summaries(data, &grid, &chosen, chosen_ml.errors, &verdict.chosen);
    for d in drivers.iter_mut() {
        if let Some((t, model)) = calibration.final_test(&d.name) {
            d.small_sample_model = Some(model.to_string());
            d.se_small_sample = Some(t.se);
            d.df_small_sample = Some(t.df);
            d.p_small_sample = Some(t.p_value);
            d.ci_low_small_sample = Some(t.ci.0);
            d.ci_high_small_sample = Some(t.ci.1);
        }
    }
    let smooth_shares = match path.dense_refused("the smooth share of each driver") {
        None => {
            ranking_small_sample(data, spec, &grid, &dist, &path, &mut drivers)?;
            smooth_shares_of(data, spec, &grid, &chosen, &verdict.chosen, &dist)?
        }
        Some(why) => {
            replaced.push(format!(
                "{why} (the leading eigenvectors of the residual correlation); the Kenward-Roger correction is not made either, for the same reason: the drivers' small-sample columns are the plug-in t"
            ));
            Vec::new()
        }
    };
    for sh in &smooth_shares {
        if let Some(d) = drivers.iter_mut().find(|d| d.name == sh.driver) {
            d.smooth_share = Some(sh.share);
        }
        if sh.indistinguishable {
            notes.push(format!(
                "`{}` and the residual field cannot be told apart with this layout: {:.0} % of the driver's variation (beyond the design) lies along the {} smoothest patterns of the fitted residual correlation (`{}`), where a driver without spatial pattern would have {:.0} %; an effect of `{}` and a smooth unmeasured effect are the same thing to these data",
                sh.driver,
                100.0 * sh.share,
                sh.eigenvectors,
                sh.correlation_model,
                100.0 * sh.expected_without_pattern,
                sh.driver
            ));
        }
    }
    let openings = openings_summary(&drivers);
    let adjusted_means = adjusted_means(data, spec, &chosen_design, &chosen, &base_design, &plain);
    let positions = (0..n).map(|i| (data.pots[i].clone(), data.x[i], data.y[i])).collect();
    let mut fit_times: Vec<FitTime> =
        grid.iter().map(|g| fit_time(&model_name(&g.drivers, &g.errors), &g.fit)).collect();
    fit_times.push(fit_time(&verdict.chosen, &chosen));
    let timings = Timings {
        threads: std::thread::available_parallelism().map(|t| t.get()).unwrap_or(1),
        fit_threads: self::grid::fit_threads(n),
        stages: Vec::new(),
        fits: fit_times,
        shared_grids: shared,
        imputations: Vec::new(),
        bootstraps: calibration.bootstrap_times(),
    };
    let likelihood = path.likelihood().neighbours().map(|m| {
        let used = LikelihoodUsed {
            likelihood: path.likelihood().name().into(),
            neighbours: m,
            setting: spec.likelihood.name().into(),
            exact_up_to: crate::model::likelihood_path::EXACT_UP_TO,
            replaced: replaced.clone(),
        };
        notes.insert(
            0,
            format!(
                "The correlated fits use {} ({n} pots; `[model] likelihood = \"{}\"`, exact up to {} pots): each approximated fit's log-likelihood, estimates, SEs and tests come from the approximation (`comparison.csv` names the likelihood of every fit). {}",
                path.likelihood().describe(),
                spec.likelihood.name(),
                crate::model::likelihood_path::EXACT_UP_TO,
                replaced.join("; ")
            ),
        );
        used
    });
    let structure_fits: Vec<(String, &Fit, f64)> =
        models.iter().map(|m| (m.name.clone(), &by_name(&m.name).fit, m.delta_aic)).collect();
    let structures =
        crate::model::structures::summarise(data, &structure_fits, &verdict.chosen, opts.tie_delta);
    Ok(VerdictResult {
        verdict: verdict.verdict.word().into(),
        reason: crate::model::structures::with_structure(
            &verdict.reason,
            &chosen_ml.fit,
            data.cells.is_some(),
        ),
        structures,
        best_model: verdict.chosen.clone(),
        best_by_aic: verdict.best_by_aic.clone(),
        options: opts.clone(),
        trait_name: data.trait_name.clone(),
        n_pots: n,
        left_out: Vec::new(),
        models,
        lrts,
        chosen_coefficients,
        residual_check,
        drivers,
        openings,
        adjusted_means,
        headline: None,
        calibration,
        smooth_shares,
        notes,
        n_fits: grid.len() + 2,
        seconds: start.elapsed().as_secs_f64(),
        timings,
        positions,
        plain_residuals: plain.residuals.clone(),
        chosen_residuals: chosen.residuals.clone(),
        plain_moran: moran_of(&plain),
        chosen_shape: (chosen_ml.drivers.clone(), chosen_ml.errors),
        // Type II: each term after every term that does not contain it, so a
        // factor's line does not depend on the order of the declaration.
        plain_anova: super::ols::anova(&base_design, &data.response, super::ols::SsType::Hierarchical).ok(),
        mapping_notes: Vec::new(),
        likelihood,
    })
}

/// The smooth share of every driver ([`crate::model::confounding`]) against
/// the chosen model's correlation (REML) when it has one, else the best
/// correlated base model of the grid (ML); empty when no correlation was fitted.
fn smooth_shares_of(
    data: &ModelData,
    spec: &ModelSpec,
    grid: &[GridFit],
    chosen: &Fit,
    chosen_name: &str,
    dist: &Distances,
) -> Result<Vec<crate::model::confounding::SmoothShare>> {
    let (params, model) = match chosen.covariance {
        Some(c) => (c.params, chosen_name.to_string()),
        None => match grid
            .iter()
            .filter(|g| g.drivers.is_empty() && g.fit.covariance.is_some())
            .min_by(|a, b| a.fit.aic.total_cmp(&b.fit.aic))
        {
            Some(g) => (g.fit.covariance.expect("filtered").params, model_name(&g.drivers, &g.errors)),
            None => return Ok(Vec::new()),
        },
    };
    let base = design_for(data, spec, &[])?;
    Ok(crate::model::confounding::smooth_shares(dist, &params, &model, &base.x, &data.drivers))
}

/// The timing row of one fit (an independent fit is closed form: no
/// evaluations counted, no factorisation of a covariance).
fn fit_time(model: &str, f: &Fit) -> FitTime {
    let (evaluations, factorisations, seconds) =
        f.search.as_ref().map(|s| (s.evaluations, s.factorisations, s.seconds)).unwrap_or((0, 0, 0.0));
    FitTime {
        model: model.to_string(),
        method: f.method.label().to_string(),
        evaluations,
        factorisations,
        seconds,
    }
}

/// The small-sample interval of the ranking rows that come from a model with
/// correlated errors and were not tested by the calibration (drivers outside
/// the chosen model): their plug-in interval treats the estimated range and
/// nugget as known, which is what Kenward & Roger (1997) correct. The row's
/// model is refitted by REML from its ML parameters
/// ([`super::gls::fit_correlated_from`]) and the driver's coefficient tested
/// as in the calibration (first-order Kenward-Roger,
/// [`crate::model::small_sample::kenward_roger`]). A row whose refit or
/// correction fails keeps only the plug-in interval.
fn ranking_small_sample(
    data: &ModelData,
    spec: &ModelSpec,
    grid: &[GridFit],
    dist: &Distances,
    path: &LikelihoodPath,
    drivers: &mut [DriverSummary],
) -> Result<()> {
    for d in drivers.iter_mut().filter(|d| d.se_small_sample.is_none()) {
        let Some(g) = grid.iter().find(|g| self::grid::model_name(&g.drivers, &g.errors) == d.source_model)
        else {
            continue;
        };
        let (super::gls::Errors::Correlated { nugget, .. }, Some(cov)) = (g.errors, g.fit.covariance) else {
            continue;
        };
        let design = design_for(data, spec, &g.drivers)?;
        let Ok(reml) = super::gls::fit_correlated_from(
            &d.source_model,
            &design,
            &data.response,
            dist,
            cov.params,
            nugget,
            LikelihoodKind::Reml,
            path,
        ) else {
            continue;
        };
        let (Some(c), Some(rcov)) = (reml.names.iter().position(|x| *x == d.name), reml.covariance) else {
            continue;
        };
        if let Ok(kr) = crate::model::small_sample::kenward_roger(
            dist,
            rcov.params,
            nugget,
            reml.sigma2,
            &design.x,
            &data.response,
            c,
        ) {
            d.se_small_sample = Some(kr.se);
            d.df_small_sample = Some(kr.df);
            d.p_small_sample = Some(kr.p_value);
            d.small_sample_model = Some(d.source_model.clone());
            d.ci_low_small_sample = Some(kr.ci.0);
            d.ci_high_small_sample = Some(kr.ci.1);
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests;
