//! Regularising the clean readings onto the common time grid.
//!
//! The readings table (`readings.parquet` of the ingest stage) has columns
//! `sensor` (String), `time` (Datetime, UTC), `temperature_c`, `rh_pct`,
//! `ppfd_umol_m2_s` (Float64, nullable). Per sensor, the value of grid step
//! `k` is the mean of the sensor's non-null readings in `[t_k, t_k + step)`
//! (polars does the bucketing and grouping). A run of empty steps between two
//! filled steps is filled by linear interpolation in time when the run lasts
//! at most `max_gap` (run length × step); longer runs, and runs at the start
//! or end of a series, stay missing — never invented.
//!
//! The result is plain matrices (time × sensor, NaN = missing) that the
//! spatial engine reads row by row (one time step across sensors) and the
//! indicators read column by column (one sensor through time).

use super::calendar::Calendar;
use super::error::{ClimateError, Result};
use super::indicator::LocationSeries;
use polars::prelude::*;
use std::collections::HashMap;
use std::path::Path;

/// Column names of the clean readings table.
pub mod columns {
    /// Sensor id.
    pub const SENSOR: &str = "sensor";
    /// UTC instant.
    pub const TIME: &str = "time";
    /// Air temperature, °C.
    pub const TEMPERATURE: &str = "temperature_c";
    /// Relative humidity, %.
    pub const HUMIDITY: &str = "rh_pct";
    /// PPFD, µmol m-2 s-1.
    pub const LIGHT: &str = "ppfd_umol_m2_s";
}

/// A time × location matrix of one variable, row-major: the value of step
/// `t` at location `j` is `data[t * n_cols + j]`; NaN = missing.
#[derive(Debug, Clone, PartialEq)]
pub struct StepMatrix {
    /// Number of grid steps (rows).
    pub n_steps: usize,
    /// Number of locations (columns).
    pub n_cols: usize,
    /// Values, row-major.
    pub data: Vec<f64>,
}

impl StepMatrix {
    /// All-missing matrix.
    pub fn missing(n_steps: usize, n_cols: usize) -> StepMatrix {
        StepMatrix { n_steps, n_cols, data: vec![f64::NAN; n_steps * n_cols] }
    }

    /// Value at step `t`, location `j`.
    pub fn get(&self, t: usize, j: usize) -> f64 {
        self.data[t * self.n_cols + j]
    }

    /// One step across all locations.
    pub fn row(&self, t: usize) -> &[f64] {
        &self.data[t * self.n_cols..(t + 1) * self.n_cols]
    }

    /// One location through time (copied).
    pub fn column(&self, j: usize) -> Vec<f64> {
        (0..self.n_steps).map(|t| self.data[t * self.n_cols + j]).collect()
    }

    fn set_column(&mut self, j: usize, v: &[f64]) {
        for (t, &x) in v.iter().enumerate() {
            self.data[t * self.n_cols + j] = x;
        }
    }

    /// Whether every value is missing.
    pub fn all_missing(&self) -> bool {
        self.data.iter().all(|v| !v.is_finite())
    }
}

/// The regularised sensor series on the calendar's grid.
#[derive(Debug, Clone)]
pub struct SensorGrid {
    /// Sensor ids, sorted; column `j` of every matrix is sensor `sensors[j]`.
    pub sensors: Vec<String>,
    /// Air temperature, °C.
    pub temperature: StepMatrix,
    /// Relative humidity, %.
    pub humidity: StepMatrix,
    /// PPFD, µmol m-2 s-1.
    pub light: StepMatrix,
}

/// One location's three series, owned (see [`OwnedSeries::view`]).
#[derive(Debug, Clone)]
pub struct OwnedSeries {
    /// °C.
    pub temperature: Vec<f64>,
    /// %.
    pub humidity: Vec<f64>,
    /// µmol m-2 s-1.
    pub light: Vec<f64>,
}

impl OwnedSeries {
    /// Borrow as a [`LocationSeries`].
    pub fn view(&self) -> LocationSeries<'_> {
        LocationSeries { temperature: &self.temperature, humidity: &self.humidity, light: &self.light }
    }
}

impl SensorGrid {
    /// The series of sensor column `j`.
    pub fn series(&self, j: usize) -> OwnedSeries {
        OwnedSeries {
            temperature: self.temperature.column(j),
            humidity: self.humidity.column(j),
            light: self.light.column(j),
        }
    }
}

/// What regularisation did, per sensor and overall.
#[derive(Debug, Clone, Default)]
pub struct RegulariseReport {
    /// Readings inside the study period (all used).
    pub readings_used: usize,
    /// Readings outside `[start, end)` (not part of the study period).
    pub readings_outside: usize,
    /// Per sensor: steps filled by interpolation (temperature, humidity, light).
    pub filled: Vec<[usize; 3]>,
    /// Per sensor: steps still missing (temperature, humidity, light).
    pub missing: Vec<[usize; 3]>,
}

/// Read `readings.parquet`. A missing file gets a hint to run the ingest stage.
pub fn read_readings(path: &Path) -> Result<DataFrame> {
    let file = std::fs::File::open(path).map_err(|e| ClimateError::Readings {
        path: path.to_path_buf(),
        message: format!("cannot open the readings table: {e}"),
        hint: Some(
            "run `potclim ingest STUDY` first; it writes readings.parquet into the output folder".into(),
        ),
    })?;
    ParquetReader::new(file)
        .finish()
        .map_err(|source| ClimateError::Polars { path: path.to_path_buf(), source })
}

fn readings_err(path: &Path, message: String, hint: Option<String>) -> ClimateError {
    ClimateError::Readings { path: path.to_path_buf(), message, hint }
}

/// The UTC time range `[min, max]` of the readings, milliseconds.
pub fn time_range_ms(df: &DataFrame, path: &Path) -> Result<Option<(i64, i64)>> {
    let t = time_ms_expr(df, path)?;
    let pe = |source| ClimateError::Polars { path: path.to_path_buf(), source };
    let out =
        df.clone().lazy().select([t.clone().min().alias("lo"), t.max().alias("hi")]).collect().map_err(pe)?;
    let lo = out.column("lo").and_then(|c| c.i64().map(|c| c.get(0))).map_err(pe)?;
    let hi = out.column("hi").and_then(|c| c.i64().map(|c| c.get(0))).map_err(pe)?;
    Ok(lo.zip(hi))
}

fn time_ms_expr(df: &DataFrame, path: &Path) -> Result<Expr> {
    check_schema(df, path)?;
    let tz = match df.column(columns::TIME).expect("checked").dtype() {
        DataType::Datetime(_, tz) => tz.clone(),
        _ => unreachable!("checked by check_schema"),
    };
    // Unit conversion by polars' integer cast between time units, then the
    // physical value (UTC milliseconds since the epoch).
    Ok(col(columns::TIME).cast(DataType::Datetime(TimeUnit::Milliseconds, tz)).cast(DataType::Int64))
}

/// Check the columns and types of the readings table.
pub fn check_schema(df: &DataFrame, path: &Path) -> Result<()> {
    let names: Vec<String> = df.get_column_names().iter().map(|s| s.to_string()).collect();
    let expect: [(&str, &str); 5] = [
        (columns::SENSOR, "String"),
        (columns::TIME, "Datetime (UTC)"),
        (columns::TEMPERATURE, "Float64"),
        (columns::HUMIDITY, "Float64"),
        (columns::LIGHT, "Float64"),
    ];
    for (name, ty) in expect {
        let Ok(c) = df.column(name) else {
            return Err(readings_err(
                path,
                format!("no column `{name}` ({ty}); the table has: {}", names.join(", ")),
                Some("rerun `potclim ingest STUDY` to rewrite the readings table".into()),
            ));
        };
        let ok = match name {
            columns::SENSOR => matches!(c.dtype(), DataType::String),
            columns::TIME => matches!(c.dtype(), DataType::Datetime(_, _)),
            _ => matches!(c.dtype(), DataType::Float64),
        };
        if !ok {
            return Err(readings_err(
                path,
                format!("column `{name}` has type {} where {ty} is expected", c.dtype()),
                None,
            ));
        }
        if matches!(name, columns::SENSOR | columns::TIME) && c.null_count() > 0 {
            return Err(readings_err(
                path,
                format!(
                    "column `{name}` has {} empty values; every reading needs a sensor and a time",
                    c.null_count()
                ),
                None,
            ));
        }
    }
    Ok(())
}

/// Bucket the readings onto the calendar's grid (mean per sensor and step)
/// with polars, then fill gaps of at most `max_gap_ms` by linear
/// interpolation. Cost: one group-by over the rows, then O(steps × sensors).
pub fn regularise(
    df: &DataFrame,
    path: &Path,
    calendar: &Calendar,
    max_gap_ms: i64,
) -> Result<(SensorGrid, RegulariseReport)> {
    let t = time_ms_expr(df, path)?;
    let pe = |source| ClimateError::Polars { path: path.to_path_buf(), source };
    let end_ms = calendar.time_ms(calendar.n_steps);
    let sensors_df = df
        .clone()
        .lazy()
        .select([col(columns::SENSOR).unique().sort(Default::default())])
        .collect()
        .map_err(pe)?;
    let sensors: Vec<String> = sensors_df
        .column(columns::SENSOR)
        .and_then(|c| c.str().map(|s| s.iter().flatten().map(str::to_string).collect()))
        .map_err(pe)?;
    let grouped = df
        .clone()
        .lazy()
        .with_column(t.alias("__t_ms"))
        .filter(col("__t_ms").gt_eq(lit(calendar.start_ms)).and(col("__t_ms").lt(lit(end_ms))))
        .with_column(
            // The step index k = floor(offset / step) of a non-negative offset.
            // A float quotient truncated to an integer is not exact: polars
            // divides by a scalar by multiplying with its reciprocal, and
            // k * 3_600_000 * (1 / 3_600_000) falls just below k for some k,
            // which put readings into the previous step. Here the offset is
            // first cut to an exact multiple of the step by integer modulo;
            // the float quotient of that multiple is k within a few ulps
            // (k < 2^53), so adding one half and truncating gives k exactly.
            // (Integer floor division would need another polars feature.)
            ({
                let offset = col("__t_ms") - lit(calendar.start_ms);
                (offset.clone() - offset % lit(calendar.step_ms)).cast(DataType::Float64)
                    / lit(calendar.step_ms as f64)
                    + lit(0.5)
            })
            .cast(DataType::Int64)
            .alias("__step"),
        )
        .group_by([col(columns::SENSOR), col("__step")])
        .agg([
            col(columns::TEMPERATURE).mean(),
            col(columns::HUMIDITY).mean(),
            col(columns::LIGHT).mean(),
            col(columns::SENSOR).len().alias("__n"),
        ])
        .collect()
        .map_err(pe)?;
    let n_steps = calendar.n_steps;
    let n = sensors.len();
    let index: HashMap<&str, usize> = sensors.iter().enumerate().map(|(j, s)| (s.as_str(), j)).collect();
    let mut mats =
        [StepMatrix::missing(n_steps, n), StepMatrix::missing(n_steps, n), StepMatrix::missing(n_steps, n)];
    let sens = grouped.column(columns::SENSOR).and_then(|c| c.str()).map_err(pe)?;
    let step = grouped.column("__step").and_then(|c| c.i64()).map_err(pe)?;
    let counts = grouped.column("__n").map_err(pe)?.cast(&DataType::Int64).map_err(pe)?;
    let counts = counts.i64().map_err(pe)?;
    let vars = [columns::TEMPERATURE, columns::HUMIDITY, columns::LIGHT]
        .map(|c| grouped.column(c).and_then(|c| c.f64()).map_err(pe));
    let [vt, vh, vl] = vars;
    let (vt, vh, vl) = (vt?, vh?, vl?);
    let mut used = 0usize;
    for i in 0..grouped.height() {
        let (Some(s), Some(k)) = (sens.get(i), step.get(i)) else { continue };
        let j = index[s];
        let k = k as usize;
        used += counts.get(i).unwrap_or(0) as usize;
        for (m, v) in mats.iter_mut().zip([vt.get(i), vh.get(i), vl.get(i)]) {
            if let Some(v) = v {
                m.data[k * n + j] = v;
            }
        }
    }
    let max_gap_steps = (max_gap_ms / calendar.step_ms).max(0) as usize;
    let mut report = RegulariseReport {
        readings_used: used,
        readings_outside: df.height() - used,
        filled: vec![[0; 3]; n],
        missing: vec![[0; 3]; n],
    };
    for (v, m) in mats.iter_mut().enumerate() {
        for j in 0..n {
            let mut c = m.column(j);
            report.filled[j][v] = fill_gaps(&mut c, max_gap_steps);
            report.missing[j][v] = c.iter().filter(|x| !x.is_finite()).count();
            m.set_column(j, &c);
        }
    }
    let [temperature, humidity, light] = mats;
    Ok((SensorGrid { sensors, temperature, humidity, light }, report))
}

/// Fill interior runs of at most `max_steps` missing values (NaN) by linear
/// interpolation between the bounding values; leading and trailing runs stay
/// missing. Returns the number of values filled. Cost O(n).
///
/// ```
/// let mut v = vec![1.0, f64::NAN, f64::NAN, 4.0, f64::NAN];
/// assert_eq!(potclim::climate::regular::fill_gaps(&mut v, 2), 2);
/// assert_eq!(&v[..4], &[1.0, 2.0, 3.0, 4.0]);
/// assert!(v[4].is_nan());
/// ```
pub fn fill_gaps(v: &mut [f64], max_steps: usize) -> usize {
    let mut filled = 0;
    let mut last: Option<usize> = None;
    for i in 0..v.len() {
        if !v[i].is_finite() {
            continue;
        }
        if let Some(a) = last {
            let gap = i - a - 1;
            if gap > 0 && gap <= max_steps {
                let (va, vb) = (v[a], v[i]);
                for (k, x) in v.iter_mut().enumerate().take(i).skip(a + 1) {
                    let w = (k - a) as f64 / (i - a) as f64;
                    *x = va + w * (vb - va);
                }
                filled += gap;
            }
        }
        last = Some(i);
    }
    filled
}

/// Build a readings table in memory (for tests, benchmarks and the demo):
/// `time_ms` are UTC milliseconds; `None` values are nulls.
pub fn readings_frame(
    sensor: Vec<String>,
    time_ms: Vec<i64>,
    temperature: Vec<Option<f64>>,
    humidity: Vec<Option<f64>>,
    light: Vec<Option<f64>>,
) -> PolarsResult<DataFrame> {
    let time = Series::new(columns::TIME.into(), time_ms)
        .cast(&DataType::Datetime(TimeUnit::Milliseconds, Some(polars::prelude::TimeZone::UTC)))?;
    DataFrame::new_infer_height(vec![
        Column::new(columns::SENSOR.into(), sensor),
        time.into(),
        Column::new(columns::TEMPERATURE.into(), temperature),
        Column::new(columns::HUMIDITY.into(), humidity),
        Column::new(columns::LIGHT.into(), light),
    ])
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::io::layout::parse_local_datetime;

    fn cal(hours: i64, step_min: i64) -> Calendar {
        let s = parse_local_datetime("2026-03-01").unwrap();
        Calendar::new(chrono_tz::UTC, s, s + chrono::Duration::hours(hours), step_min * 60_000).unwrap()
    }

    #[test]
    fn fill_gaps_respects_the_limit_and_the_ends() {
        let n = f64::NAN;
        let mut v = vec![n, 0.0, n, n, n, 4.0, n, 10.0, n];
        assert_eq!(fill_gaps(&mut v, 2), 1);
        assert!(v[0].is_nan() && v[2].is_nan() && v[8].is_nan());
        assert_eq!(v[6], 7.0);
        let mut v = vec![0.0, n, n, n, 4.0];
        assert_eq!(fill_gaps(&mut v, 3), 3);
        assert_eq!(v, vec![0.0, 1.0, 2.0, 3.0, 4.0]);
        let mut v = vec![0.0, n, 2.0];
        assert_eq!(fill_gaps(&mut v, 0), 0);
    }

    /// Two sensors at 5-minute logging on a 10-minute grid: each step is the
    /// mean of its two readings; readings outside the period are counted.
    #[test]
    fn bucket_means_per_sensor_and_step() {
        let c = cal(1, 10);
        let t0 = c.start_ms;
        let mut s = Vec::new();
        let mut t = Vec::new();
        let mut temp = Vec::new();
        for (name, off) in [("b", 100.0), ("a", 0.0)] {
            for k in -1..12i64 {
                s.push(name.to_string());
                t.push(t0 + k * 300_000);
                temp.push(Some(off + k as f64));
            }
        }
        let n = s.len();
        let df = readings_frame(s, t, temp, vec![None; n], vec![Some(1.0); n]).unwrap();
        let (g, rep) = regularise(&df, Path::new("r.parquet"), &c, 1_800_000).unwrap();
        assert_eq!(g.sensors, vec!["a", "b"]);
        assert_eq!(rep.readings_used, 24);
        assert_eq!(rep.readings_outside, 2);
        assert_eq!(g.temperature.get(0, 0), 0.5);
        assert_eq!(g.temperature.get(5, 1), 110.5);
        assert!(g.humidity.all_missing());
        assert_eq!(g.light.row(3), &[1.0, 1.0]);
        assert_eq!(rep.missing[0], [0, 6, 0]);
    }

    /// One reading on every grid instant, on 15-minute, 30-minute and 1-hour grids over
    /// 16 days: every step holds exactly its own reading (no step empty, none
    /// averaged with its neighbour). The bucket index of a reading is an exact
    /// integer; a float quotient truncated to an integer put the readings of
    /// steps 1, 2, 4, 7, 8, 14, ... of a 1-hour grid into the step before.
    #[test]
    fn every_reading_lands_in_its_own_step_at_coarse_steps() {
        for step_min in [15i64, 30, 60] {
            let c = cal(16 * 24, step_min);
            let n = c.n_steps;
            let t0 = c.start_ms;
            let df = readings_frame(
                vec!["s".into(); n],
                (0..n as i64).map(|k| t0 + k * step_min * 60_000).collect(),
                (0..n).map(|k| Some(k as f64)).collect(),
                vec![None; n],
                vec![None; n],
            )
            .unwrap();
            let (g, rep) = regularise(&df, Path::new("r.parquet"), &c, 0).unwrap();
            let col = g.temperature.column(0);
            let wrong: Vec<usize> = (0..n).filter(|&k| col[k] != k as f64).collect();
            assert!(wrong.is_empty(), "step {step_min} min: steps without their own reading: {wrong:?}");
            assert_eq!(rep.missing[0][0], 0);
            assert_eq!(rep.readings_used, n);
        }
    }

    #[test]
    fn long_gaps_stay_missing_short_ones_are_interpolated() {
        let c = cal(2, 10);
        let t0 = c.start_ms;
        // Readings every 10 minutes with steps 2 (short gap) and 5..=9 (long gap) absent.
        let ks: Vec<i64> = (0..12).filter(|k| *k != 2 && !(5..=9).contains(k)).collect();
        let n = ks.len();
        let df = readings_frame(
            vec!["s".into(); n],
            ks.iter().map(|k| t0 + k * 600_000).collect(),
            ks.iter().map(|k| Some(*k as f64)).collect(),
            vec![Some(50.0); n],
            vec![None; n],
        )
        .unwrap();
        let (g, rep) = regularise(&df, Path::new("r.parquet"), &c, 1_800_000).unwrap();
        let col = g.temperature.column(0);
        assert_eq!(col[2], 2.0);
        assert!(col[5..10].iter().all(|v| v.is_nan()));
        assert!(col[12..].iter().all(|v| v.is_nan()));
        assert_eq!(rep.filled[0][0], 1);
    }

    #[test]
    fn wrong_schema_is_a_clear_error() {
        let df = DataFrame::new_infer_height(vec![Column::new("sensor".into(), vec!["a"])]).unwrap();
        let e = check_schema(&df, Path::new("out/readings.parquet")).unwrap_err().to_string();
        assert!(e.contains("out/readings.parquet") && e.contains("no column `time`"), "{e}");
        let e = read_readings(Path::new("/nonexistent/readings.parquet")).unwrap_err().to_string();
        assert!(e.contains("potclim ingest"), "{e}");
    }
}
