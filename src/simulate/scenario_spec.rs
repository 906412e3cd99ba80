//! The scenario file as written: the sections and keys that [`super::Scenario::load`]
//! parses (unknown keys rejected with file, line and column), before any value is checked.

use crate::io::layouts::Layout;
use crate::io::study::TimeColumns;
use serde::Deserialize;

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
    pub rotation: Option<crate::simulate::rotation::RotationSpec>,
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
    pub spell: Vec<crate::simulate::scorings::SpellSpec>,
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
    /// for an unknown name, which [`super::Scenario::load`] refuses).
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
    pub scorings: Option<crate::simulate::scorings::ScoringsSpec>,
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
