//! The verdict stage's result types: [`VerdictResult`] and one row type per
//! table it holds (the grid, the likelihood-ratio tests, the chosen model's
//! coefficients and residual check, the driver ranking, the openings question
//! and the adjusted means). Plain data: serialised as `summary.json` and read
//! by the report.

use super::VerdictOptions;
use crate::model::gls::Errors;
use serde::Serialize;

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
    /// Range (metres) of correlated fits (of direction-dependent fits: the
    /// range parameter along the direction of greatest continuity).
    pub range: Option<f64>,
    /// Nugget share of correlated, rows x columns and direction-dependent fits.
    pub nugget_share: Option<f64>,
    /// The search converged (always for independent errors).
    pub converged: bool,
    /// Rows x columns: correlation of neighbours one row apart.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub row_correlation: Option<f64>,
    /// Rows x columns: correlation of neighbours one column apart.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub column_correlation: Option<f64>,
    /// Direction-dependent: direction of greatest continuity, degrees
    /// counter-clockwise from the x axis, in `[0, 180)`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub direction_degrees: Option<f64>,
    /// Direction-dependent: range across that direction over range along it, `(0, 1]`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub range_ratio: Option<f64>,
    /// The likelihood maximised (`exact` or `neighbours`); given only when
    /// the study used the nearest-neighbour likelihood (absent: exact).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub likelihood: Option<String>,
    /// Neighbours per pot of a fit on the nearest-neighbour likelihood.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub neighbours: Option<usize>,
}

/// How the correlated fits of a study were evaluated, when not exactly: in
/// `summary.json` only when the nearest-neighbour likelihood was used.
#[derive(Clone, Debug, Serialize)]
pub struct LikelihoodUsed {
    /// `neighbours`.
    pub likelihood: String,
    /// Neighbours per pot.
    pub neighbours: usize,
    /// `[model] likelihood` as set (`auto` or `neighbours`).
    pub setting: String,
    /// Pots up to which `auto` uses the exact likelihood.
    pub exact_up_to: usize,
    /// What was left out or replaced because it needs the dense `n x n`
    /// covariance, one sentence each.
    pub replaced: Vec<String>,
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
    /// Small-sample corrected SE (Kenward–Roger with correlated errors) in the
    /// chosen model; `None` when the driver is not in it.
    pub se_small_sample: Option<f64>,
    /// Its denominator degrees of freedom.
    pub df_small_sample: Option<f64>,
    /// Its p-value.
    pub p_small_sample: Option<f64>,
    /// Share of the driver's variation (beyond the design) along the smoothest
    /// patterns of the fitted residual correlation; `None` without one.
    pub smooth_share: Option<f64>,
    /// 95 % CI lower end from the corrected SE and df.
    pub ci_low_small_sample: Option<f64>,
    /// 95 % CI upper end.
    pub ci_high_small_sample: Option<f64>,
    /// The model whose REML refit gives the small-sample columns: the
    /// chosen model, `source_model`, or with independent errors chosen the
    /// correlated refit the driver was tested again in (docs/verdict.md).
    pub small_sample_model: Option<String>,
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

/// A pot of the pot table that the verdict does not analyse.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct LeftOutPot {
    /// Pot id.
    pub pot: String,
    /// Physical line in the pot table.
    pub line: usize,
    /// Why, in words (e.g. "`height` is missing").
    pub reason: String,
}

/// Everything the verdict stage computed.
#[derive(Clone, Debug, Serialize)]
pub struct VerdictResult {
    /// `covariate`, `correlation`, `both` or `none`.
    pub verdict: String,
    /// One sentence.
    pub reason: String,
    /// The rows x columns and direction-dependent models that are chosen or
    /// within the tie margin, in plain words with their evidence
    /// ([`crate::model::structures::summarise`]); absent from `summary.json`
    /// when empty.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub structures: Vec<crate::model::structures::StructureSummary>,
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
    /// Pots of the pot table left out of the analysis, each with its line and
    /// the reason (today: the trait value is missing).
    pub left_out: Vec<LeftOutPot>,
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
    /// The answer in plain numbers (typical effect, certainty, warnings,
    /// what next); set by [`super::headline::headline`] once the mapping
    /// uncertainty is known.
    pub headline: Option<super::headline::Headline>,
    /// How the chosen model's drivers were calibrated (small-sample tests,
    /// bootstrap of the decisive likelihood-ratio test, drivers set aside).
    pub calibration: super::calibrate::Calibration,
    /// Each driver's share of variation along the smoothest patterns of the
    /// fitted residual correlation ([`crate::model::confounding`]).
    pub smooth_shares: Vec<crate::model::confounding::SmoothShare>,
    /// Notes (skipped fits, mapping uncertainty not computed, ...).
    pub notes: Vec<String>,
    /// Fits made.
    pub n_fits: usize,
    /// Wall-clock time of the grid and refits, seconds.
    pub seconds: f64,
    /// Where the time went (docs/outputs.md, `timings`).
    pub timings: crate::model::timings::Timings,
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
    /// ANOVA (type II sums of squares, OLS) of the plain factorial model, for
    /// the report; `None` when it could not be computed.
    #[serde(skip)]
    pub plain_anova: Option<crate::model::ols::AnovaTable>,
    /// The technical notes on how each mapped driver's uncertainty was
    /// propagated (also in `notes`), which the report shows apart from the
    /// cautions.
    #[serde(skip)]
    pub mapping_notes: Vec<String>,
    /// The nearest-neighbour likelihood, when the correlated fits used it
    /// (absent from `summary.json` on the exact path).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub likelihood: Option<LikelihoodUsed>,
}
