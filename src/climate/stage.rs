//! The climate stage end to end: read `readings.parquet`, build the calendar
//! of the study period, regularise every sensor onto it, flag day and night,
//! compute every declared indicator per sensor and local day, combine over
//! the study period, and write `sensor_indicators.csv` and
//! `sensor_daily.parquet` atomically (see `docs/climate.md` for both).
//!
//! [`compute`] works on an in-memory readings table and returns everything
//! later stages need ([`ClimateRun`]); [`run`] adds the files.

use super::calendar::{Calendar, CalendarError, local_time, local_to_utc_ms};
use super::config::{ClimateConfig, DayRule, Period, Variable};
use super::error::{ClimateError, Declaration, Result};
use super::indicator::{DayValue, WindowValue, combine_window, daily_values};
use super::regular::{RegulariseReport, SensorGrid, read_readings, regularise, time_range_ms};
use crate::io::ingest::READINGS_FILE;
use crate::io::output::{CsvTable, StageWriter, opt_number};
use crate::io::study::Study;
use crate::io::units::Channel;
use chrono::Duration;
use polars::prelude::*;
use std::path::{Path, PathBuf};

/// Per-sensor indicators over the study period.
pub const SENSOR_INDICATORS_FILE: &str = "sensor_indicators.csv";
/// Per-sensor, per-day indicator values.
pub const SENSOR_DAILY_FILE: &str = "sensor_daily.parquet";

/// Everything the climate stage computed.
#[derive(Debug, Clone)]
pub struct ClimateRun {
    /// The validated configuration.
    pub config: ClimateConfig,
    /// The grid, local days and day flags.
    pub calendar: Calendar,
    /// The regularised sensor series.
    pub grid: SensorGrid,
    /// What regularisation did.
    pub report: RegulariseReport,
    /// `daily[i][j][d]`: indicator `i`, sensor `j`, day `d`.
    pub daily: Vec<Vec<Vec<DayValue>>>,
    /// `study[i][j]`: indicator `i` of sensor `j` over the whole study period.
    pub study: Vec<Vec<WindowValue>>,
    /// Daily means of the regular series, per channel that has any value
    /// (in [`Channel::ALL`] order), for summaries and plots.
    pub daily_means: Vec<ChannelDailyMeans>,
}

/// The daily means of one channel's regular series at every sensor.
#[derive(Debug, Clone, PartialEq)]
pub struct ChannelDailyMeans {
    /// The channel (°C, %, µmol m-2 s-1).
    pub channel: Channel,
    /// `values[j][d]`: sensor `j` (in [`SensorGrid::sensors`] order), local
    /// day `d` (in [`Calendar::days`] order); `None` when the day has no
    /// finite step.
    pub values: Vec<Vec<Option<f64>>>,
}

/// The daily means of every channel with any value: per sensor and local
/// day, the arithmetic mean of the day's finite regular steps (no coverage
/// rule: this is a picture of the data, not an indicator). Cost
/// O(steps × sensors) per channel.
pub fn daily_means(grid: &SensorGrid, calendar: &Calendar) -> Vec<ChannelDailyMeans> {
    let mut out = Vec::new();
    for (channel, m) in [
        (Channel::Temperature, &grid.temperature),
        (Channel::Humidity, &grid.humidity),
        (Channel::Light, &grid.light),
    ] {
        if m.all_missing() {
            continue;
        }
        let values = (0..m.n_cols)
            .map(|j| {
                calendar
                    .day_steps
                    .iter()
                    .map(|r| {
                        let v: Vec<f64> = r.clone().map(|t| m.get(t, j)).filter(|v| v.is_finite()).collect();
                        (!v.is_empty()).then(|| v.iter().sum::<f64>() / v.len() as f64)
                    })
                    .collect()
            })
            .collect();
        out.push(ChannelDailyMeans { channel, values });
    }
    out
}

fn declaration(
    study_path: &Path,
    at: (usize, usize),
    key: &str,
    value: &str,
    message: String,
    hint: Option<String>,
) -> ClimateError {
    ClimateError::from(Declaration {
        path: study_path.to_path_buf(),
        line: at.0,
        column: at.1,
        key: key.to_string(),
        value: value.to_string(),
        message,
        hint,
    })
}

/// Compute every indicator from an in-memory readings table. `study_path`
/// names the study file in messages, `readings_path` the table.
pub fn compute(
    study: &Study,
    config: ClimateConfig,
    readings: &DataFrame,
    readings_path: &Path,
) -> Result<ClimateRun> {
    let tz = study.timezone;
    config.require_indicator(study)?;
    let range = time_range_ms(readings, readings_path)?;
    let start_ms = match config.spec.start {
        Some(s) => local_to_utc_ms(tz, s).ok_or_else(|| {
            study.invalid(
                "climate.start",
                format!("{s} does not exist in {tz} (clocks skip it)"),
                Some("choose another time".into()),
            )
        })?,
        None => match range {
            Some((lo, _)) => midnight(tz, local_time(tz, lo).date()),
            None => return Err(empty(readings_path)),
        },
    };
    let end_ms = match config.spec.end {
        Some(e) => local_to_utc_ms(tz, e).ok_or_else(|| {
            study.invalid(
                "climate.end",
                format!("{e} does not exist in {tz} (clocks skip it)"),
                Some("choose another time".into()),
            )
        })?,
        None => match range {
            Some((_, hi)) => midnight(tz, local_time(tz, hi).date() + Duration::days(1)),
            None => return Err(empty(readings_path)),
        },
    };
    let mut calendar =
        Calendar::from_utc(tz, start_ms, end_ms, config.spec.step_ms).map_err(|e| match e {
            CalendarError::EmptyPeriod => {
                study.invalid("climate", "the study period is empty (end is not after start)", None)
            }
            CalendarError::NonexistentLocalTime(t) => {
                study.invalid("climate", format!("{t} does not exist in {tz}"), None)
            }
        })?;
    let (grid, report) = regularise(readings, readings_path, &calendar, config.spec.max_gap_ms)?;
    if report.readings_used == 0 {
        return Err(ClimateError::Readings {
            path: readings_path.to_path_buf(),
            message: "no reading falls inside the study period".into(),
            hint: Some("check [climate].start and end against the logger files".into()),
        });
    }
    let light_missing = grid.light.all_missing();
    for (i, ind) in config.indicators.iter().enumerate() {
        let key = |f: &str| format!("indicator[{}].{f}", i + 1);
        if ind.variable.needs_humidity() && grid.humidity.all_missing() {
            return Err(declaration(
                &study.path,
                ind.variable_at,
                &key("variable"),
                &format!("{:?}", ind.variable.name()),
                format!(
                    "needs relative humidity, but no sensor has a humidity reading in {}",
                    readings_path.display()
                ),
                Some("map a humidity channel in [logs.columns], or use another variable".into()),
            ));
        }
        if ind.variable == Variable::Light && light_missing {
            return Err(declaration(
                &study.path,
                ind.variable_at,
                &key("variable"),
                "\"light\"",
                format!("no sensor has a light reading in {}", readings_path.display()),
                Some("map a light channel in [logs.columns], or use another variable".into()),
            ));
        }
        if ind.period != Period::All && light_missing && matches!(config.spec.day_rule, DayRule::Light { .. })
        {
            return Err(declaration(
                &study.path,
                ind.period_at,
                &key("period"),
                if ind.period == Period::Day { "\"day\"" } else { "\"night\"" },
                "day and night come from light (the default day_rule), but no sensor has a light reading"
                    .into(),
                Some("set day_rule = \"clock\" with day_start and day_end in [climate]".into()),
            ));
        }
    }
    let light = &grid.light;
    calendar.apply_day_rule(config.spec.day_rule, |k| light.row(k));
    let n_sensors = grid.sensors.len();
    let all_days = 0..calendar.days.len();
    let mut daily = Vec::with_capacity(config.indicators.len());
    let mut study_values = Vec::with_capacity(config.indicators.len());
    let series: Vec<_> = (0..n_sensors).map(|j| grid.series(j)).collect();
    for ind in &config.indicators {
        let per_sensor: Vec<Vec<DayValue>> = series
            .iter()
            .map(|s| daily_values(ind, &calendar, &s.view(), config.spec.min_coverage))
            .collect();
        let windows: Vec<WindowValue> = per_sensor
            .iter()
            .map(|d| {
                let v: Vec<Option<f64>> = d.iter().map(|x| x.value).collect();
                combine_window(&v, all_days.clone(), ind.statistic.combine())
            })
            .collect();
        daily.push(per_sensor);
        study_values.push(windows);
    }
    for i in 0..config.indicators.len() {
        if study_values[i].iter().all(|w| w.value.is_none()) {
            return Err(no_value_anywhere(study, &config, i, &daily[i], &calendar.is_day));
        }
    }
    let daily_means = daily_means(&grid, &calendar);
    Ok(ClimateRun { config, calendar, grid, report, daily, study: study_values, daily_means })
}

/// The refusal of an indicator that no sensor has on any day of the study
/// period (every day below `min_coverage`, or without a step of its period):
/// nothing could be mapped from it, so the run stops here rather than at the
/// verdict. Names the indicator at its line, the best daily coverage seen and
/// the threshold.
fn no_value_anywhere(
    study: &Study,
    config: &ClimateConfig,
    i: usize,
    daily: &[Vec<DayValue>],
    is_day: &[Option<bool>],
) -> ClimateError {
    let ind = &config.indicators[i];
    let best = daily.iter().flatten().map(|d| d.coverage).fold(0.0f64, f64::max);
    let min = config.spec.min_coverage;
    // A day or night indicator under the light rule also needs the
    // compartment's day/night flag, unknown where no sensor has light.
    let unknown = is_day.iter().filter(|f| f.is_none()).count() as f64 / is_day.len().max(1) as f64;
    if ind.period != Period::All && unknown > 1.0 - min {
        return declaration(
            &study.path,
            ind.variable_at,
            &format!("indicator[{}]", i + 1),
            &format!("{:?}", ind.name),
            format!(
                "`{}` cannot be mapped: its period is {} but day and night are unknown at {:.0} % of the steps, where no sensor has a light reading (light readings missing or flagged: see qc_flags.csv)",
                ind.name,
                if ind.period == Period::Day { "day" } else { "night" },
                100.0 * unknown
            ),
            Some(
                "set [climate] day_rule = \"clock\" with day_start and day_end (the photoperiod), or look at the light rows of qc_flags.csv (a lamp-lit room's constant light is kept unless [qc] stuck_skip_lamps = false)"
                    .into(),
            ),
        );
    }
    let why = if best < min {
        format!(
            "no sensor has a single valid day in the study period: the best covered day has data at {:.0} % of its steps, below [climate].min_coverage = {:.0} %",
            100.0 * best,
            100.0 * min
        )
    } else {
        format!(
            "no sensor has a value on any day of the study period, although some days reach {:.0} % coverage: the indicator's period ({}) has no step on those days",
            100.0 * best,
            match ind.period {
                Period::All => "all day",
                Period::Day => "day",
                Period::Night => "night",
            }
        )
    };
    declaration(
        &study.path,
        ind.variable_at,
        &format!("indicator[{}]", i + 1),
        &format!("{:?}", ind.name),
        format!("`{}` cannot be mapped: {why}", ind.name),
        Some(
            "check [climate] start and end against the logger files (potclim check prints their time spans), or lower [climate].min_coverage"
                .into(),
        ),
    )
}

fn midnight(tz: chrono_tz::Tz, d: chrono::NaiveDate) -> i64 {
    let t = d.and_hms_opt(0, 0, 0).expect("midnight");
    (0..=180)
        .find_map(|m| local_to_utc_ms(tz, t + Duration::minutes(m)))
        .unwrap_or_else(|| t.and_utc().timestamp_millis())
}

fn empty(path: &Path) -> ClimateError {
    ClimateError::Readings {
        path: path.to_path_buf(),
        message: "the readings table has no rows".into(),
        hint: Some("run `potclim ingest STUDY` and check its report".into()),
    }
}

/// Run the stage on a study: read `<output>/readings.parquet`, compute, and
/// publish both outputs. Returns the run and the published paths.
pub fn run(study: &Study) -> Result<(ClimateRun, Vec<PathBuf>)> {
    let config = ClimateConfig::from_study(study)?;
    let out = study.output_dir();
    let readings_path = out.join(READINGS_FILE);
    let readings = read_readings(&readings_path)?;
    let run = compute(study, config, &readings, &readings_path)?;
    let published = write_outputs(study, &run)?;
    Ok((run, published))
}

/// Publish `sensor_indicators.csv` and `sensor_daily.parquet` of a computed
/// run into the study's output folder (atomically).
pub fn write_outputs(study: &Study, run: &ClimateRun) -> Result<Vec<PathBuf>> {
    let mut writer = StageWriter::new(&study.output_dir(), "climate")?;
    writer.write(SENSOR_INDICATORS_FILE, &sensor_indicators_csv(run))?;
    let path = writer.path(SENSOR_DAILY_FILE);
    write_daily_parquet(run, &path)?;
    Ok(writer.commit()?)
}

/// `sensor_indicators.csv`: `sensor`, then per indicator `<name>` (over the
/// study period; empty when no day is valid) and `<name>_days` (valid days),
/// in the one CSV format of [`crate::io::output`].
pub fn sensor_indicators_csv(run: &ClimateRun) -> Vec<u8> {
    let mut header = vec!["sensor".to_string()];
    for ind in &run.config.indicators {
        header.push(ind.name.clone());
        header.push(format!("{}_days", ind.name));
    }
    let mut t = CsvTable::new(header);
    for (j, s) in run.grid.sensors.iter().enumerate() {
        let mut rec = vec![s.clone()];
        for i in 0..run.config.indicators.len() {
            rec.push(opt_number(run.study[i][j].value));
            rec.push(run.study[i][j].valid_days.to_string());
        }
        t.row(rec);
    }
    t.into_bytes()
}

/// The long daily table: one row per sensor, day and indicator, with columns
/// `sensor` (String), `date` (String, local `YYYY-MM-DD`), `indicator`
/// (String), `value` (Float64, null when the day is not valid), `coverage`
/// (Float64, valid steps / steps of the local day) and `valid` (Boolean).
pub fn daily_frame(run: &ClimateRun) -> PolarsResult<DataFrame> {
    let (n_i, n_s, n_d) = (run.config.indicators.len(), run.grid.sensors.len(), run.calendar.days.len());
    let cap = n_i * n_s * n_d;
    let (mut sensor, mut date, mut indicator) =
        (Vec::with_capacity(cap), Vec::with_capacity(cap), Vec::with_capacity(cap));
    let (mut value, mut coverage, mut valid) =
        (Vec::with_capacity(cap), Vec::with_capacity(cap), Vec::with_capacity(cap));
    let dates: Vec<String> = run.calendar.days.iter().map(|d| d.format("%Y-%m-%d").to_string()).collect();
    for (j, s) in run.grid.sensors.iter().enumerate() {
        for (d, ds) in dates.iter().enumerate() {
            for (i, ind) in run.config.indicators.iter().enumerate() {
                let dv = run.daily[i][j][d];
                sensor.push(s.as_str());
                date.push(ds.as_str());
                indicator.push(ind.name.as_str());
                value.push(dv.value);
                coverage.push(dv.coverage);
                valid.push(dv.value.is_some());
            }
        }
    }
    DataFrame::new_infer_height(vec![
        Column::new("sensor".into(), sensor),
        Column::new("date".into(), date),
        Column::new("indicator".into(), indicator),
        Column::new("value".into(), value),
        Column::new("coverage".into(), coverage),
        Column::new("valid".into(), valid),
    ])
}

fn write_daily_parquet(run: &ClimateRun, path: &Path) -> Result<()> {
    let pe = |source| ClimateError::Polars { path: path.to_path_buf(), source };
    let mut df = daily_frame(run).map_err(pe)?;
    let file = std::fs::File::create(path)
        .map_err(|source| crate::io::IoError::Read { path: path.to_path_buf(), reason: source })?;
    ParquetWriter::new(file).finish(&mut df).map_err(pe)?;
    Ok(())
}
