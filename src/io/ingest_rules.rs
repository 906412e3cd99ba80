//! The audit rules of [`super`] on one sensor's rows: rows of unknown sensors,
//! second rows for one instant and rows outside the study period; the range, spike
//! and stuck rules per channel; and the gaps in what is kept.

use super::{FileSummary, Gap, Period};
use crate::io::clock::format_utc;
use crate::io::logs::{Flag, Row, Variable};
use crate::io::output::number;
use crate::io::qc::{self, QcSettings, Reason};
use crate::io::units::Channel;

/// Row rules on one sensor's rows (sorted by time): every row of a sensor
/// absent from the sensor table, a second row for the same instant (the
/// first is kept), a row outside the study period. The kept rows are moved
/// to the front; returns their number and the flags.
pub(super) fn row_rules(
    seg: &mut [Row],
    unknown: bool,
    sensor: &str,
    files: &[FileSummary],
    period: Period,
) -> (usize, Vec<Flag>) {
    let mut flags = Vec::new();
    let mut w = 0;
    for i in 0..seg.len() {
        let r = seg[i];
        let reason = if unknown {
            Some((Reason::UnknownSensor, Variable::Sensor, sensor.to_string()))
        } else if w > 0 && seg[w - 1].time == r.time {
            let prev = &seg[w - 1];
            Some((
                Reason::Duplicate,
                Variable::Row,
                format!("same instant as {}:{}", files[prev.file as usize].name, prev.line),
            ))
        } else if !period.contains(r.time) {
            Some((Reason::OutsidePeriod, Variable::Time, format_utc(r.time)))
        } else {
            None
        };
        match reason {
            Some((reason, variable, value)) => flags.push(Flag {
                file: r.file,
                line: r.line,
                sensor: r.sensor,
                time: Some(r.time),
                variable,
                value,
                reason,
            }),
            None => {
                seg[w] = r;
                w += 1;
            }
        }
    }
    (w, flags)
}

/// Rows kept with every value as is, per file, run-length coded in row
/// order.
pub(super) fn kept_by_file(seg: &[Row]) -> Vec<(u32, usize)> {
    let mut out: Vec<(u32, usize)> = Vec::new();
    for r in seg.iter().filter(|r| !r.flagged) {
        match out.last_mut() {
            Some((f, k)) if *f == r.file => *k += 1,
            _ => out.push((r.file, 1)),
        }
    }
    out
}

/// One sensor's part of the readings table's columns (times and the three
/// channels; `NaN` = no value).
pub(super) struct Columns<'a> {
    pub(super) times: &'a mut [i64],
    pub(super) values: [&'a mut [f64]; 3],
}

impl Columns<'_> {
    /// Copy the rows' times and values in.
    pub(super) fn fill(&mut self, seg: &[Row]) {
        for (i, r) in seg.iter().enumerate() {
            self.times[i] = r.time;
            for k in 0..3 {
                self.values[k][i] = r.values[k];
            }
        }
    }
}

/// Range, spike and stuck rules on one sensor's rows (sorted by time) and
/// their columns (filled from the rows). A flagged value becomes `NaN` in the
/// columns and in its row, and the row is marked flagged.
pub(super) fn value_rules(seg: &mut [Row], cols: &mut Columns, q: &QcSettings, flags: &mut Vec<Flag>) {
    let mut flag = |seg: &mut [Row], i: usize, k: usize, reason: Reason, v: f64| {
        let r = &mut seg[i];
        flags.push(Flag {
            file: r.file,
            line: r.line,
            sensor: r.sensor,
            time: Some(r.time),
            variable: Variable::Channel(Channel::ALL[k]),
            value: number(v),
            reason,
        });
        r.values[k] = f64::NAN;
        r.flagged = true;
    };
    for (k, col) in cols.values.iter_mut().enumerate() {
        let (lo, hi) = q.range(k);
        for (i, v) in col.iter_mut().enumerate() {
            if !v.is_nan() && (*v < lo || *v > hi) {
                flag(seg, i, k, Reason::OutOfRange, *v);
                *v = f64::NAN;
            }
        }
        for i in qc::spikes(col, q.spike_window, q.spike_k, q.min_jump(k)) {
            flag(seg, i, k, Reason::Spike, col[i]);
            col[i] = f64::NAN;
        }
    }
    // Stuck: judged on the values left after range and spike rules; "moving"
    // asks whether another channel of the same sensor changed within the run,
    // and holds when no other channel has readings there.
    let min_ms = (q.stuck_hours * 3_600_000.0) as i64;
    let mut stuck_idx: [Vec<usize>; 3] = Default::default();
    let values = &cols.values;
    for k in 0..3 {
        let skip = (k == 2 && q.stuck_skip_dark).then_some(0.0);
        let moving = |a: usize, b: usize| {
            let mut any_data = false;
            for (j, col) in values.iter().enumerate() {
                if j == k {
                    continue;
                }
                let mut first: Option<f64> = None;
                for &v in &col[a..=b] {
                    if v.is_nan() {
                        continue;
                    }
                    any_data = true;
                    match first {
                        None => first = Some(v),
                        Some(f) if f != v => return true,
                        _ => {}
                    }
                }
            }
            !any_data
        };
        let plateaus = k == 2 && q.stuck_skip_lamps;
        stuck_idx[k] = qc::stuck_runs(cols.times, values[k], min_ms, skip, plateaus, moving);
    }
    for (k, idx) in stuck_idx.iter().enumerate() {
        for &i in idx {
            flag(seg, i, k, Reason::Stuck, cols.values[k][i]);
            cols.values[k][i] = f64::NAN;
        }
    }
}

/// Gaps of each channel of one sensor: consecutive readings (non-null values)
/// further apart than `factor` logging steps, where the step is the median
/// interval between the sensor's rows; with a study period, also from its
/// start to the first reading and from the last reading to its end.
pub(super) fn find_gaps(cols: &Columns, sensor: &str, factor: f64, period: Period) -> Vec<Gap> {
    let times = &*cols.times;
    let mut d: Vec<i64> = times.windows(2).map(|w| w[1] - w[0]).filter(|&x| x > 0).collect();
    if d.is_empty() {
        return Vec::new();
    }
    // The upper median: the element a full sort would put at len/2.
    let mid = d.len() / 2;
    let step = *d.select_nth_unstable(mid).1;
    let limit = (step as f64 * factor) as i64;
    let mut out = Vec::new();
    for ch in Channel::ALL {
        let col = &*cols.values[ch.index()];
        let mut present = times.iter().zip(col).filter(|(_, v)| !v.is_nan()).map(|(&t, _)| t);
        let Some(first) = present.next() else { continue };
        let mut push = |from: i64, to: i64| {
            if to - from > limit {
                out.push(Gap { sensor: sensor.to_string(), channel: ch, from, to, step });
            }
        };
        if let Some(s) = period.start {
            push(s, first);
        }
        let mut last = first;
        for t in present {
            push(last, t);
            last = t;
        }
        if let Some(e) = period.end {
            push(last, e);
        }
    }
    out
}
