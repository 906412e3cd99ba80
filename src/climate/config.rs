//! The `[climate]` and `[[indicator]]` sections of the study file, parsed
//! through [`Study::section`] with unknown keys rejected, then checked once
//! into a validated [`ClimateConfig`]. Every value keeps its position in the
//! study file so that a bad declaration is reported with file, line and
//! column, the offending value and a hint.
//!
//! The key-by-key documentation with defaults is `docs/climate.md`; keep the
//! two in step.

use super::error::{ClimateError, Declaration, Result};
use crate::io::study::Study;
use chrono::{NaiveDateTime, NaiveTime};
use serde::Deserialize;
use toml::Spanned;

/// The top-level keys the climate stage owns.
#[derive(Debug, Deserialize)]
pub struct ClimateDoc {
    /// `[climate]`.
    #[serde(default)]
    pub climate: Option<ClimateSection>,
    /// `[[indicator]]`.
    #[serde(default)]
    pub indicator: Option<Vec<IndicatorSection>>,
}

/// `[climate]` as written.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ClimateSection {
    /// Start of the study period, local date-time (inclusive).
    #[serde(default)]
    pub start: Option<Spanned<String>>,
    /// End of the study period, local date-time (exclusive).
    #[serde(default)]
    pub end: Option<Spanned<String>>,
    /// Grid step, e.g. `"10m"`.
    #[serde(default)]
    pub step: Option<Spanned<String>>,
    /// Longest gap filled by linear interpolation, e.g. `"30m"`; `"0m"` fills none.
    #[serde(default)]
    pub max_gap: Option<Spanned<String>>,
    /// Minimum fraction of a day's grid steps with data for a valid day.
    #[serde(default)]
    pub min_coverage: Option<Spanned<f64>>,
    /// `"light"` or `"clock"`.
    #[serde(default)]
    pub day_rule: Option<Spanned<String>>,
    /// PPFD (µmol m-2 s-1) at or above which a step is day, for `day_rule = "light"`.
    #[serde(default)]
    pub light_threshold: Option<Spanned<f64>>,
    /// Local clock time the day starts, for `day_rule = "clock"`.
    #[serde(default)]
    pub day_start: Option<Spanned<String>>,
    /// Local clock time the day ends, for `day_rule = "clock"`.
    #[serde(default)]
    pub day_end: Option<Spanned<String>>,
}

/// One `[[indicator]]` as written.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct IndicatorSection {
    /// Output column name.
    pub name: Spanned<String>,
    /// `temperature | humidity | light | vpd | dew_point`.
    pub variable: Spanned<String>,
    /// See [`Statistic`].
    pub statistic: Spanned<String>,
    /// Threshold of `hours_below` / `hours_above`, in the variable's unit.
    #[serde(default)]
    pub threshold: Option<Spanned<f64>>,
    /// `all | day | night`; default `all`.
    #[serde(default)]
    pub period: Option<Spanned<String>>,
    /// Base temperature of `degree_days`, °C.
    #[serde(default)]
    pub base: Option<Spanned<f64>>,
    /// Optional upper cutoff of `degree_days`, °C.
    #[serde(default)]
    pub cap: Option<Spanned<f64>>,
    /// Degree-day method: `integrated` (default), `min_max_1`, `min_max_2`.
    #[serde(default)]
    pub method: Option<Spanned<String>>,
}

/// A climate variable on the grid.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Variable {
    /// Air temperature, °C.
    Temperature,
    /// Relative humidity, %.
    Humidity,
    /// PPFD, µmol m-2 s-1.
    Light,
    /// Vapour pressure deficit, kPa (derived from temperature and humidity).
    Vpd,
    /// Dew point, °C (derived from temperature and humidity).
    DewPoint,
}

impl Variable {
    const NAMES: [&'static str; 5] = ["temperature", "humidity", "light", "vpd", "dew_point"];

    fn parse(s: &str) -> Option<Variable> {
        Some(match s {
            "temperature" => Variable::Temperature,
            "humidity" => Variable::Humidity,
            "light" => Variable::Light,
            "vpd" => Variable::Vpd,
            "dew_point" => Variable::DewPoint,
            _ => return None,
        })
    }

    /// The name used in the study file.
    pub fn name(self) -> &'static str {
        match self {
            Variable::Temperature => "temperature",
            Variable::Humidity => "humidity",
            Variable::Light => "light",
            Variable::Vpd => "vpd",
            Variable::DewPoint => "dew_point",
        }
    }

    /// Unit of the variable's values.
    pub fn unit(self) -> &'static str {
        match self {
            Variable::Temperature | Variable::DewPoint => "°C",
            Variable::Humidity => "%",
            Variable::Light => "µmol m-2 s-1",
            Variable::Vpd => "kPa",
        }
    }

    /// Whether the variable needs the humidity channel.
    pub fn needs_humidity(self) -> bool {
        matches!(self, Variable::Humidity | Variable::Vpd | Variable::DewPoint)
    }
}

/// How degree days are computed (McMaster & Wilhelm 1997, *Agric. For.
/// Meteorol.* 87: 291–300, for the two min/max interpretations).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum DegreeDayMethod {
    /// Sub-daily integration on the grid (default): the mean over the day's
    /// steps of `max(0, min(T, cap) − base)` times the day's length in days.
    Integrated,
    /// McMaster & Wilhelm method 1 on the day's Tmax and Tmin: cap both, then
    /// `max(0, (Tmax + Tmin)/2 − base)`.
    MinMax1,
    /// McMaster & Wilhelm method 2: raise Tmax and Tmin to the base, cap both,
    /// then `(Tmax + Tmin)/2 − base`.
    MinMax2,
}

/// What an indicator computes per day.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Statistic {
    /// Mean of the day's steps; window: mean of daily means.
    Mean,
    /// Minimum of the day; window: minimum of daily minima.
    Min,
    /// Maximum of the day; window: maximum of daily maxima.
    Max,
    /// Daily minimum; window: mean of daily minima.
    MeanDailyMin,
    /// Daily maximum; window: mean of daily maxima.
    MeanDailyMax,
    /// Daily maximum minus minimum; window: mean.
    MeanDailyRange,
    /// Hours with the value strictly below the threshold; window: sum.
    HoursBelow {
        /// Threshold in the variable's unit.
        threshold: f64,
    },
    /// Hours with the value strictly above the threshold; window: sum.
    HoursAbove {
        /// Threshold in the variable's unit.
        threshold: f64,
    },
    /// Degree days (°C d) above `base`, optionally capped at `cap`; window: sum.
    DegreeDays {
        /// Base temperature, °C.
        base: f64,
        /// Upper cutoff, °C.
        cap: Option<f64>,
        /// Method.
        method: DegreeDayMethod,
    },
    /// Daily light integral, mol m-2 d-1; window: mean of daily integrals.
    DailyIntegral,
}

impl Statistic {
    /// True when no value can be negative, whatever the variable: a count
    /// of hours, a degree-day sum, a light integral, a daily range.
    pub fn never_negative(self) -> bool {
        matches!(
            self,
            Statistic::HoursBelow { .. }
                | Statistic::HoursAbove { .. }
                | Statistic::DegreeDays { .. }
                | Statistic::DailyIntegral
                | Statistic::MeanDailyRange
        )
    }

    const NAMES: [&'static str; 10] = [
        "mean",
        "min",
        "max",
        "mean_daily_min",
        "mean_daily_max",
        "mean_daily_range",
        "hours_below",
        "hours_above",
        "degree_days",
        "daily_integral",
    ];
}

/// Which part of each day an indicator looks at.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Period {
    /// Every step.
    All,
    /// Steps flagged day.
    Day,
    /// Steps flagged night.
    Night,
}

/// How steps are flagged day or night.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum DayRule {
    /// Day when the mean PPFD over the sensors reporting light at that step
    /// is at least `threshold` µmol m-2 s-1.
    Light {
        /// µmol m-2 s-1.
        threshold: f64,
    },
    /// Day from `start` (inclusive) to `end` (exclusive) local clock time;
    /// `end < start` means the day runs past midnight.
    Clock {
        /// Local time the light period starts.
        start: NaiveTime,
        /// Local time the light period ends.
        end: NaiveTime,
    },
}

/// A validated indicator declaration.
#[derive(Debug, Clone)]
pub struct Indicator {
    /// Output name.
    pub name: String,
    /// Variable it reads.
    pub variable: Variable,
    /// What it computes.
    pub statistic: Statistic,
    /// Part of the day.
    pub period: Period,
    /// Line and column of its `variable` key (for later errors).
    pub variable_at: (usize, usize),
    /// Line and column of its `period` key, or of `name` when absent.
    pub period_at: (usize, usize),
}

impl Indicator {
    /// Unit of the indicator's values.
    pub fn unit(&self) -> &'static str {
        match self.statistic {
            Statistic::HoursBelow { .. } | Statistic::HoursAbove { .. } => "h",
            Statistic::DegreeDays { .. } => "°C d",
            Statistic::DailyIntegral => "mol m-2 d-1",
            _ => self.variable.unit(),
        }
    }
}

/// The validated `[climate]` section.
#[derive(Debug, Clone)]
pub struct ClimateSpec {
    /// Start of the study period, local time; `None`: local midnight of the first reading.
    pub start: Option<NaiveDateTime>,
    /// End (exclusive), local time; `None`: local midnight after the last reading.
    pub end: Option<NaiveDateTime>,
    /// Grid step, milliseconds.
    pub step_ms: i64,
    /// Longest gap filled by interpolation, milliseconds.
    pub max_gap_ms: i64,
    /// Minimum daily coverage for a valid day, in (0, 1].
    pub min_coverage: f64,
    /// Day and night.
    pub day_rule: DayRule,
}

/// Defaults of `[climate]` (documented in `docs/climate.md`).
pub mod defaults {
    /// Grid step.
    pub const STEP: &str = "10m";
    /// Longest interpolated gap.
    pub const MAX_GAP: &str = "30m";
    /// Minimum daily coverage (common practice, REFERENCE §9.3).
    pub const MIN_COVERAGE: f64 = 0.9;
    /// PPFD threshold of day (common practice: lamps off reads below 5–10).
    pub const LIGHT_THRESHOLD: f64 = 10.0;
    /// Day start of the clock rule.
    pub const DAY_START: &str = "06:00";
    /// Day end of the clock rule.
    pub const DAY_END: &str = "22:00";
}

/// `[climate]` and the indicators, validated.
#[derive(Debug, Clone)]
pub struct ClimateConfig {
    /// `[climate]`.
    pub spec: ClimateSpec,
    /// `[[indicator]]` in declaration order.
    pub indicators: Vec<Indicator>,
}

/// Parse a duration `<whole number><unit>` with unit `s`, `m`, `h` or `d`,
/// into milliseconds.
pub fn parse_duration_ms(s: &str) -> Option<i64> {
    let s = s.trim();
    let (num, unit) = s.split_at(s.find(|c: char| !c.is_ascii_digit())?);
    let n: i64 = num.parse().ok()?;
    let per = match unit.trim() {
        "s" => 1_000,
        "m" | "min" => 60_000,
        "h" => 3_600_000,
        "d" => 86_400_000,
        _ => return None,
    };
    n.checked_mul(per)
}

#[path = "config_check.rs"]
mod check;
use check::{Ctx, parse_indicator, parse_spec};

impl ClimateConfig {
    /// A run needs at least one indicator: the one message for this, given
    /// by `check` (through the plan) and by the climate stage alike.
    pub fn require_indicator(&self, study: &Study) -> std::result::Result<(), crate::io::error::IoError> {
        if self.indicators.is_empty() {
            return Err(study.invalid(
                "indicator",
                "no [[indicator]] is declared, so a run has nothing to compute from the loggers",
                Some(
                    "add an [[indicator]] block with name, variable and statistic (see docs/climate.md)"
                        .into(),
                ),
            ));
        }
        Ok(())
    }

    /// Parse and validate `[climate]` and `[[indicator]]` of a study. An
    /// absent `[climate]` takes every default; no indicator is an error only
    /// when the stage runs (see [`super::stage::run`]).
    pub fn from_study(study: &Study) -> Result<ClimateConfig> {
        let doc: ClimateDoc = study.section()?;
        let cx = Ctx { study };
        let spec = parse_spec(&cx, doc.climate)?;
        let humidity_channel =
            study.spec.logs.is_empty() || study.spec.logs.iter().any(|l| l.columns.humidity.is_some());
        let mut indicators: Vec<Indicator> = Vec::new();
        for (i, s) in doc.indicator.unwrap_or_default().into_iter().enumerate() {
            let ind = parse_indicator(&cx, i + 1, s)?;
            if ind.variable.needs_humidity() && !humidity_channel {
                return Err(ClimateError::from(Declaration {
                    path: study.path.clone(),
                    line: ind.variable_at.0,
                    column: ind.variable_at.1,
                    key: format!("indicator[{}].variable", i + 1),
                    value: format!("{:?}", ind.variable.name()),
                    message: "needs relative humidity, but no [[logs]] block maps a humidity channel".into(),
                    hint: Some("add `humidity = { column = \"...\", unit = \"percent\" }` to [logs.columns], or use another variable".into()),
                }));
            }
            if indicators.iter().any(|p| p.name == ind.name) {
                return Err(ClimateError::from(Declaration {
                    path: study.path.clone(),
                    line: ind.variable_at.0,
                    column: ind.variable_at.1,
                    key: format!("indicator[{}].name", i + 1),
                    value: format!("{:?}", ind.name),
                    message: "the name is used by an earlier indicator".into(),
                    hint: Some("give every indicator its own name".into()),
                }));
            }
            indicators.push(ind);
        }
        Ok(ClimateConfig { spec, indicators })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::path::Path;

    const HEAD: &str = "[study]\ntitle = \"t\"\ntimezone = \"Europe/Amsterdam\"\noutput = \"out\"\n\n[pots]\nfile = \"pots.csv\"\nid = \"pot\"\nx = \"x\"\ny = \"y\"\n";

    fn parse(extra: &str) -> Result<ClimateConfig> {
        let st = Study::from_source(Path::new("s/study.toml"), format!("{HEAD}{extra}")).unwrap();
        ClimateConfig::from_study(&st)
    }

    #[test]
    fn defaults_apply_without_climate_section() {
        let c = parse("").unwrap();
        assert_eq!(c.spec.step_ms, 600_000);
        assert_eq!(c.spec.max_gap_ms, 1_800_000);
        assert_eq!(c.spec.min_coverage, 0.9);
        assert_eq!(c.spec.day_rule, DayRule::Light { threshold: 10.0 });
        assert!(c.indicators.is_empty());
    }

    #[test]
    fn full_declaration_parses() {
        let c = parse(
            "\n[climate]\nstart = \"2026-03-01 00:00\"\nend = \"2026-04-01\"\nstep = \"15m\"\nday_rule = \"clock\"\nday_start = \"05:30\"\nday_end = \"21:30\"\n\n[[indicator]]\nname = \"gdd\"\nvariable = \"temperature\"\nstatistic = \"degree_days\"\nbase = 10.0\ncap = 30.0\nmethod = \"min_max_2\"\n\n[[indicator]]\nname = \"cold\"\nvariable = \"temperature\"\nstatistic = \"hours_below\"\nthreshold = 12.0\nperiod = \"night\"\n",
        )
        .unwrap();
        assert_eq!(c.spec.step_ms, 900_000);
        assert!(matches!(c.spec.day_rule, DayRule::Clock { .. }));
        assert_eq!(
            c.indicators[0].statistic,
            Statistic::DegreeDays { base: 10.0, cap: Some(30.0), method: DegreeDayMethod::MinMax2 }
        );
        assert_eq!(c.indicators[1].period, Period::Night);
        assert_eq!(c.indicators[1].statistic, Statistic::HoursBelow { threshold: 12.0 });
    }

    #[test]
    fn unknown_statistic_names_line_column_and_suggests() {
        let e = parse("\n[[indicator]]\nname = \"c\"\nvariable = \"temperature\"\nstatistic = \"hours_bellow\"\nthreshold = 1.0\n")
            .unwrap_err()
            .to_string();
        assert!(e.starts_with("s/study.toml:15:13:"), "{e}");
        assert!(e.contains("hours_bellow") && e.contains("did you mean \"hours_below\""), "{e}");
    }

    #[test]
    fn missing_threshold_is_reported_at_the_statistic() {
        let e =
            parse("\n[[indicator]]\nname = \"c\"\nvariable = \"temperature\"\nstatistic = \"hours_below\"\n")
                .unwrap_err()
                .to_string();
        assert!(e.starts_with("s/study.toml:15:13:") && e.contains("needs a threshold"), "{e}");
    }

    #[test]
    fn humidity_indicator_without_humidity_channel_is_an_error() {
        let logs = "\n[sensors]\nfile = \"s.csv\"\nid = \"id\"\nx = \"x\"\ny = \"y\"\n\n[[logs]]\nfiles = [\"*.csv\"]\ntime = \"t\"\ntime_format = \"rfc3339\"\nsensor = \"id\"\ncolumns = { temperature = { column = \"T\", unit = \"degC\" } }\n";
        let e = parse(&format!(
            "{logs}\n[[indicator]]\nname = \"v\"\nvariable = \"vpd\"\nstatistic = \"mean\"\n"
        ))
        .unwrap_err()
        .to_string();
        assert!(e.contains("s/study.toml:27:12:") && e.contains("humidity"), "{e}");
    }

    #[test]
    fn unknown_key_and_misplaced_keys_are_rejected() {
        let e = parse("\n[[indicator]]\nname = \"c\"\nvariable = \"temperature\"\nstatistic = \"mean\"\nthreshhold = 1.0\n")
            .unwrap_err()
            .to_string();
        assert!(e.contains(":16:") && e.contains("threshhold"), "{e}");
        let e = parse(
            "\n[[indicator]]\nname = \"c\"\nvariable = \"temperature\"\nstatistic = \"mean\"\nbase = 1.0\n",
        )
        .unwrap_err()
        .to_string();
        assert!(e.contains(":16:") && e.contains("does not apply"), "{e}");
        let e = parse("\n[[indicator]]\nname = \"c\"\nvariable = \"humidity\"\nstatistic = \"degree_days\"\nbase = 1.0\n")
            .unwrap_err()
            .to_string();
        assert!(e.contains(":14:") && e.contains("temperature"), "{e}");
    }

    #[test]
    fn bad_climate_values_are_located() {
        let e = parse("\n[climate]\nstep = \"7m\"\n").unwrap_err().to_string();
        assert!(e.contains(":13:8:") && e.contains("divide one day"), "{e}");
        let e = parse("\n[climate]\nstart = \"March\"\n").unwrap_err().to_string();
        assert!(e.contains(":13:9:") && e.contains("local date-time"), "{e}");
        let e = parse("\n[climate]\nmin_coverage = 1.5\n").unwrap_err().to_string();
        assert!(e.contains("min_coverage"), "{e}");
    }

    #[test]
    fn durations_parse() {
        assert_eq!(parse_duration_ms("10m"), Some(600_000));
        assert_eq!(parse_duration_ms("1h"), Some(3_600_000));
        assert_eq!(parse_duration_ms("0m"), Some(0));
        assert_eq!(parse_duration_ms("m"), None);
        assert_eq!(parse_duration_ms("10"), None);
        assert_eq!(parse_duration_ms("10y"), None);
    }
}
