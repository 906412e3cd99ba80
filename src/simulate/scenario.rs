//! The scenario file: what a synthetic study looks like (layout, design,
//! climate field, loggers and their export formats, injected faults, the
//! trait and its true effects). Parsing rejects unknown keys with file, line
//! and column; [`Scenario::load`] then checks every value once and resolves
//! names (openings, factors, levels, loggers, exports), so that generation
//! never meets an unchecked value.
//!
//! The key-by-key documentation is `docs/simulate.md`; keep the two in step.

use super::error::{Result, SimError};
use crate::io::error::closest;
use crate::io::layouts::Layout;
use crate::io::qc::Reason;
use crate::io::study::{TimeColumns, delimiter_byte, parse_timezone, toml_error};
use crate::io::units::Channel;
use crate::spatial::correlation::Family;
use chrono::{NaiveDate, NaiveDateTime, NaiveTime, TimeZone, Utc};
use serde::Deserialize;
use std::path::{Path, PathBuf};

/// The raw scenario file, as written.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ScenarioSpec {
    /// `[scenario]`.
    pub scenario: Header,
    /// `[compartment]`.
    pub compartment: CompartmentSpec,
    /// `[layout]`.
    pub layout: LayoutSpec,
    /// `[design]`.
    pub design: DesignSpec,
    /// `[[opening]]`.
    #[serde(default)]
    pub opening: Vec<OpeningSpec>,
    /// `[climate]`.
    pub climate: ClimateSpec,
    /// `[[logger]]`.
    pub logger: Vec<LoggerSpec>,
    /// `[[export]]`.
    pub export: Vec<ExportSpec>,
    /// `[[fault]]`.
    #[serde(default)]
    pub fault: Vec<FaultSpec>,
    /// `[trait]`.
    #[serde(rename = "trait")]
    pub trait_: TraitSpec,
    /// `[analysis]`: what the written study file asks the later stages to do.
    #[serde(default)]
    pub analysis: Option<AnalysisSpec>,
    /// `[rotation]`: pots that move (see `simulate::rotation`).
    #[serde(default)]
    pub rotation: Option<super::rotation::RotationSpec>,
}

/// `[scenario]`.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Header {
    /// Title of the study.
    pub title: String,
    /// IANA time zone of the site.
    pub timezone: String,
    /// First local day of the study period (`2026-10-05`, from midnight).
    pub start: String,
    /// Local day after the study period (`2026-11-09`, exclusive, midnight).
    pub end: String,
    /// Logging interval: `"5m"`, `"10m"`, `"15m"`, `"30m"`, `"1h"`.
    pub step: String,
    /// Default seed when `--seed` is not given (default 1).
    #[serde(default)]
    pub seed: Option<u64>,
}

/// `[compartment]`: the rectangle `[0, length] x [0, width]`, metres; x runs
/// west to east, y south to north.
#[derive(Debug, Clone, Copy, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CompartmentSpec {
    /// Extent along x, metres.
    pub length: f64,
    /// Extent along y, metres.
    pub width: f64,
}

/// `[layout]`: where pots can stand.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LayoutSpec {
    /// `"benches"`, `"grid"` or `"list"`.
    pub kind: String,
    /// benches: number of benches (along y).
    pub benches: Option<usize>,
    /// benches: rows of pots per bench.
    pub rows_per_bench: Option<usize>,
    /// benches: slots per row (along x).
    pub slots_per_row: Option<usize>,
    /// benches: metres between the first rows of consecutive benches.
    pub bench_pitch: Option<f64>,
    /// benches: metres between rows within a bench.
    pub row_pitch: Option<f64>,
    /// benches: metres between slots along a row.
    pub slot_pitch: Option<f64>,
    /// grid: number of columns (along x).
    pub nx: Option<usize>,
    /// grid: number of rows (along y).
    pub ny: Option<usize>,
    /// grid: spacing along x, metres.
    pub dx: Option<f64>,
    /// grid: spacing along y, metres.
    pub dy: Option<f64>,
    /// benches and grid: position of the first pot, metres.
    pub origin: Option<[f64; 2]>,
    /// list: explicit positions `[[x, y], ...]`, metres.
    pub positions: Option<Vec<[f64; 2]>>,
}

/// `[design]`.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DesignSpec {
    /// `[[design.factor]]`: the crossed treatment factors.
    pub factor: Vec<FactorSpec>,
    /// Pots per treatment combination.
    pub replicates: usize,
    /// `"complete"` or `"blocks"` (randomised complete blocks, one block per bench).
    pub randomisation: String,
    /// Local sowing dates: by block (blocks) or cycled over replicates (complete).
    pub sowing: Vec<String>,
    /// Days from sowing to scoring.
    pub growth_days: u32,
}

/// `[[design.factor]]`.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FactorSpec {
    /// Column name in the pot table.
    pub name: String,
    /// Levels; the first is the reference level of the effects.
    pub levels: Vec<String>,
}

/// `[[opening]]`: a door, vent or pad as a segment.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct OpeningSpec {
    /// Letters, digits and `_`.
    pub name: String,
    /// One end, metres.
    pub from: [f64; 2],
    /// Other end, metres.
    pub to: [f64; 2],
}

/// `[climate]`.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ClimateSpec {
    /// Night air temperature at the reference point, °C.
    pub night_temperature: f64,
    /// Day air temperature at the reference point before solar gain, °C.
    pub day_temperature: f64,
    /// Local clock time the light comes on (`"08:00"`).
    pub sunrise: String,
    /// Local clock time the light goes off (`"18:00"`).
    pub sunset: String,
    /// Peak PPFD on a clear day, µmol m-2 s-1.
    pub peak_ppfd: f64,
    /// Lowest daily light factor (days draw uniformly from `[cloud_min, 1]`).
    #[serde(default = "one")]
    pub cloud_min: f64,
    /// Warming per 1000 µmol m-2 s-1 of PPFD, °C.
    #[serde(default)]
    pub solar_gain: f64,
    /// Standard deviation of the day-to-day weather offset, °C.
    #[serde(default)]
    pub weather_sd: f64,
    /// Lag-one autocorrelation of the daily weather offset, `[0, 1)`.
    #[serde(default)]
    pub weather_persistence: f64,
    /// Actual vapour pressure of the air, kPa (constant).
    pub vapour_pressure: f64,
    /// Temperature gradient `[along x, along y]`, °C per metre, about the centre.
    #[serde(default)]
    pub gradient: [f64; 2],
    /// `[[climate.draught]]`.
    #[serde(default)]
    pub draught: Vec<DraughtSpec>,
    /// `[[climate.shade]]`.
    #[serde(default)]
    pub shade: Vec<ShadeSpec>,
    /// `[climate.field]`: a static random temperature offset.
    #[serde(default)]
    pub field: Option<FieldSpec>,
    /// `[climate.noise]`.
    #[serde(default)]
    pub noise: NoiseSpec,
    /// `[[climate.spell]]`: runs of cold nights.
    #[serde(default)]
    pub spell: Vec<super::scorings::SpellSpec>,
}

fn one() -> f64 {
    1.0
}

/// `[[climate.draught]]`: cold air from an opening.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DraughtSpec {
    /// Name of an `[[opening]]`.
    pub opening: String,
    /// Cooling at the opening at night, °C.
    pub night_drop: f64,
    /// Cooling at the opening by day, °C.
    #[serde(default)]
    pub day_drop: f64,
    /// e-folding distance, metres.
    pub decay: f64,
}

/// `[[climate.shade]]`: light lost near a wall.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ShadeSpec {
    /// `"south"` (y = 0), `"north"` (y = width), `"west"` (x = 0), `"east"` (x = length).
    pub wall: String,
    /// Fraction of light lost at the wall, `[0, 1)`.
    pub reduction: f64,
    /// e-folding distance from the wall, metres.
    pub depth: f64,
}

/// A Gaussian random field: `family`, `range` (metres), `sill` (variance).
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FieldSpec {
    /// Correlation family name (`exponential`, `gaussian`, `spherical`, `matern_<nu>`).
    pub family: String,
    /// Range parameter, metres (convention of `spatial::correlation`).
    pub range: f64,
    /// Variance (°C² for the climate field, trait units² for the residual field).
    pub sill: f64,
}

/// `[climate.noise]`: sensor noise, independent per reading.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct NoiseSpec {
    /// Standard deviation, °C.
    #[serde(default)]
    pub temperature: f64,
    /// Standard deviation, % RH.
    #[serde(default)]
    pub humidity: f64,
    /// Relative standard deviation of PPFD (0.03 = 3 %).
    #[serde(default)]
    pub light: f64,
}

/// `[[logger]]`.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LoggerSpec {
    /// Sensor id.
    pub id: String,
    /// Position, metres.
    pub x: f64,
    /// Position, metres.
    pub y: f64,
    /// Height, metres (written to the sensor table only).
    #[serde(default)]
    pub z: Option<f64>,
    /// Name of the `[[export]]` format this logger writes.
    pub export: String,
}

/// `[[export]]`: one export format.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ExportSpec {
    /// Name: file `logs/<name>.<extension>` or folder `logs/<name>/`.
    pub name: String,
    /// `"one_file"` (all its loggers, rows by time then sensor) or
    /// `"file_per_logger"` (file stem = sensor id).
    pub layout: String,
    /// How each file is laid out: `"table"` (default: optional preamble,
    /// one header line, the keys below), or one of the recurring layouts
    /// that `[[logs]] layout` reads ([`crate::io::layouts::Layout`]), which
    /// fix the delimiter, the header lines, the time column and its pattern.
    #[serde(default)]
    pub form: Option<String>,
    /// Field delimiter (one character or `"tab"`). Default `,`.
    #[serde(default)]
    pub delimiter: Option<String>,
    /// Decimal mark `.` or `,`. Default `.`.
    #[serde(default)]
    pub decimal: Option<String>,
    /// chrono strftime pattern, `rfc3339` or `unix` (required for the
    /// table form; a recurring layout fixes its own, see [`Self::pattern`]).
    #[serde(default)]
    pub time_format: String,
    /// `"local"` (study zone) or `"utc"`. Default `local`.
    #[serde(default)]
    pub clock: Option<String>,
    /// Lines before the header; `{sensor}` is replaced by the sensor id.
    #[serde(default)]
    pub preamble: Vec<String>,
    /// Hours logged before the study period starts (rows outside the period).
    #[serde(default)]
    pub lead_hours: f64,
    /// File extension. Default `csv`.
    #[serde(default)]
    pub extension: Option<String>,
    /// `[export.columns]`.
    pub columns: ExportColumns,
}

impl ExportSpec {
    /// The recurring layout of `form`, or `None` for the table form (and
    /// for an unknown name, which [`Scenario::load`] refuses).
    pub fn form_layout(&self) -> Option<Layout> {
        self.form.as_deref().and_then(Layout::parse)
    }

    /// The time pattern the files are written with: `time_format`, or the
    /// one the recurring layout implies.
    pub fn pattern(&self) -> &str {
        match self.form_layout() {
            Some(l) => l.implied().time_format,
            None => &self.time_format,
        }
    }
}

/// `[export.columns]`.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ExportColumns {
    /// Time column name, or `[date, time]` for separate date and
    /// time-of-day columns (the pattern's text is cut at its first space).
    /// Required for the table form; a recurring layout names its own.
    #[serde(default)]
    pub time: Option<TimeColumns>,
    /// Sensor column name (one_file only).
    #[serde(default)]
    pub sensor: Option<String>,
    /// Temperature channel.
    #[serde(default)]
    pub temperature: Option<ExportChannel>,
    /// Humidity channel.
    #[serde(default)]
    pub humidity: Option<ExportChannel>,
    /// Light channel.
    #[serde(default)]
    pub light: Option<ExportChannel>,
}

/// `{ column, unit, decimals }`.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ExportChannel {
    /// Column name.
    pub column: String,
    /// Unit (see `docs/simulate.md`).
    pub unit: String,
    /// Decimals printed. Default 1.
    #[serde(default)]
    pub decimals: Option<usize>,
}

/// `[[fault]]`: a fault injected into one logger's export.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FaultSpec {
    /// `spike`, `stuck`, `gap`, `duplicate`, `out_of_range`,
    /// `unparsable_value`, `unparsable_time`, `fallback_single_pass`.
    pub kind: String,
    /// Logger id.
    pub logger: String,
    /// `temperature`, `humidity` or `light` (value faults).
    #[serde(default)]
    pub variable: Option<String>,
    /// Local time of a one-row fault.
    #[serde(default)]
    pub at: Option<String>,
    /// Local start of a lasting fault (stuck, gap).
    #[serde(default)]
    pub from: Option<String>,
    /// Duration of a lasting fault, hours.
    #[serde(default)]
    pub hours: Option<f64>,
    /// spike: added in SI units; out_of_range: the SI value written.
    #[serde(default)]
    pub value: Option<f64>,
    /// duplicate: extra copies of the row. Default 1.
    #[serde(default)]
    pub copies: Option<usize>,
    /// unparsable_value / unparsable_time: the text written.
    #[serde(default)]
    pub text: Option<String>,
}

/// `[trait]`.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TraitSpec {
    /// Column name in the pot table.
    pub name: String,
    /// Value at the reference levels with every driver at zero.
    pub intercept: f64,
    /// Standard deviation of the independent noise.
    pub noise_sd: f64,
    /// Decimals printed. Default 1.
    #[serde(default)]
    pub decimals: Option<usize>,
    /// Unit of the trait, copied to `[model].trait_unit`. Optional.
    #[serde(default)]
    pub unit: Option<String>,
    /// `[[trait.effect]]`.
    #[serde(default)]
    pub effect: Vec<EffectSpec>,
    /// `[[trait.interaction]]`.
    #[serde(default)]
    pub interaction: Vec<InteractionSpec>,
    /// `[[trait.indicator]]`.
    #[serde(default)]
    pub indicator: Vec<IndicatorSpec>,
    /// `[trait.residual_field]`.
    #[serde(default)]
    pub residual_field: Option<FieldSpec>,
    /// `[trait.scorings]`: repeated scorings from a daily growth model.
    #[serde(default)]
    pub scorings: Option<super::scorings::ScoringsSpec>,
    /// `[trait.residual_direction]`: makes the residual field's range
    /// direction-dependent.
    #[serde(default)]
    pub residual_direction: Option<DirectionSpec>,
    /// `[trait.residual_lattice]`: a rows x columns residual field.
    #[serde(default)]
    pub residual_lattice: Option<LatticeFieldSpec>,
}

/// `[trait.residual_direction]`: geometric anisotropy of the residual field
/// (`crate::spatial::anisotropy`): its `range` applies along `angle`, and
/// `ratio` times it across.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DirectionSpec {
    /// Direction of greatest continuity, degrees counter-clockwise from the x axis.
    pub angle: f64,
    /// Range across over range along, `(0, 1]`.
    pub ratio: f64,
}

/// `[trait.residual_lattice]`: a separable AR(1) x AR(1) field on the rows
/// (distinct y) and columns (distinct x) of the pots' grid
/// (`crate::spatial::rowcol`).
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LatticeFieldSpec {
    /// Correlation of pots one row apart, `(-1, 1)`.
    pub row_correlation: f64,
    /// Correlation of pots one column apart, `(-1, 1)`.
    pub column_correlation: f64,
    /// Variance, trait units².
    pub sill: f64,
}

/// `[[trait.effect]]`: a main effect against the first level.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct EffectSpec {
    /// Factor name.
    pub factor: String,
    /// Level (not the first).
    pub level: String,
    /// Trait units.
    pub value: f64,
}

/// `[[trait.interaction]]`: added to pots that have all the given levels.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct InteractionSpec {
    /// Two or more factor names.
    pub factors: Vec<String>,
    /// One level per factor.
    pub levels: Vec<String>,
    /// Trait units.
    pub value: f64,
}

/// `[[trait.indicator]]`: a climate indicator at each pot over its own
/// window, with a linear effect on the trait. Written as an `[[indicator]]`
/// of the study file.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct IndicatorSpec {
    /// Name (study-file indicator and driver name).
    pub name: String,
    /// `temperature`, `humidity`, `light` or `vpd`.
    pub variable: String,
    /// `mean`, `min`, `max`, `hours_below`, `hours_above` or `daily_integral`.
    pub statistic: String,
    /// Needed by `hours_below` / `hours_above`.
    #[serde(default)]
    pub threshold: Option<f64>,
    /// `all`, `day` or `night`. Default `all`.
    #[serde(default)]
    pub period: Option<String>,
    /// Trait units per indicator unit.
    pub effect: f64,
}

/// `[analysis]`.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AnalysisSpec {
    /// `[study].output` of the written study file. Default `output`.
    #[serde(default)]
    pub output: Option<String>,
    /// `[model].correlations`.
    #[serde(default)]
    pub correlations: Option<Vec<String>>,
    /// `[model].nugget`. Default true.
    #[serde(default)]
    pub nugget: Option<bool>,
    /// `[model].rows_columns`. Default false (not written).
    #[serde(default)]
    pub rows_columns: Option<bool>,
    /// `[model].directional`. Default none (not written).
    #[serde(default)]
    pub directional: Option<Vec<String>>,
}

/// A checked, resolved scenario.
#[derive(Debug, Clone)]
pub struct Scenario {
    /// The scenario file.
    pub path: PathBuf,
    /// What it says.
    pub spec: ScenarioSpec,
    /// Site time zone.
    pub tz: chrono_tz::Tz,
    /// Study period start (local midnight).
    pub start: NaiveDateTime,
    /// Study period end (local midnight, exclusive).
    pub end: NaiveDateTime,
    /// Logging interval, minutes.
    pub step_minutes: i64,
    /// Light on / off, hours after local midnight.
    pub sunrise_h: f64,
    /// Light off, hours after local midnight.
    pub sunset_h: f64,
    /// Pot positions available, with (bench, row, slot) when benches.
    pub positions: Vec<Position>,
    /// Sowing dates, parsed.
    pub sowing: Vec<NaiveDate>,
    /// Climate field family, if any.
    pub climate_field: Option<(Family, f64, f64)>,
    /// Residual trait field family, if any.
    pub residual_field: Option<(Family, f64, f64)>,
    /// Direction of the residual field's range, if direction-dependent.
    pub residual_direction: Option<crate::spatial::anisotropy::Direction>,
    /// Rows x columns residual field: row and column correlations, variance.
    pub residual_lattice: Option<crate::spatial::rowcol::RowColParams>,
    /// Its variance (trait units²); 0 without one.
    pub residual_lattice_sill: f64,
    /// Export index of every logger.
    pub logger_export: Vec<usize>,
    /// Runs of cold nights, checked.
    pub spells: Vec<super::scorings::Spell>,
    /// Repeated scorings, checked.
    pub scorings: Option<super::scorings::Scorings>,
}

/// A place a pot can stand.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Position {
    /// x, metres.
    pub x: f64,
    /// y, metres.
    pub y: f64,
    /// (bench, row, slot), 1-based, for bench layouts.
    pub grid: Option<(usize, usize, usize)>,
}

/// Fault kinds: the quality-control reasons that ingestion should report
/// for them (named by [`Reason::name`]), and two kinds that remove rows
/// (`gap`, `fallback_single_pass`).
pub const FAULT_KINDS: &[&str] = &[
    Reason::Spike.name(),
    Reason::Stuck.name(),
    "gap",
    Reason::Duplicate.name(),
    Reason::OutOfRange.name(),
    Reason::UnparsableValue.name(),
    Reason::UnparsableTime.name(),
    "fallback_single_pass",
];

impl Scenario {
    /// Read, parse and check a scenario file.
    pub fn load(path: &Path) -> Result<Scenario> {
        let source = std::fs::read_to_string(path)
            .map_err(|source| crate::io::IoError::Read { path: path.to_path_buf(), reason: source })?;
        Scenario::from_source(path, &source)
    }

    /// Parse and check scenario text; `path` is used in messages.
    pub fn from_source(path: &Path, source: &str) -> Result<Scenario> {
        let spec: ScenarioSpec = toml::from_str(source).map_err(|e| toml_error(path, source, &e))?;
        check(path, spec)
    }

    /// A [`SimError::Scenario`] about `key`.
    pub fn bad(&self, key: &str, message: impl Into<String>, hint: Option<String>) -> SimError {
        bad(&self.path, key, message, hint)
    }

    /// Parse a local date-time of the scenario (`2026-10-12 03:00`).
    pub fn local_time(&self, key: &str, v: &str) -> Result<NaiveDateTime> {
        crate::io::layout::parse_local_datetime(v).ok_or_else(|| {
            self.bad(
                key,
                format!("`{v}` is not a local date-time"),
                Some("write e.g. \"2026-10-12 03:00\"".into()),
            )
        })
    }

    /// Study period start and end as UTC instants.
    pub fn period_utc(&self) -> (chrono::DateTime<Utc>, chrono::DateTime<Utc>) {
        (local_to_utc(self.tz, self.start), local_to_utc(self.tz, self.end))
    }
}

/// A local time to UTC; for an ambiguous time the first occurrence, for a
/// nonexistent one the instant after the gap (checked away for the period).
pub fn local_to_utc(tz: chrono_tz::Tz, t: NaiveDateTime) -> chrono::DateTime<Utc> {
    match tz.from_local_datetime(&t) {
        chrono::LocalResult::Single(d) => d.with_timezone(&Utc),
        chrono::LocalResult::Ambiguous(a, _) => a.with_timezone(&Utc),
        chrono::LocalResult::None => {
            let later = t + chrono::Duration::hours(1);
            local_to_utc(tz, later)
        }
    }
}

fn bad(path: &Path, key: &str, message: impl Into<String>, hint: Option<String>) -> SimError {
    SimError::Scenario { path: path.to_path_buf(), key: key.to_string(), message: message.into(), hint }
}

/// [`bad`] for the sibling modules.
pub(super) fn bad_key(path: &Path, key: &str, message: impl Into<String>, hint: Option<String>) -> SimError {
    bad(path, key, message, hint)
}

/// [`date`] for the sibling modules.
pub(super) fn parse_date(p: &Path, key: &str, v: &str) -> Result<NaiveDate> {
    date(p, key, v)
}

fn did_you_mean<'a>(name: &str, candidates: impl IntoIterator<Item = &'a str> + Clone) -> Option<String> {
    let list: Vec<&str> = candidates.clone().into_iter().collect();
    match closest(name, candidates) {
        Some(c) => Some(format!("did you mean `{c}`? (expected one of: {})", list.join(", "))),
        None => Some(format!("expected one of: {}", list.join(", "))),
    }
}

fn one_of(path: &Path, key: &str, v: &str, allowed: &[&str]) -> Result<()> {
    if allowed.contains(&v) {
        Ok(())
    } else {
        Err(bad(path, key, format!("unknown value `{v}`"), did_you_mean(v, allowed.iter().copied())))
    }
}

fn positive(path: &Path, key: &str, v: Option<f64>) -> Result<f64> {
    match v {
        Some(v) if v.is_finite() && v > 0.0 => Ok(v),
        Some(v) => Err(bad(path, key, format!("must be a positive number of metres, got {v}"), None)),
        None => Err(bad(path, key, "is missing", None)),
    }
}

fn count(path: &Path, key: &str, v: Option<usize>) -> Result<usize> {
    match v {
        Some(v) if v > 0 => Ok(v),
        Some(_) => Err(bad(path, key, "must be at least 1", None)),
        None => Err(bad(path, key, "is missing", None)),
    }
}

fn clock(path: &Path, key: &str, v: &str) -> Result<f64> {
    let t = NaiveTime::parse_from_str(v.trim(), "%H:%M").map_err(|_| {
        bad(path, key, format!("`{v}` is not a clock time"), Some("write e.g. \"07:30\"".into()))
    })?;
    use chrono::Timelike;
    Ok(t.hour() as f64 + t.minute() as f64 / 60.0)
}

fn parse_step(path: &Path, v: &str) -> Result<i64> {
    let v = v.trim();
    let minutes = if let Some(m) = v.strip_suffix('m') {
        m.parse::<i64>().ok()
    } else if let Some(h) = v.strip_suffix('h') {
        h.parse::<i64>().ok().map(|h| h * 60)
    } else {
        None
    };
    match minutes {
        Some(m) if m > 0 && 1440 % m == 0 => Ok(m),
        _ => Err(bad(
            path,
            "scenario.step",
            format!("`{v}` is not a logging interval that divides a day"),
            Some("use e.g. \"5m\", \"10m\", \"15m\", \"1h\"".into()),
        )),
    }
}

fn parse_field(path: &Path, key: &str, f: &Option<FieldSpec>) -> Result<Option<(Family, f64, f64)>> {
    let Some(f) = f else { return Ok(None) };
    let family = Family::parse(&f.family).map_err(|m| bad(path, &format!("{key}.family"), m, None))?;
    let range = positive(path, &format!("{key}.range"), Some(f.range))?;
    if !(f.sill.is_finite() && f.sill >= 0.0) {
        return Err(bad(
            path,
            &format!("{key}.sill"),
            format!("must be a variance >= 0, got {}", f.sill),
            None,
        ));
    }
    Ok(Some((family, range, f.sill)))
}

fn inside(c: &CompartmentSpec, x: f64, y: f64) -> bool {
    x.is_finite() && y.is_finite() && (0.0..=c.length).contains(&x) && (0.0..=c.width).contains(&y)
}

/// A date of the scenario (`2026-10-05`).
fn date(p: &Path, key: &str, v: &str) -> Result<NaiveDate> {
    NaiveDate::parse_from_str(v.trim(), "%Y-%m-%d")
        .map_err(|_| bad(p, key, format!("`{v}` is not a date"), Some("write e.g. \"2026-10-05\"".into())))
}

/// The checked `[scenario]` section: zone, period and logging step.
struct Period {
    tz: chrono_tz::Tz,
    start_d: NaiveDate,
    end_d: NaiveDate,
    start: NaiveDateTime,
    end: NaiveDateTime,
    step_minutes: i64,
}

/// Check every section in reading order, each by its own function, and
/// resolve the names that later sections refer to.
fn check(path: &Path, spec: ScenarioSpec) -> Result<Scenario> {
    let p = path;
    let period = check_period(p, &spec.scenario)?;
    let c = spec.compartment;
    check_compartment(p, &c)?;
    let positions = check_layout(p, &spec.layout, &c)?;
    let (names, sowing) = check_design(p, &spec.design, &spec.layout, &positions, &period)?;
    let onames = check_openings(p, &spec.opening)?;
    let (sunrise_h, sunset_h, climate_field) = check_climate(p, &spec.climate, &onames)?;
    let enames = check_exports(p, &spec.export)?;
    let (lids, logger_export) = check_loggers(p, &spec, &c, &enames)?;
    check_faults(p, &spec, &lids, &logger_export)?;
    let residual_field = check_trait(p, &spec.trait_, &spec.design, &names)?;
    let (residual_direction, residual_lattice, residual_lattice_sill) =
        check_residual_structures(p, &spec.trait_, residual_field.is_some())?;
    check_analysis(p, spec.analysis.as_ref())?;
    let spells = super::scorings::check_spells(p, &spec.climate.spell, period.start_d, period.end_d)?;
    let scorings = super::scorings::check_scorings(
        p,
        spec.trait_.scorings.as_ref(),
        &spec.trait_.indicator,
        &sowing,
        spec.design.growth_days,
    )?;
    let Period { tz, start, end, step_minutes, .. } = period;
    Ok(Scenario {
        path: p.to_path_buf(),
        tz,
        start,
        end,
        step_minutes,
        sunrise_h,
        sunset_h,
        positions,
        sowing,
        climate_field,
        residual_field,
        residual_direction,
        residual_lattice,
        residual_lattice_sill,
        logger_export,
        spells,
        scorings,
        spec,
    })
}

/// `[trait.residual_direction]` (needs `[trait.residual_field]`; angle any
/// finite number of degrees, ratio in `(0, 1]`) and `[trait.residual_lattice]`
/// (correlations in `(-1, 1)`, variance >= 0).
#[allow(clippy::type_complexity)]
fn check_residual_structures(
    p: &Path,
    t: &TraitSpec,
    has_field: bool,
) -> Result<(Option<crate::spatial::anisotropy::Direction>, Option<crate::spatial::rowcol::RowColParams>, f64)>
{
    let direction = match &t.residual_direction {
        None => None,
        Some(_) if !has_field => {
            return Err(bad(
                p,
                "trait.residual_direction",
                "needs a [trait.residual_field] whose range it makes direction-dependent",
                Some("add [trait.residual_field] with family, range and sill".into()),
            ));
        }
        Some(d) => {
            if !d.angle.is_finite() {
                return Err(bad(
                    p,
                    "trait.residual_direction.angle",
                    format!("must be degrees, got {}", d.angle),
                    None,
                ));
            }
            if !(d.ratio > 0.0 && d.ratio <= 1.0) {
                return Err(bad(
                    p,
                    "trait.residual_direction.ratio",
                    format!("must lie in (0, 1], got {}", d.ratio),
                    Some("the range across the direction divided by the range along it".into()),
                ));
            }
            Some(crate::spatial::anisotropy::Direction { angle: d.angle.to_radians(), ratio: d.ratio })
        }
    };
    let (lattice, sill) = match &t.residual_lattice {
        None => (None, 0.0),
        Some(l) => {
            for (k, v) in
                [("row_correlation", l.row_correlation), ("column_correlation", l.column_correlation)]
            {
                if !(v.is_finite() && v.abs() < 1.0) {
                    return Err(bad(
                        p,
                        &format!("trait.residual_lattice.{k}"),
                        format!("must lie in (-1, 1), got {v}"),
                        None,
                    ));
                }
            }
            if !(l.sill.is_finite() && l.sill >= 0.0) {
                return Err(bad(
                    p,
                    "trait.residual_lattice.sill",
                    format!("must be a variance >= 0, got {}", l.sill),
                    None,
                ));
            }
            (
                Some(crate::spatial::rowcol::RowColParams {
                    phi_row: l.row_correlation,
                    phi_col: l.column_correlation,
                    eta: 0.0,
                }),
                l.sill,
            )
        }
    };
    Ok((direction, lattice, sill))
}

/// `[scenario]`: time zone, study period (local midnights that exist once)
/// and logging step.
fn check_period(p: &Path, sc: &Header) -> Result<Period> {
    let tz = parse_timezone(p, "scenario.timezone", &sc.timezone)?;
    let start_d = date(p, "scenario.start", &sc.start)?;
    let end_d = date(p, "scenario.end", &sc.end)?;
    if end_d <= start_d {
        return Err(bad(p, "scenario.end", "must be after scenario.start", None));
    }
    if (end_d - start_d).num_days() > 400 {
        return Err(bad(p, "scenario.end", "the study period is longer than 400 days", None));
    }
    let start = start_d.and_hms_opt(0, 0, 0).expect("midnight");
    let end = end_d.and_hms_opt(0, 0, 0).expect("midnight");
    for (k, t) in [("scenario.start", start), ("scenario.end", end)] {
        if !matches!(tz.from_local_datetime(&t), chrono::LocalResult::Single(_)) {
            return Err(bad(
                p,
                k,
                "local midnight of this day is skipped or repeated in this time zone",
                None,
            ));
        }
    }
    let step_minutes = parse_step(p, &sc.step)?;
    Ok(Period { tz, start_d, end_d, start, end, step_minutes })
}

/// `[compartment]`: positive length and width.
fn check_compartment(p: &Path, c: &CompartmentSpec) -> Result<()> {
    if !(c.length.is_finite() && c.length > 0.0 && c.width.is_finite() && c.width > 0.0) {
        return Err(bad(
            p,
            "compartment",
            format!("length and width must be positive metres, got {} x {}", c.length, c.width),
            None,
        ));
    }
    Ok(())
}

/// `[layout]`: the positions a pot can take, all inside the compartment.
fn check_layout(p: &Path, l: &LayoutSpec, c: &CompartmentSpec) -> Result<Vec<Position>> {
    let mut positions = Vec::new();
    match l.kind.as_str() {
        "benches" => {
            let nb = count(p, "layout.benches", l.benches)?;
            let nr = count(p, "layout.rows_per_bench", l.rows_per_bench)?;
            let ns = count(p, "layout.slots_per_row", l.slots_per_row)?;
            let bp = positive(p, "layout.bench_pitch", l.bench_pitch)?;
            let rp = if nr > 1 {
                positive(p, "layout.row_pitch", l.row_pitch)?
            } else {
                l.row_pitch.unwrap_or(0.0)
            };
            let sp = positive(p, "layout.slot_pitch", l.slot_pitch)?;
            if nr > 1 && (nr - 1) as f64 * rp >= bp {
                return Err(bad(
                    p,
                    "layout.row_pitch",
                    "the rows of one bench overlap the next bench",
                    Some("make rows_per_bench - 1 times row_pitch smaller than bench_pitch".into()),
                ));
            }
            let [ox, oy] = l.origin.unwrap_or([0.0, 0.0]);
            for b in 1..=nb {
                for r in 1..=nr {
                    for s in 1..=ns {
                        positions.push(Position {
                            x: ox + (s - 1) as f64 * sp,
                            y: oy + (b - 1) as f64 * bp + (r - 1) as f64 * rp,
                            grid: Some((b, r, s)),
                        });
                    }
                }
            }
        }
        "grid" => {
            let nx = count(p, "layout.nx", l.nx)?;
            let ny = count(p, "layout.ny", l.ny)?;
            let dx = positive(p, "layout.dx", l.dx)?;
            let dy = positive(p, "layout.dy", l.dy)?;
            let [ox, oy] = l.origin.unwrap_or([0.0, 0.0]);
            for j in 0..ny {
                for i in 0..nx {
                    positions.push(Position { x: ox + i as f64 * dx, y: oy + j as f64 * dy, grid: None });
                }
            }
        }
        "list" => {
            let Some(list) = &l.positions else {
                return Err(bad(
                    p,
                    "layout.positions",
                    "is missing",
                    Some("list [[x, y], ...] in metres".into()),
                ));
            };
            positions = list.iter().map(|&[x, y]| Position { x, y, grid: None }).collect();
        }
        other => {
            return Err(bad(
                p,
                "layout.kind",
                format!("unknown value `{other}`"),
                did_you_mean(other, ["benches", "grid", "list"]),
            ));
        }
    }
    for (i, q) in positions.iter().enumerate() {
        if !inside(c, q.x, q.y) {
            return Err(bad(
                p,
                "layout",
                format!(
                    "position {} at ({}, {}) lies outside the compartment {} x {} m",
                    i + 1,
                    q.x,
                    q.y,
                    c.length,
                    c.width
                ),
                Some("shrink the spacing or the counts, or move the origin".into()),
            ));
        }
    }
    Ok(positions)
}

/// `[design]`: factors and levels, replicates that fit the layout (and its
/// benches for blocks), sowing dates whose growth window lies in the period.
/// Returns the factor names and the sowing dates.
fn check_design(
    p: &Path,
    d: &DesignSpec,
    l: &LayoutSpec,
    positions: &[Position],
    period: &Period,
) -> Result<(std::collections::BTreeSet<String>, Vec<NaiveDate>)> {
    let (start_d, end_d) = (period.start_d, period.end_d);
    if d.factor.is_empty() {
        return Err(bad(p, "design.factor", "needs at least one factor", None));
    }
    let mut names = std::collections::BTreeSet::new();
    for (i, f) in d.factor.iter().enumerate() {
        let key = format!("design.factor[{}]", i + 1);
        if f.name.is_empty() || !f.name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_') {
            return Err(bad(
                p,
                &format!("{key}.name"),
                format!("`{}` must be letters, digits and `_`", f.name),
                None,
            ));
        }
        if !names.insert(f.name.clone()) {
            return Err(bad(p, &format!("{key}.name"), format!("`{}` is used twice", f.name), None));
        }
        if f.levels.len() < 2 {
            return Err(bad(p, &format!("{key}.levels"), "a factor needs at least two levels", None));
        }
        let mut seen = std::collections::BTreeSet::new();
        for lv in &f.levels {
            if lv.is_empty() || lv.contains([',', '"', '\n']) || !seen.insert(lv) {
                return Err(bad(
                    p,
                    &format!("{key}.levels"),
                    format!("level `{lv}` is empty, repeated or contains a comma or quote"),
                    None,
                ));
            }
        }
    }
    if d.replicates == 0 {
        return Err(bad(p, "design.replicates", "must be at least 1", None));
    }
    let combos: usize = d.factor.iter().map(|f| f.levels.len()).product();
    let n_pots = combos * d.replicates;
    if n_pots > positions.len() {
        return Err(bad(
            p,
            "design.replicates",
            format!(
                "{combos} treatment combinations x {} replicates = {n_pots} pots, but the layout has only {} positions",
                d.replicates,
                positions.len()
            ),
            Some("add benches, slots or positions, or use fewer replicates".into()),
        ));
    }
    one_of(p, "design.randomisation", &d.randomisation, &["complete", "blocks"])?;
    if d.randomisation == "blocks" {
        let (Some(nb), "benches") = (l.benches, l.kind.as_str()) else {
            return Err(bad(
                p,
                "design.randomisation",
                "blocks are benches: it needs layout.kind = \"benches\"",
                None,
            ));
        };
        if !d.replicates.is_multiple_of(nb) {
            return Err(bad(
                p,
                "design.replicates",
                format!("{} replicates cannot be split into {nb} complete blocks (benches)", d.replicates),
                Some(format!("use a multiple of {nb}")),
            ));
        }
        let per_bench = positions.len() / nb;
        if n_pots / nb > per_bench {
            return Err(bad(
                p,
                "design.replicates",
                format!("each bench would hold {} pots but has {per_bench} positions", n_pots / nb),
                None,
            ));
        }
    }
    if d.sowing.is_empty() {
        return Err(bad(p, "design.sowing", "needs at least one sowing date", None));
    }
    let mut sowing = Vec::new();
    for (i, s) in d.sowing.iter().enumerate() {
        let sd = date(p, &format!("design.sowing[{}]", i + 1), s)?;
        let scored = sd + chrono::Duration::days(d.growth_days as i64);
        if sd < start_d || scored > end_d {
            return Err(bad(
                p,
                &format!("design.sowing[{}]", i + 1),
                format!(
                    "the growth window {sd} .. {scored} is not inside the study period {start_d} .. {end_d}"
                ),
                Some(
                    "move the sowing date or change scenario.start / scenario.end / design.growth_days"
                        .into(),
                ),
            ));
        }
        sowing.push(sd);
    }
    if d.growth_days == 0 {
        return Err(bad(p, "design.growth_days", "must be at least 1", None));
    }
    Ok((names, sowing))
}

/// `[[opening]]`: unique names and finite coordinates. Returns the names.
fn check_openings<'a>(p: &Path, opening: &'a [OpeningSpec]) -> Result<std::collections::BTreeSet<&'a str>> {
    let mut onames = std::collections::BTreeSet::new();
    for (i, o) in opening.iter().enumerate() {
        let key = format!("opening[{}]", i + 1);
        if o.name.is_empty() || !o.name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_') {
            return Err(bad(
                p,
                &format!("{key}.name"),
                format!("`{}` must be letters, digits and `_`", o.name),
                None,
            ));
        }
        if !onames.insert(o.name.as_str()) {
            return Err(bad(p, &format!("{key}.name"), format!("`{}` is used twice", o.name), None));
        }
        if !o.from.iter().chain(&o.to).all(|v| v.is_finite()) {
            return Err(bad(p, &key, "coordinates must be finite numbers", None));
        }
    }
    Ok(onames)
}

/// `[climate]`: the day, plausible temperatures, light and vapour pressure,
/// draughts at known openings, shades, the field and the noise. Returns
/// sunrise and sunset (hours) and the climate field.
#[allow(clippy::type_complexity)]
fn check_climate(
    p: &Path,
    cl: &ClimateSpec,
    onames: &std::collections::BTreeSet<&str>,
) -> Result<(f64, f64, Option<(Family, f64, f64)>)> {
    let sunrise_h = clock(p, "climate.sunrise", &cl.sunrise)?;
    let sunset_h = clock(p, "climate.sunset", &cl.sunset)?;
    if sunset_h <= sunrise_h + 1.0 {
        return Err(bad(p, "climate.sunset", "must be more than an hour after climate.sunrise", None));
    }
    for (k, v) in
        [("climate.night_temperature", cl.night_temperature), ("climate.day_temperature", cl.day_temperature)]
    {
        if !(v.is_finite() && (-20.0..=45.0).contains(&v)) {
            return Err(bad(p, k, format!("{v} °C is not a plausible greenhouse temperature"), None));
        }
    }
    if !(cl.peak_ppfd.is_finite() && cl.peak_ppfd >= 0.0 && cl.peak_ppfd <= 2500.0) {
        return Err(bad(
            p,
            "climate.peak_ppfd",
            format!("{} is outside 0 .. 2500 µmol m-2 s-1", cl.peak_ppfd),
            None,
        ));
    }
    if !(cl.cloud_min > 0.0 && cl.cloud_min <= 1.0) {
        return Err(bad(p, "climate.cloud_min", "must be in (0, 1]", None));
    }
    if !(cl.weather_sd.is_finite() && cl.weather_sd >= 0.0) {
        return Err(bad(p, "climate.weather_sd", "must be >= 0", None));
    }
    if !(0.0..1.0).contains(&cl.weather_persistence) {
        return Err(bad(p, "climate.weather_persistence", "must be in [0, 1)", None));
    }
    if !(cl.vapour_pressure.is_finite() && cl.vapour_pressure > 0.0 && cl.vapour_pressure < 7.0) {
        return Err(bad(
            p,
            "climate.vapour_pressure",
            format!("{} kPa is not a plausible vapour pressure", cl.vapour_pressure),
            Some("greenhouse air holds about 0.8 .. 2.5 kPa".into()),
        ));
    }
    for (i, dr) in cl.draught.iter().enumerate() {
        let key = format!("climate.draught[{}]", i + 1);
        if !onames.contains(dr.opening.as_str()) {
            return Err(bad(
                p,
                &format!("{key}.opening"),
                format!("no [[opening]] is called `{}`", dr.opening),
                did_you_mean(&dr.opening, onames.iter().copied()),
            ));
        }
        positive(p, &format!("{key}.decay"), Some(dr.decay))?;
        if !(dr.night_drop.is_finite() && dr.day_drop.is_finite()) {
            return Err(bad(p, &key, "night_drop and day_drop must be numbers", None));
        }
    }
    for (i, s) in cl.shade.iter().enumerate() {
        let key = format!("climate.shade[{}]", i + 1);
        one_of(p, &format!("{key}.wall"), &s.wall, &["south", "north", "west", "east"])?;
        if !(0.0..1.0).contains(&s.reduction) {
            return Err(bad(p, &format!("{key}.reduction"), "must be in [0, 1)", None));
        }
        positive(p, &format!("{key}.depth"), Some(s.depth))?;
    }
    let climate_field = parse_field(p, "climate.field", &cl.field)?;
    for (k, v) in [
        ("climate.noise.temperature", cl.noise.temperature),
        ("climate.noise.humidity", cl.noise.humidity),
        ("climate.noise.light", cl.noise.light),
    ] {
        if !(v.is_finite() && v >= 0.0) {
            return Err(bad(p, k, "must be a standard deviation >= 0", None));
        }
    }
    Ok((sunrise_h, sunset_h, climate_field))
}

/// `[[export]]`: names, layout, delimiter and decimal mark, clock and time
/// format, lead time, columns and units (the units ingestion converts).
/// Returns the export names.
fn check_exports<'a>(p: &Path, export: &'a [ExportSpec]) -> Result<Vec<&'a str>> {
    let mut enames = Vec::new();
    for (i, e) in export.iter().enumerate() {
        let key = |k: &str| format!("export[{}].{k}", i + 1);
        if e.name.is_empty() || !e.name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_' || c == '-') {
            return Err(bad(
                p,
                &key("name"),
                format!("`{}` must be letters, digits, `_` and `-`", e.name),
                None,
            ));
        }
        if enames.contains(&e.name.as_str()) {
            return Err(bad(p, &key("name"), format!("`{}` is used twice", e.name), None));
        }
        enames.push(e.name.as_str());
        one_of(p, &key("layout"), &e.layout, &["one_file", "file_per_logger"])?;
        let mut forms = vec!["table"];
        forms.extend(Layout::ALL.iter().map(|l| l.name()));
        one_of(p, &key("form"), e.form.as_deref().unwrap_or("table"), &forms)?;
        one_of(p, &key("clock"), e.clock.as_deref().unwrap_or("local"), &["local", "utc"])?;
        match e.form_layout() {
            Some(form) => check_layout_form(p, &key, e, form)?,
            None => check_table_form(p, &key, e)?,
        }
        if !(e.lead_hours.is_finite() && e.lead_hours >= 0.0 && e.lead_hours <= 72.0) {
            return Err(bad(p, &key("lead_hours"), "must be between 0 and 72 hours", None));
        }
        let cols = &e.columns;
        if cols.temperature.is_none() && cols.humidity.is_none() && cols.light.is_none() {
            return Err(bad(p, &key("columns"), "writes no channel", None));
        }
        // The units ingestion converts, so that every simulated export reads back.
        for (ch, c) in Channel::ALL.into_iter().zip([&cols.temperature, &cols.humidity, &cols.light]) {
            if let Some(c) = c {
                one_of(p, &key(&format!("columns.{ch}.unit")), &c.unit, ch.unit_names())?;
                if c.decimals.unwrap_or(1) > 6 {
                    return Err(bad(p, &key(&format!("columns.{ch}.decimals")), "at most 6", None));
                }
            }
        }
    }
    Ok(enames)
}

/// The keys of an `[[export]]` in the table form: the time pattern (printed
/// and read back), the time column(s), delimiter and decimal mark, and the
/// sensor column that a one_file export needs.
fn check_table_form(p: &Path, key: &dyn Fn(&str) -> String, e: &ExportSpec) -> Result<()> {
    if e.time_format.is_empty() {
        return Err(bad(
            p,
            &key("time_format"),
            "is required (a chrono strftime pattern, \"rfc3339\" or \"unix\")",
            None,
        ));
    }
    match &e.columns.time {
        None => return Err(bad(p, &key("columns.time"), "is required", None)),
        Some(TimeColumns::Split(v)) => {
            if v.len() != 2 || v.iter().any(|c| c.is_empty()) {
                return Err(bad(
                    p,
                    &key("columns.time"),
                    "is one column name, or two: [date column, time column]",
                    None,
                ));
            }
            let probe =
                NaiveDate::from_ymd_opt(2026, 1, 2).and_then(|d| d.and_hms_opt(3, 4, 0)).expect("valid");
            let mut text = String::new();
            let no_space = matches!(e.time_format.as_str(), "rfc3339" | "unix") || {
                use std::fmt::Write;
                // An invalid pattern is refused below, with its own message.
                write!(text, "{}", probe.format(&e.time_format)).is_ok() && !text.contains(' ')
            };
            if no_space {
                return Err(bad(
                    p,
                    &key("columns.time"),
                    format!(
                        "separate date and time columns need a time_format with a space between date and time, not `{}`",
                        e.time_format
                    ),
                    Some("e.g. time_format = \"%d/%m/%Y %H:%M\"".into()),
                ));
            }
        }
        Some(TimeColumns::One(_)) => {}
    }
    let delim = delimiter_byte(e.delimiter.as_deref().unwrap_or(","))
        .map_err(|m| bad(p, &key("delimiter"), m, None))?;
    let dec = e.decimal.as_deref().unwrap_or(".");
    one_of(p, &key("decimal"), dec, &[".", ","])?;
    if dec == "," && delim == b',' {
        return Err(bad(
            p,
            &key("decimal"),
            "a decimal comma needs a delimiter other than `,`",
            Some("set delimiter = \";\"".into()),
        ));
    }
    if e.time_format != "rfc3339" && e.time_format != "unix" {
        let probe = NaiveDate::from_ymd_opt(2026, 1, 2).and_then(|d| d.and_hms_opt(3, 4, 0)).expect("valid");
        let mut s = String::new();
        use std::fmt::Write;
        let round_trips = write!(s, "{}", probe.format(&e.time_format)).is_ok()
            && NaiveDateTime::parse_from_str(&s, &e.time_format).ok() == Some(probe);
        if !round_trips {
            return Err(bad(
                p,
                &key("time_format"),
                format!("`{}` does not print and read back a date and time to the minute", e.time_format),
                Some("use e.g. \"%Y-%m-%d %H:%M:%S\" or \"%d.%m.%Y %H:%M\"".into()),
            ));
        }
    }
    match (e.layout.as_str(), &e.columns.sensor) {
        ("one_file", None) => {
            return Err(bad(p, &key("columns.sensor"), "a one_file export needs a sensor column", None));
        }
        ("file_per_logger", Some(_)) => {
            return Err(bad(
                p,
                &key("columns.sensor"),
                "a file_per_logger export names the sensor by its file stem; remove this key",
                None,
            ));
        }
        _ => {}
    }
    Ok(())
}

/// The keys of an `[[export]]` written in a recurring layout: one file per
/// logger (the layout writes the sensor id in its header), and none of the
/// keys the layout fixes (delimiter, decimal mark, time pattern and column,
/// preamble, sensor column). A titled export writes a serial number into
/// every channel header, so a lux channel (whose column a study block must
/// name) cannot have one name across files.
fn check_layout_form(p: &Path, key: &dyn Fn(&str) -> String, e: &ExportSpec, form: Layout) -> Result<()> {
    let fixed = |k: &str, set: bool| -> Result<()> {
        match set {
            true => {
                Err(bad(p, &key(k), format!("form \"{}\" fixes this; remove the key", form.name()), None))
            }
            false => Ok(()),
        }
    };
    fixed("delimiter", e.delimiter.is_some())?;
    fixed("decimal", e.decimal.is_some())?;
    fixed("time_format", !e.time_format.is_empty())?;
    fixed("preamble", !e.preamble.is_empty())?;
    fixed("columns.time", e.columns.time.is_some())?;
    fixed("columns.sensor", e.columns.sensor.is_some())?;
    if e.layout != "file_per_logger" {
        return Err(bad(
            p,
            &key("layout"),
            format!("form \"{}\" writes one logger per file: set layout = \"file_per_logger\"", form.name()),
            None,
        ));
    }
    if form == Layout::TitledExport && e.columns.light.as_ref().is_some_and(|c| c.unit.starts_with("lux")) {
        return Err(bad(
            p,
            &key("columns.light.unit"),
            "a titled export names each channel with its logger's serial number, so a lux channel has no one column name for the study file",
            Some("use unit = \"umol_m2_s\" or \"w_m2_shortwave\"".into()),
        ));
    }
    Ok(())
}

/// `[[logger]]`: unique ids inside the compartment, each writing a known
/// export, and every export written by some logger. Returns the ids and the
/// export index of every logger.
fn check_loggers<'a>(
    p: &Path,
    spec: &'a ScenarioSpec,
    c: &CompartmentSpec,
    enames: &[&str],
) -> Result<(Vec<&'a str>, Vec<usize>)> {
    if spec.logger.is_empty() {
        return Err(bad(p, "logger", "needs at least one [[logger]]", None));
    }
    let mut lids: Vec<&str> = Vec::new();
    let mut logger_export = Vec::new();
    for (i, lg) in spec.logger.iter().enumerate() {
        let key = |k: &str| format!("logger[{}].{k}", i + 1);
        if lg.id.is_empty() || !lg.id.chars().all(|c| c.is_ascii_alphanumeric() || c == '_' || c == '-') {
            return Err(bad(
                p,
                &key("id"),
                format!("`{}` must be letters, digits, `_` and `-`", lg.id),
                None,
            ));
        }
        if lids.contains(&lg.id.as_str()) {
            return Err(bad(p, &key("id"), format!("`{}` is used twice", lg.id), None));
        }
        lids.push(&lg.id);
        if !inside(c, lg.x, lg.y) {
            return Err(bad(
                p,
                &key("x"),
                format!("({}, {}) lies outside the compartment", lg.x, lg.y),
                None,
            ));
        }
        match enames.iter().position(|n| *n == lg.export) {
            Some(j) => logger_export.push(j),
            None => {
                return Err(bad(
                    p,
                    &key("export"),
                    format!("no [[export]] is called `{}`", lg.export),
                    did_you_mean(&lg.export, enames.iter().copied()),
                ));
            }
        }
    }
    for (j, e) in spec.export.iter().enumerate() {
        if !logger_export.contains(&j) {
            return Err(bad(
                p,
                &format!("export[{}]", j + 1),
                format!("no logger writes export `{}`", e.name),
                None,
            ));
        }
    }
    Ok((lids, logger_export))
}

/// `[[fault]]`: kinds, loggers and the keys each kind needs (names only;
/// times are checked when the rows exist).
fn check_faults(p: &Path, spec: &ScenarioSpec, lids: &[&str], logger_export: &[usize]) -> Result<()> {
    for (i, f) in spec.fault.iter().enumerate() {
        let key = |k: &str| format!("fault[{}].{k}", i + 1);
        one_of(p, &key("kind"), &f.kind, FAULT_KINDS)?;
        let Some(li) = lids.iter().position(|l| *l == f.logger) else {
            return Err(bad(
                p,
                &key("logger"),
                format!("no [[logger]] is called `{}`", f.logger),
                did_you_mean(&f.logger, lids.iter().copied()),
            ));
        };
        let needs_var = matches!(f.kind.as_str(), "spike" | "stuck" | "out_of_range" | "unparsable_value");
        if needs_var {
            let Some(v) = &f.variable else {
                return Err(bad(
                    p,
                    &key("variable"),
                    format!("a {} fault needs variable = temperature | humidity | light", f.kind),
                    None,
                ));
            };
            one_of(p, &key("variable"), v, &["temperature", "humidity", "light"])?;
            let cols = &spec.export[logger_export[li]].columns;
            let has = match v.as_str() {
                "temperature" => cols.temperature.is_some(),
                "humidity" => cols.humidity.is_some(),
                _ => cols.light.is_some(),
            };
            if !has {
                return Err(bad(
                    p,
                    &key("variable"),
                    format!("logger `{}` writes no {v} channel", f.logger),
                    None,
                ));
            }
        }
        let lasting = matches!(f.kind.as_str(), "stuck" | "gap");
        if lasting {
            if f.from.is_none() {
                return Err(bad(
                    p,
                    &key("from"),
                    format!("a {} fault needs from = \"<local date-time>\"", f.kind),
                    None,
                ));
            }
            match f.hours {
                Some(h) if h > 0.0 && h.is_finite() => {}
                _ => return Err(bad(p, &key("hours"), format!("a {} fault needs hours > 0", f.kind), None)),
            }
        } else if f.kind != "fallback_single_pass" && f.at.is_none() {
            return Err(bad(
                p,
                &key("at"),
                format!("a {} fault needs at = \"<local date-time>\"", f.kind),
                None,
            ));
        }
        if matches!(f.kind.as_str(), "spike" | "out_of_range") && f.value.is_none_or(|v| !v.is_finite()) {
            return Err(bad(
                p,
                &key("value"),
                format!("a {} fault needs a numeric value (SI units)", f.kind),
                None,
            ));
        }
        if f.kind == "fallback_single_pass" {
            let e = &spec.export[logger_export[li]];
            if e.clock.as_deref().unwrap_or("local") != "local"
                || e.pattern() == "rfc3339"
                || e.pattern() == "unix"
                || e.form_layout() == Some(Layout::TitledExport)
            {
                return Err(bad(
                    p,
                    &key("kind"),
                    "fallback_single_pass needs an export on local clock time without offset",
                    None,
                ));
            }
        }
    }
    Ok(())
}

/// `[trait]`: its name, noise, effects and interactions of known levels,
/// climate drivers and the residual field. Returns the residual field.
fn check_trait(
    p: &Path,
    t: &TraitSpec,
    d: &DesignSpec,
    names: &std::collections::BTreeSet<String>,
) -> Result<Option<(Family, f64, f64)>> {
    if t.name.is_empty()
        || !t.name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_')
        || names.contains(&t.name)
    {
        return Err(bad(
            p,
            "trait.name",
            format!("`{}` must be letters, digits and `_`, and not a factor name", t.name),
            None,
        ));
    }
    if !(t.noise_sd.is_finite() && t.noise_sd >= 0.0) {
        return Err(bad(p, "trait.noise_sd", "must be a standard deviation >= 0", None));
    }
    let level_of = |key: &str, factor: &str, level: &str| -> Result<()> {
        let Some(f) = d.factor.iter().find(|f| f.name == factor) else {
            return Err(bad(
                p,
                key,
                format!("unknown factor `{factor}`"),
                did_you_mean(factor, d.factor.iter().map(|f| f.name.as_str())),
            ));
        };
        if !f.levels.iter().any(|l| l == level) {
            return Err(bad(
                p,
                key,
                format!("factor `{factor}` has no level `{level}`"),
                did_you_mean(level, f.levels.iter().map(String::as_str)),
            ));
        }
        Ok(())
    };
    for (i, e) in t.effect.iter().enumerate() {
        let key = format!("trait.effect[{}]", i + 1);
        level_of(&format!("{key}.level"), &e.factor, &e.level).map_err(|err| match &err {
            SimError::Scenario { message, .. } if message.starts_with("unknown factor") => bad(
                p,
                &format!("{key}.factor"),
                message.clone(),
                did_you_mean(&e.factor, d.factor.iter().map(|f| f.name.as_str())),
            ),
            _ => err,
        })?;
        if d.factor.iter().any(|f| f.name == e.factor && f.levels[0] == e.level) {
            return Err(bad(
                p,
                &format!("{key}.level"),
                format!(
                    "`{}` is the reference level of `{}` (its effect is 0 by definition)",
                    e.level, e.factor
                ),
                Some("give effects of the other levels against the first".into()),
            ));
        }
    }
    for (i, e) in t.interaction.iter().enumerate() {
        let key = format!("trait.interaction[{}]", i + 1);
        if e.factors.len() < 2 || e.factors.len() != e.levels.len() {
            return Err(bad(p, &key, "needs two or more factors and one level per factor", None));
        }
        for (f, lv) in e.factors.iter().zip(&e.levels) {
            level_of(&format!("{key}.levels"), f, lv)?;
        }
    }
    let mut inames = std::collections::BTreeSet::new();
    for (i, ind) in t.indicator.iter().enumerate() {
        let key = |k: &str| format!("trait.indicator[{}].{k}", i + 1);
        if ind.name.is_empty()
            || !ind.name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_')
            || !inames.insert(ind.name.clone())
        {
            return Err(bad(
                p,
                &key("name"),
                format!("`{}` must be letters, digits and `_`, and unique", ind.name),
                None,
            ));
        }
        one_of(p, &key("variable"), &ind.variable, &["temperature", "humidity", "light", "vpd"])?;
        one_of(
            p,
            &key("statistic"),
            &ind.statistic,
            &["mean", "min", "max", "hours_below", "hours_above", "daily_integral"],
        )?;
        one_of(p, &key("period"), ind.period.as_deref().unwrap_or("all"), &["all", "day", "night"])?;
        if matches!(ind.statistic.as_str(), "hours_below" | "hours_above")
            && ind.threshold.is_none_or(|v| !v.is_finite())
        {
            return Err(bad(p, &key("threshold"), format!("{} needs a threshold", ind.statistic), None));
        }
        if ind.statistic == "daily_integral"
            && (ind.variable != "light" || ind.period.as_deref().unwrap_or("all") != "all")
        {
            return Err(bad(
                p,
                &key("statistic"),
                "daily_integral is the daily light integral: variable = \"light\", period = \"all\"",
                None,
            ));
        }
        if !ind.effect.is_finite() {
            return Err(bad(p, &key("effect"), "must be a number", None));
        }
    }
    let residual_field = parse_field(p, "trait.residual_field", &t.residual_field)?;
    Ok(residual_field)
}

/// `[analysis]`: correlation families that the mapping stage knows.
fn check_analysis(p: &Path, analysis: Option<&AnalysisSpec>) -> Result<()> {
    if let Some(a) = analysis {
        for (i, f) in a.correlations.iter().flatten().enumerate() {
            Family::parse(f).map_err(|m| bad(p, &format!("analysis.correlations[{}]", i + 1), m, None))?;
        }
    }
    Ok(())
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;

    /// A small valid scenario used by the unit tests of this stage.
    pub(crate) const SMALL: &str = r#"
[scenario]
title = "small"
timezone = "Europe/Amsterdam"
start = "2026-10-23"
end = "2026-10-28"
step = "10m"

[compartment]
length = 6.0
width = 4.0

[layout]
kind = "benches"
benches = 2
rows_per_bench = 2
slots_per_row = 6
bench_pitch = 2.0
row_pitch = 0.5
slot_pitch = 0.8
origin = [0.5, 0.5]

[design]
replicates = 4
randomisation = "blocks"
sowing = ["2026-10-23", "2026-10-24"]
growth_days = 3

[[design.factor]]
name = "line"
levels = ["a", "b", "c"]

[[design.factor]]
name = "feed"
levels = ["std", "low"]

[[opening]]
name = "door"
from = [0.0, 1.0]
to = [0.0, 2.0]

[climate]
night_temperature = 15.0
day_temperature = 20.0
sunrise = "08:00"
sunset = "18:00"
peak_ppfd = 400.0
cloud_min = 0.5
solar_gain = 3.0
weather_sd = 1.0
weather_persistence = 0.5
vapour_pressure = 1.3
gradient = [0.1, 0.0]
field = { family = "exponential", range = 1.5, sill = 0.09 }
noise = { temperature = 0.1, humidity = 1.0, light = 0.02 }

[[climate.draught]]
opening = "door"
night_drop = 3.0
day_drop = 0.5
decay = 1.5

[[climate.shade]]
wall = "north"
reduction = 0.3
depth = 1.0

[[logger]]
id = "S1"
x = 1.0
y = 1.0
export = "main"

[[logger]]
id = "S2"
x = 5.0
y = 3.0
export = "eu"

[[export]]
name = "main"
layout = "one_file"
time_format = "%Y-%m-%d %H:%M:%S"
clock = "utc"
lead_hours = 1.0
[export.columns]
time = "t"
sensor = "id"
temperature = { column = "T", unit = "degC", decimals = 2 }
humidity = { column = "RH", unit = "percent" }
light = { column = "PAR", unit = "umol_m2_s", decimals = 0 }

[[export]]
name = "eu"
layout = "file_per_logger"
delimiter = ";"
decimal = ","
time_format = "%d.%m.%Y %H:%M"
preamble = ["logger {sensor}", "exported"]
[export.columns]
time = "Zeit"
temperature = { column = "Temp_F", unit = "degF" }
humidity = { column = "rF", unit = "fraction", decimals = 3 }
light = { column = "Lux", unit = "lux_sunlight", decimals = 0 }

[[fault]]
kind = "spike"
logger = "S1"
variable = "temperature"
at = "2026-10-24 03:00"
value = 9.0

[[fault]]
kind = "stuck"
logger = "S2"
variable = "humidity"
from = "2026-10-26 01:00"
hours = 6

[[fault]]
kind = "gap"
logger = "S1"
from = "2026-10-26 12:00"
hours = 3

[[fault]]
kind = "duplicate"
logger = "S1"
at = "2026-10-24 05:00"

[[trait]]
"#;

    pub(crate) fn small() -> String {
        SMALL.replace(
            "[[trait]]\n",
            r#"[trait]
name = "weight"
intercept = 100.0
noise_sd = 2.0
residual_field = { family = "spherical", range = 2.0, sill = 4.0 }

[[trait.effect]]
factor = "line"
level = "b"
value = -5.0

[[trait.interaction]]
factors = ["line", "feed"]
levels = ["c", "low"]
value = 3.0

[[trait.indicator]]
name = "cold_night_hours"
variable = "temperature"
statistic = "hours_below"
threshold = 14.0
period = "night"
effect = -0.5
"#,
        )
    }

    fn load(s: &str) -> Result<Scenario> {
        Scenario::from_source(Path::new("sc/scenario.toml"), s)
    }

    #[test]
    fn small_scenario_is_valid() {
        let sc = load(&small()).unwrap();
        assert_eq!(sc.positions.len(), 24);
        assert_eq!(sc.step_minutes, 10);
        assert_eq!(sc.sunset_h, 18.0);
    }

    #[test]
    fn negative_spacing_names_the_key() {
        let e = load(&small().replace("slot_pitch = 0.8", "slot_pitch = -0.8")).unwrap_err().to_string();
        assert!(
            e.contains("sc/scenario.toml") && e.contains("layout.slot_pitch") && e.contains("-0.8"),
            "{e}"
        );
    }

    #[test]
    fn more_pots_than_positions() {
        let e = load(&small().replace("replicates = 4", "replicates = 6")).unwrap_err().to_string();
        assert!(
            e.contains("design.replicates") && e.contains("36 pots") && e.contains("24 positions"),
            "{e}"
        );
    }

    #[test]
    fn unknown_level_in_effect_suggests() {
        let e = load(&small().replace("level = \"b\"", "level = \"bb\"")).unwrap_err().to_string();
        assert!(
            e.contains("trait.effect[1].level") && e.contains("no level `bb`") && e.contains("`b`"),
            "{e}"
        );
        let e = load(&small().replace("factor = \"line\"", "factor = \"lne\"")).unwrap_err().to_string();
        assert!(e.contains("trait.effect[1].factor") && e.contains("`line`"), "{e}");
    }

    #[test]
    fn unknown_key_has_line_and_column() {
        let e = load(&small().replace("growth_days = 3", "growth_days = 3\ngrowth_dayz = 3"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("sc/scenario.toml:") && e.contains("growth_dayz"), "{e}");
    }

    #[test]
    fn window_outside_period_and_bad_opening() {
        let e = load(&small().replace("growth_days = 3", "growth_days = 9")).unwrap_err().to_string();
        assert!(e.contains("design.sowing[1]"), "{e}");
        let e = load(&small().replace("opening = \"door\"", "opening = \"dor\"")).unwrap_err().to_string();
        assert!(e.contains("climate.draught[1].opening") && e.contains("`door`"), "{e}");
    }
}
