//! The contract between the analysis stages and the report: [`ReportData`],
//! plain data for every section of `report.html`, serialised as
//! `report_data.json` so the page can be redrawn (`potclim report STUDY`)
//! without re-running the analysis.
//!
//! Everything here is already computed: values, standard errors, fitted
//! curves, test statistics. The renderer only formats, sorts for display and
//! draws. A stage that did not run leaves its section `None` (or its list
//! empty) and the page says what is missing and which command produces it.
//!
//! Units: positions and distances in metres; every value carries its unit as
//! a string written by the stage that produced it (`"°C h"`, `"mol m⁻² d⁻¹"`,
//! `"cm"`), so the report never guesses a unit.

use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// Everything the report shows, one field per section, in page order.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct ReportData {
    /// The study title (`[study].title`), shown as the page heading.
    pub title: String,
    /// The floor area, `[0, length] x [0, width]` in metres; maps fall back to
    /// the extent of the points when absent.
    #[serde(default)]
    pub compartment: Option<CompartmentSize>,
    /// Section 1: verdict, reason, driver table, cautions.
    #[serde(default)]
    pub verdict: Option<VerdictSection>,
    /// Section 2: pots, sensors, openings, design counts.
    #[serde(default)]
    pub layout: Option<LayoutSection>,
    /// Section 3: mapped indicators, sensor series, quality control.
    #[serde(default)]
    pub climate: Option<ClimateSection>,
    /// Pots that move: where the pots stood and whether the moves evened the
    /// drivers out (only with a move table; absent from `report_data.json`
    /// otherwise).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub moves: Option<super::moves::MovesSection>,
    /// Section 4: experimental variograms with fitted curves (indicators and
    /// model residuals); empty when no variogram was computed.
    #[serde(default)]
    pub variograms: Vec<VariogramPanel>,
    /// Section 5: model comparison, ANOVA, residual maps, Moran's I.
    #[serde(default)]
    pub models: Option<ModelsSection>,
    /// Section 6: adjusted means per factor level; empty when not computed.
    #[serde(default)]
    pub adjusted_means: Vec<AdjustedMean>,
    /// Unit of the trait the adjusted means are in (e.g. `"g"`).
    #[serde(default)]
    pub adjusted_means_unit: Option<String>,
    /// Section 7: inputs, study file, version, seed, run time.
    #[serde(default)]
    pub provenance: Option<Provenance>,
    /// Repeated scorings: when the climate acted (only with `[scores]` and
    /// two or more scoring times; absent from `report_data.json` otherwise).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub over_time: Option<super::over_time::OverTimeSection>,
}

/// The compartment rectangle.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct CompartmentSize {
    /// Extent along x, metres.
    pub length: f64,
    /// Extent along y, metres.
    pub width: f64,
}

/// Section 1: the answer.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct VerdictSection {
    /// One of `covariate`, `correlation`, `both`, `none`.
    pub word: String,
    /// One sentence in plain words, from the verdict rule.
    pub reason: String,
    /// Name of the model the verdict rests on.
    pub chosen_model: String,
    /// Name of the model with the smallest AIC, when it differs from the chosen one.
    #[serde(default)]
    pub best_by_aic: Option<String>,
    /// Unit of the trait the driver effects are expressed in (e.g. `"cm"`).
    #[serde(default)]
    pub trait_unit: Option<String>,
    /// One row per declared driver.
    #[serde(default)]
    pub drivers: Vec<DriverRow>,
    /// What the data can and cannot show, one sentence each, in plain words.
    #[serde(default)]
    pub cautions: Vec<String>,
    /// Technical notes on how the answer was computed (imputation settings,
    /// the sensor-level variogram), shown apart from the cautions.
    #[serde(default)]
    pub technical_notes: Vec<String>,
    /// The answer in plain numbers, as the verdict stage computed it
    /// (typical effect, certainty of the model choice, warnings, what next).
    #[serde(default)]
    pub headline: Option<crate::model::verdict::Headline>,
    /// Warnings of the mapping stage that weaken the answer (a variogram that
    /// fell back to its default model), one sentence each.
    #[serde(default)]
    pub map_warnings: Vec<String>,
    /// The rows x columns and direction-dependent residual models that the
    /// verdict chose or kept within its tie margin, in words with their
    /// evidence, as the verdict stage computed them.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub structures: Vec<crate::model::structures::StructureSummary>,
}

/// One driver of the chosen (or full driver) model.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct DriverRow {
    /// Driver name (e.g. `night_cold_hours`, `distance_door`).
    pub name: String,
    /// Unit of the driver (e.g. `"h"`, `"m"`).
    #[serde(default)]
    pub unit: Option<String>,
    /// Effect on the trait per unit of the driver, in trait units per driver unit.
    pub estimate: f64,
    /// Plug-in standard error of `estimate` (same units).
    pub se: f64,
    /// Estimate pooled over imputations of the mapped driver drawn given the
    /// loggers and the trait (Rubin's rules); `None` when not computed (e.g. a
    /// distance covariate, which is known exactly).
    #[serde(default)]
    pub estimate_with_mapping_uncertainty: Option<f64>,
    /// Standard error including the uncertainty of the mapped driver (Rubin's
    /// rules over the imputations); `None` when not computed.
    #[serde(default)]
    pub se_with_mapping_uncertainty: Option<f64>,
    /// 95 % confidence interval of the pooled estimate (t on Rubin's degrees
    /// of freedom): lower end; `None` when not computed.
    #[serde(default)]
    pub ci_low_with_mapping_uncertainty: Option<f64>,
    /// Upper end of that interval.
    #[serde(default)]
    pub ci_high_with_mapping_uncertainty: Option<f64>,
    /// Lower end of the 95 % confidence interval of `estimate`.
    pub ci_low: f64,
    /// Upper end of the 95 % confidence interval of `estimate`.
    pub ci_high: f64,
    /// Two-sided p-value of `estimate = 0`.
    #[serde(default)]
    pub p_value: Option<f64>,
    /// AIC of base model minus AIC of base + this driver, independent errors
    /// (positive: the driver helps).
    #[serde(default)]
    pub delta_aic: Option<f64>,
    /// The same with the best correlation family in both models.
    #[serde(default)]
    pub delta_aic_with_correlation: Option<f64>,
    /// Variance inflation factor against the other drivers (dimensionless).
    #[serde(default)]
    pub vif: Option<f64>,
    /// True when the effect vanishes once spatial correlation is modelled.
    #[serde(default)]
    pub confounded: bool,
    /// The small-sample test of the driver (docs/verdict.md, "A driver must
    /// survive calibration"); `None` when not computed.
    #[serde(default)]
    pub small_sample: Option<SmallSampleRow>,
}

/// A driver's small-sample interval: Kenward–Roger with correlated errors,
/// the exact t with independent errors, in the REML refit of `model`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct SmallSampleRow {
    /// Lower end of the 95 % interval (trait units per driver unit).
    pub ci_low: f64,
    /// Upper end.
    pub ci_high: f64,
    /// Two-sided p-value.
    pub p_value: f64,
    /// Denominator degrees of freedom.
    pub df: f64,
    /// The model whose REML refit made the test.
    pub model: String,
}

/// Section 2: where things stand.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct LayoutSection {
    /// Name of the trait the pots are coloured by (a column of the pot table).
    pub trait_name: String,
    /// Unit of the trait (e.g. `"cm"`).
    pub trait_unit: String,
    /// Every pot.
    pub pots: Vec<PotPoint>,
    /// Every sensor (logger) with a position.
    #[serde(default)]
    pub sensors: Vec<SensorPoint>,
    /// Every `[[openings]]` entry.
    #[serde(default)]
    pub openings: Vec<OpeningSegment>,
    /// Factor-by-factor pot counts (e.g. accession x treatment).
    #[serde(default)]
    pub counts: Option<CountTable>,
}

/// A pot and its trait value.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct PotPoint {
    /// Pot identifier.
    pub id: String,
    /// x, metres.
    pub x: f64,
    /// y, metres.
    pub y: f64,
    /// Trait value in the layout's unit; `None` for a missing value.
    #[serde(default)]
    pub value: Option<f64>,
}

/// A sensor position.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct SensorPoint {
    /// Sensor identifier.
    pub id: String,
    /// x, metres.
    pub x: f64,
    /// y, metres.
    pub y: f64,
    /// Set when the sensor table lists it but no export holds a reading of
    /// it: maps draw it greyed out.
    #[serde(default)]
    pub silent: bool,
}

/// A logger's own value of a mapped indicator (over the study period).
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct LoggerValue {
    /// Sensor identifier.
    pub id: String,
    /// The indicator at the logger over the study period, indicator unit;
    /// `None` when it has none (too few valid days).
    pub value: Option<f64>,
}

/// A door, vent, window or pad as a segment on the floor plan.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct OpeningSegment {
    /// Name of the opening.
    pub name: String,
    /// One end `[x, y]`, metres.
    pub from: [f64; 2],
    /// The other end `[x, y]`, metres.
    pub to: [f64; 2],
}

/// Pot counts of a two-way (or one-way, with one column) layout.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct CountTable {
    /// Factor on the rows (e.g. `accession`).
    pub row_factor: String,
    /// Factor on the columns (e.g. `treatment`).
    pub col_factor: String,
    /// Row levels in display order.
    pub row_levels: Vec<String>,
    /// Column levels in display order.
    pub col_levels: Vec<String>,
    /// `counts[i][j]`: pots with row level i and column level j.
    pub counts: Vec<Vec<u64>>,
}

/// Section 3: the climate.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct ClimateSection {
    /// One kriged surface per mapped indicator.
    #[serde(default)]
    pub surfaces: Vec<IndicatorSurface>,
    /// One small multiple per variable.
    #[serde(default)]
    pub series: Vec<DailySeries>,
    /// One row per logger file.
    #[serde(default)]
    pub qc: Vec<QcRow>,
    /// Runs of missing data on the regular time grid.
    #[serde(default)]
    pub gaps: Vec<GapRow>,
}

/// A mapped indicator at every pot, with its kriging standard error.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct IndicatorSurface {
    /// Indicator name (e.g. `night_cold_hours`).
    pub name: String,
    /// Unit of the value and of the SE (e.g. `"h"`).
    pub unit: String,
    /// Plain-words description (e.g. "hours below 12 °C between dusk and dawn").
    #[serde(default)]
    pub description: Option<String>,
    /// Value and SE at each pot.
    pub points: Vec<MappedValue>,
    /// Each logger's own value of the indicator, drawn on the map.
    #[serde(default)]
    pub loggers: Vec<LoggerValue>,
    /// The map checking itself: each logger left out in turn
    /// (`mapping_check.csv`); empty when the mapping stage made no check.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub checks: Vec<LoggerCheck>,
}

/// One logger left out of the map: its own value against the map made
/// without it ([`crate::spatial::selfcheck::SensorCheck`]).
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct LoggerCheck {
    /// Sensor identifier.
    pub sensor: String,
    /// The logger's own value over the study period, indicator unit.
    pub observed: f64,
    /// The value mapped at its position from the other loggers.
    pub predicted: f64,
    /// The standard error the map gives there (`None` without one).
    pub se: Option<f64>,
    /// `(predicted - observed) / se`.
    pub z: Option<f64>,
    /// `|z| > 2`: the map disagrees with the logger by more than its SE allows.
    pub flagged: bool,
    /// The openings this logger is the nearest logger to.
    #[serde(default)]
    pub nearest_to: Vec<String>,
}

/// A mapped value at one position.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct MappedValue {
    /// x, metres.
    pub x: f64,
    /// y, metres.
    pub y: f64,
    /// Predicted value, indicator unit.
    pub value: f64,
    /// Kriging standard error, indicator unit.
    pub se: f64,
}

/// Daily summaries of one variable, per sensor.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct DailySeries {
    /// Variable (e.g. "daily mean temperature").
    pub variable: String,
    /// Unit of the values (e.g. `"°C"`).
    pub unit: String,
    /// Calendar days (`YYYY-MM-DD`, local time), shared by all sensors.
    pub days: Vec<String>,
    /// One line per sensor.
    pub sensors: Vec<SensorSeries>,
}

/// One sensor's daily values.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct SensorSeries {
    /// Sensor identifier.
    pub sensor: String,
    /// One value per entry of [`DailySeries::days`]; `None` for a day without data.
    pub values: Vec<Option<f64>>,
}

/// Quality control of one logger file.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct QcRow {
    /// File name as given in the study file's glob.
    pub file: String,
    /// Data rows read.
    pub rows_read: u64,
    /// Rows kept without a flag.
    pub rows_kept: u64,
    /// Rows with at least one flag.
    pub rows_flagged: u64,
    /// Flagged readings per reason (e.g. `"out_of_range": 12`).
    #[serde(default)]
    pub reasons: BTreeMap<String, u64>,
}

/// A run of missing readings.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct GapRow {
    /// Sensor identifier.
    pub sensor: String,
    /// Variable (e.g. `temperature`).
    pub variable: String,
    /// First missing instant, RFC 3339.
    pub from: String,
    /// Last missing instant, RFC 3339.
    pub to: String,
    /// Length of the gap, hours.
    pub hours: f64,
}

/// An experimental variogram with the fitted model curves.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct VariogramPanel {
    /// What the variogram is of (e.g. `night_cold_hours` or `residuals of base`).
    pub subject: String,
    /// Unit of the semivariance (the square of the subject's unit, e.g. `"h²"`).
    pub unit: String,
    /// Lag bins.
    pub bins: Vec<VariogramBin>,
    /// One fitted curve per family; the first is marked with nugget, sill, range.
    #[serde(default)]
    pub fits: Vec<VariogramFit>,
}

/// One lag bin of an experimental variogram.
#[derive(Clone, Copy, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct VariogramBin {
    /// Mean pair distance in the bin, metres.
    pub lag: f64,
    /// Semivariance, squared subject unit.
    pub semivariance: f64,
    /// Number of point pairs in the bin.
    pub pairs: u64,
}

/// A fitted variogram model.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct VariogramFit {
    /// Family name (e.g. `exponential`, `matern_1.5`).
    pub family: String,
    /// Nugget, squared subject unit.
    pub nugget: f64,
    /// Total sill (nugget + partial sill), squared subject unit.
    pub sill: f64,
    /// Range parameter, metres.
    pub range: f64,
    /// Distance at which the correlation falls to 5 %, metres, when defined.
    #[serde(default)]
    pub practical_range: Option<f64>,
    /// The fitted curve evaluated by the producing stage, `(lag m, semivariance)`.
    pub curve: Vec<[f64; 2]>,
}

/// Section 5: the models.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct ModelsSection {
    /// Every ML fit of the comparison grid (rendered sorted by AIC).
    pub comparison: Vec<ComparisonRow>,
    /// ANOVA tables (plain factorial model, chosen model, ...).
    #[serde(default)]
    pub anova: Vec<AnovaTable>,
    /// Unit of the residuals (the trait unit).
    #[serde(default)]
    pub residual_unit: Option<String>,
    /// Residuals of the plain factorial model.
    #[serde(default)]
    pub residuals_before: Option<ResidualMap>,
    /// Residuals of the chosen model.
    #[serde(default)]
    pub residuals_after: Option<ResidualMap>,
    /// The ΔAIC tie margin of the verdict rule (AIC units), drawn on the bar chart.
    #[serde(default)]
    pub tie_margin: Option<f64>,
}

/// One row of the model comparison (the verdict's `ModelRow`).
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct ComparisonRow {
    /// Model name.
    pub name: String,
    /// Driver names in the fixed part.
    #[serde(default)]
    pub drivers: Vec<String>,
    /// Correlation family, `None` for independent errors.
    #[serde(default)]
    pub correlation: Option<String>,
    /// Whether a nugget was fitted.
    #[serde(default)]
    pub nugget: bool,
    /// ML log-likelihood.
    pub loglik: f64,
    /// AIC.
    pub aic: f64,
    /// BIC.
    pub bic: f64,
    /// Number of estimated parameters.
    pub n_params: u64,
    /// AIC minus the smallest AIC.
    pub delta_aic: f64,
    /// Akaike weight (0..1).
    pub akaike_weight: f64,
}

/// An ANOVA table of one model.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct AnovaTable {
    /// Model name.
    pub model: String,
    /// Kind of sums of squares or test (e.g. "sequential (type I) F tests").
    #[serde(default)]
    pub kind: Option<String>,
    /// Rows in display order (the residual row last).
    pub rows: Vec<AnovaRow>,
}

/// One term of an ANOVA table.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct AnovaRow {
    /// Term (e.g. `accession:treatment`, `residual`).
    pub term: String,
    /// Degrees of freedom.
    pub df: f64,
    /// Sum of squares (trait unit squared), when defined.
    #[serde(default)]
    pub sum_sq: Option<f64>,
    /// Mean square (trait unit squared), when defined.
    #[serde(default)]
    pub mean_sq: Option<f64>,
    /// F (or Wald F) statistic.
    #[serde(default)]
    pub f: Option<f64>,
    /// p-value.
    #[serde(default)]
    pub p_value: Option<f64>,
}

/// Residuals of one model at the pots.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct ResidualMap {
    /// Model name.
    pub model: String,
    /// One point per pot.
    pub points: Vec<ResidualPoint>,
    /// Moran's I of these residuals.
    #[serde(default)]
    pub moran: Option<MoranI>,
}

/// A residual at one pot.
#[derive(Clone, Copy, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct ResidualPoint {
    /// x, metres.
    pub x: f64,
    /// y, metres.
    pub y: f64,
    /// Residual, trait unit.
    pub residual: f64,
}

/// Moran's I of residuals.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct MoranI {
    /// The statistic I.
    pub i: f64,
    /// Its expectation under no autocorrelation, -1/(n-1).
    pub expectation: f64,
    /// Its variance under the null used.
    pub variance: f64,
    /// p-value of the test of no autocorrelation.
    pub p_value: f64,
    /// How the test was made: weights and alternative (e.g. "inverse
    /// distance within 3 m, normal approximation, one-sided: I > E\[I\]").
    #[serde(default)]
    pub note: Option<String>,
}

/// Section 6: a mean per factor level.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct AdjustedMean {
    /// Factor or factor combination (e.g. `accession`, `accession:treatment`).
    pub factor: String,
    /// Level (e.g. `A07`, `A07:cool`).
    pub level: String,
    /// Mean under the chosen model at the average drivers, trait unit.
    pub mean: f64,
    /// Its standard error, trait unit.
    pub se: f64,
    /// Mean under the plain factorial model, trait unit.
    pub plain_mean: f64,
    /// `mean - plain_mean`, trait unit (positive: the level was held back by its positions).
    pub change: f64,
}

/// Section 7: how the results were made.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct Provenance {
    /// Every input file.
    pub inputs: Vec<InputFile>,
    /// The study file's text.
    pub study_file: String,
    /// potclim version.
    pub tool_version: String,
    /// Seed of every random step.
    pub seed: u64,
    /// Start of the run, RFC 3339.
    pub started: String,
    /// Wall-clock duration of the run, seconds.
    #[serde(default)]
    pub seconds: Option<f64>,
}

/// An input file.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct InputFile {
    /// Path as written in (or matched from) the study file.
    pub path: String,
    /// Size, bytes.
    pub bytes: u64,
    /// SHA-256 of the content, lower-case hex.
    pub sha256: String,
}
