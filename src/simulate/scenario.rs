//! The scenario file: what a synthetic study looks like (layout, design,
//! climate field, loggers and their export formats, injected faults, the
//! trait and its true effects). Parsing rejects unknown keys with file, line
//! and column; [`Scenario::load`] then checks every value once and resolves
//! names (openings, factors, levels, loggers, exports), so that generation
//! never meets an unchecked value.
//!
//! The key-by-key documentation is `docs/simulate.md`; keep the two in step.

use super::error::{Result, SimError};
use crate::io::qc::Reason;
use crate::io::study::toml_error;
use crate::spatial::correlation::Family;
use chrono::{NaiveDate, NaiveDateTime, TimeZone, Utc};
use std::path::{Path, PathBuf};

#[path = "scenario_spec.rs"]
mod spec;
pub use spec::{
    AnalysisSpec, ClimateSpec, CompartmentSpec, DesignSpec, DirectionSpec, DraughtSpec, EffectSpec,
    ExportChannel, ExportColumns, ExportSpec, FactorSpec, FaultSpec, FieldSpec, Header, IndicatorSpec,
    InteractionSpec, LatticeFieldSpec, LayoutSpec, LoggerSpec, NoiseSpec, OpeningSpec, ScenarioSpec,
    ShadeSpec, TraitSpec,
};

#[path = "scenario_check.rs"]
mod checks;
use checks::check;

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

/// A date of the scenario (`2026-10-05`).
fn date(p: &Path, key: &str, v: &str) -> Result<NaiveDate> {
    NaiveDate::parse_from_str(v.trim(), "%Y-%m-%d")
        .map_err(|_| bad(p, key, format!("`{v}` is not a date"), Some("write e.g. \"2026-10-05\"".into())))
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
