//! Checking the parsed `[climate]` and `[[indicator]]` sections of [`super`] into
//! their validated types: every value with its line and column in the study file,
//! choices with a suggestion for a near miss, and clock times.

use super::{
    ClimateSection, ClimateSpec, DayRule, DegreeDayMethod, Indicator, IndicatorSection, Period, Statistic,
    Variable, defaults, parse_duration_ms,
};
use crate::climate::error::{ClimateError, Declaration, Result};
use crate::io::error::closest;
use crate::io::layout::parse_local_datetime;
use crate::io::study::{Study, line_col};
use chrono::{NaiveDateTime, NaiveTime};
use toml::Spanned;

fn parse_clock(s: &str) -> Option<NaiveTime> {
    NaiveTime::parse_from_str(s.trim(), "%H:%M")
        .or_else(|_| NaiveTime::parse_from_str(s.trim(), "%H:%M:%S"))
        .ok()
}

pub(super) struct Ctx<'a> {
    pub(super) study: &'a Study,
}

impl Ctx<'_> {
    fn at(&self, span: std::ops::Range<usize>) -> (usize, usize) {
        line_col(&self.study.source, span.start)
    }

    fn err<T: std::fmt::Debug>(
        &self,
        key: &str,
        v: &Spanned<T>,
        message: impl Into<String>,
        hint: Option<String>,
    ) -> ClimateError {
        let (line, column) = self.at(v.span());
        ClimateError::from(Declaration {
            path: self.study.path.clone(),
            line,
            column,
            key: key.to_string(),
            value: format!("{:?}", v.get_ref()),
            message: message.into(),
            hint,
        })
    }

    fn choice<T>(
        &self,
        key: &str,
        v: &Spanned<String>,
        names: &[&str],
        parse: impl Fn(&str) -> Option<T>,
    ) -> Result<T> {
        parse(v.get_ref()).ok_or_else(|| {
            let hint = match closest(v.get_ref(), names.iter().copied()) {
                Some(c) => format!("did you mean \"{c}\"? the choices are {}", names.join(", ")),
                None => format!("the choices are {}", names.join(", ")),
            };
            self.err(key, v, "unknown value", Some(hint))
        })
    }
}

pub(super) fn parse_spec(cx: &Ctx, sec: Option<ClimateSection>) -> Result<ClimateSpec> {
    let sec = sec.unwrap_or(ClimateSection {
        start: None,
        end: None,
        step: None,
        max_gap: None,
        min_coverage: None,
        day_rule: None,
        light_threshold: None,
        day_start: None,
        day_end: None,
    });
    let datetime = |key: &str, v: &Option<Spanned<String>>| -> Result<Option<NaiveDateTime>> {
        match v {
            None => Ok(None),
            Some(v) => parse_local_datetime(v.get_ref()).map(Some).ok_or_else(|| {
                cx.err(
                    key,
                    v,
                    "not a local date-time",
                    Some("write e.g. \"2026-03-01 00:00\" (study time zone)".into()),
                )
            }),
        }
    };
    let start = datetime("climate.start", &sec.start)?;
    let end = datetime("climate.end", &sec.end)?;
    if let (Some(s), Some(e), Some(ev)) = (start, end, &sec.end)
        && e <= s
    {
        {
            return Err(cx.err(
                "climate.end",
                ev,
                format!("the study period ends before it starts ({s})"),
                None,
            ));
        }
    }
    let step_ms = match &sec.step {
        None => parse_duration_ms(defaults::STEP).expect("valid default"),
        Some(v) => {
            let ms = parse_duration_ms(v.get_ref()).ok_or_else(|| {
                cx.err(
                    "climate.step",
                    v,
                    "not a duration",
                    Some("write e.g. \"10m\", \"15m\" or \"1h\"".into()),
                )
            })?;
            if ms <= 0 || 86_400_000 % ms != 0 {
                return Err(cx.err(
                    "climate.step",
                    v,
                    "the step must be positive and divide one day",
                    Some("use e.g. \"5m\", \"10m\", \"15m\", \"30m\" or \"1h\"".into()),
                ));
            }
            ms
        }
    };
    let max_gap_ms = match &sec.max_gap {
        None => parse_duration_ms(defaults::MAX_GAP).expect("valid default"),
        Some(v) => parse_duration_ms(v.get_ref()).ok_or_else(|| {
            cx.err(
                "climate.max_gap",
                v,
                "not a duration",
                Some("write e.g. \"30m\"; \"0m\" fills no gap".into()),
            )
        })?,
    };
    let min_coverage = match &sec.min_coverage {
        None => defaults::MIN_COVERAGE,
        Some(v) => {
            let c = *v.get_ref();
            if !(c > 0.0 && c <= 1.0) {
                return Err(cx.err(
                    "climate.min_coverage",
                    v,
                    "must be a fraction in (0, 1]",
                    Some("0.9 is common practice".into()),
                ));
            }
            c
        }
    };
    let rule = match &sec.day_rule {
        None => "light",
        Some(v) => {
            cx.choice("climate.day_rule", v, &["light", "clock"], |s| {
                matches!(s, "light" | "clock").then_some(())
            })?;
            v.get_ref().as_str()
        }
    };
    let day_rule = if rule == "light" {
        if let Some(v) = sec.day_start.as_ref().or(sec.day_end.as_ref()) {
            return Err(cx.err(
                "climate.day_start",
                v,
                "clock times apply to day_rule = \"clock\" only",
                Some("add day_rule = \"clock\" or remove day_start/day_end".into()),
            ));
        }
        let threshold = match &sec.light_threshold {
            None => defaults::LIGHT_THRESHOLD,
            Some(v) => {
                let t = *v.get_ref();
                if !(t.is_finite() && t >= 0.0) {
                    return Err(cx.err("climate.light_threshold", v, "must be a non-negative PPFD", None));
                }
                t
            }
        };
        DayRule::Light { threshold }
    } else {
        if let Some(v) = &sec.light_threshold {
            return Err(cx.err(
                "climate.light_threshold",
                v,
                "applies to day_rule = \"light\" only",
                Some("remove it or set day_rule = \"light\"".into()),
            ));
        }
        let clock = |key: &str, v: &Option<Spanned<String>>, default: &str| -> Result<NaiveTime> {
            match v {
                None => Ok(parse_clock(default).expect("valid default")),
                Some(v) => parse_clock(v.get_ref())
                    .ok_or_else(|| cx.err(key, v, "not a clock time", Some("write e.g. \"06:00\"".into()))),
            }
        };
        let start = clock("climate.day_start", &sec.day_start, defaults::DAY_START)?;
        let end = clock("climate.day_end", &sec.day_end, defaults::DAY_END)?;
        if start == end {
            let v = sec.day_end.as_ref().or(sec.day_start.as_ref()).expect("equal defaults are impossible");
            return Err(cx.err(
                "climate.day_end",
                v,
                "the day must not start and end at the same time",
                None,
            ));
        }
        DayRule::Clock { start, end }
    };
    Ok(ClimateSpec { start, end, step_ms, max_gap_ms, min_coverage, day_rule })
}

pub(super) fn parse_indicator(cx: &Ctx, k: usize, s: IndicatorSection) -> Result<Indicator> {
    let key = |f: &str| format!("indicator[{k}].{f}");
    let name = s.name.get_ref().clone();
    if name.is_empty() || !name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_') || name == "sensor" {
        return Err(cx.err(
            &key("name"),
            &s.name,
            "names are letters, digits and `_` (and not `sensor`)",
            Some("it becomes a column name, e.g. \"night_cold_hours\"".into()),
        ));
    }
    let variable = cx.choice(&key("variable"), &s.variable, &Variable::NAMES, Variable::parse)?;
    let stat_name = s.statistic.get_ref().as_str();
    if !Statistic::NAMES.contains(&stat_name) {
        cx.choice(&key("statistic"), &s.statistic, &Statistic::NAMES, |_| None::<()>)?;
    }
    let unused = |f: &str, v: &Option<Spanned<f64>>| -> Result<()> {
        match v {
            Some(v) => Err(cx.err(
                &key(f),
                v,
                format!("does not apply to statistic \"{stat_name}\""),
                Some(format!("remove `{f}`")),
            )),
            None => Ok(()),
        }
    };
    if stat_name != "degree_days" {
        unused("base", &s.base)?;
        unused("cap", &s.cap)?;
        if let Some(m) = &s.method {
            return Err(cx.err(
                &key("method"),
                m,
                "applies to statistic \"degree_days\" only",
                Some("remove `method`".into()),
            ));
        }
    }
    if !matches!(stat_name, "hours_below" | "hours_above") {
        unused("threshold", &s.threshold)?;
    }
    let finite = |f: &str, v: &Spanned<f64>| -> Result<f64> {
        if v.get_ref().is_finite() {
            Ok(*v.get_ref())
        } else {
            Err(cx.err(&key(f), v, "must be a finite number", None))
        }
    };
    let statistic = match stat_name {
        "mean" => Statistic::Mean,
        "min" => Statistic::Min,
        "max" => Statistic::Max,
        "mean_daily_min" => Statistic::MeanDailyMin,
        "mean_daily_max" => Statistic::MeanDailyMax,
        "mean_daily_range" => Statistic::MeanDailyRange,
        "hours_below" | "hours_above" => {
            let t = s.threshold.as_ref().ok_or_else(|| {
                cx.err(
                    &key("statistic"),
                    &s.statistic,
                    "needs a threshold",
                    Some(format!("add `threshold = ...` in {}", variable.unit())),
                )
            })?;
            let threshold = finite("threshold", t)?;
            if stat_name == "hours_below" {
                Statistic::HoursBelow { threshold }
            } else {
                Statistic::HoursAbove { threshold }
            }
        }
        "degree_days" => {
            if variable != Variable::Temperature {
                return Err(cx.err(
                    &key("variable"),
                    &s.variable,
                    "degree days are computed from temperature",
                    Some("set variable = \"temperature\"".into()),
                ));
            }
            let b = s.base.as_ref().ok_or_else(|| {
                cx.err(
                    &key("statistic"),
                    &s.statistic,
                    "needs a base temperature",
                    Some("add `base = 10.0` (°C; choose per crop)".into()),
                )
            })?;
            let base = finite("base", b)?;
            let cap = match &s.cap {
                None => None,
                Some(c) => {
                    let v = finite("cap", c)?;
                    if v <= base {
                        return Err(cx.err(
                            &key("cap"),
                            c,
                            format!("the upper cutoff must exceed the base ({base})"),
                            None,
                        ));
                    }
                    Some(v)
                }
            };
            let method = match &s.method {
                None => DegreeDayMethod::Integrated,
                Some(m) => {
                    cx.choice(&key("method"), m, &["integrated", "min_max_1", "min_max_2"], |v| match v {
                        "integrated" => Some(DegreeDayMethod::Integrated),
                        "min_max_1" => Some(DegreeDayMethod::MinMax1),
                        "min_max_2" => Some(DegreeDayMethod::MinMax2),
                        _ => None,
                    })?
                }
            };
            Statistic::DegreeDays { base, cap, method }
        }
        "daily_integral" => {
            if variable != Variable::Light {
                return Err(cx.err(
                    &key("variable"),
                    &s.variable,
                    "the daily integral is defined for light (daily light integral, mol m-2 d-1)",
                    Some("set variable = \"light\", or use \"mean\"".into()),
                ));
            }
            Statistic::DailyIntegral
        }
        _ => unreachable!("checked against Statistic::NAMES"),
    };
    let period = match &s.period {
        None => Period::All,
        Some(p) => cx.choice(&key("period"), p, &["all", "day", "night"], |v| match v {
            "all" => Some(Period::All),
            "day" => Some(Period::Day),
            "night" => Some(Period::Night),
            _ => None,
        })?,
    };
    Ok(Indicator {
        name,
        variable,
        statistic,
        period,
        variable_at: cx.at(s.variable.span()),
        period_at: cx.at(s.period.as_ref().map(|p| p.span()).unwrap_or_else(|| s.name.span())),
    })
}
