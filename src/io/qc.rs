//! Quality control of logger readings: the named reasons a reading is not
//! kept as is, the `[qc]` section that sets every threshold, and the rules
//! that work on one sensor's time-ordered series (range, spike, stuck).
//!
//! Rules that concern rows (time stamps, duplicates, study period, unknown
//! sensors) are applied while reading and merging (`io::logs`, `io::ingest`);
//! the reason vocabulary is shared with the simulator, which injects the same
//! faults by the same names. A flagged value becomes null; the rest of its
//! row is kept. The defaults are the common-practice rules of REFERENCE.md
//! §9.3 ("Suggested QC rules (common practice; parameterise them all)").

use serde::Deserialize;
use std::fmt;

/// Why a reading (or a whole row) was not kept as is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Reason {
    /// A value outside the physically plausible range of its channel.
    OutOfRange,
    /// An isolated jump far beyond the sensor's local variability.
    Spike,
    /// A channel unchanged for longer than `stuck_hours` while the sensor's
    /// other channels move.
    Stuck,
    /// A second row for the same sensor and instant (the first is kept).
    Duplicate,
    /// A local time in the fall-back hour whose order does not tell which of
    /// the two instants it is.
    AmbiguousTime,
    /// A local time inside the spring-forward gap, which never happened.
    NonexistentTime,
    /// A time cell that does not match `time_format`.
    UnparsableTime,
    /// A channel cell that is not a number.
    UnparsableValue,
    /// A reading before `[climate].start` or after `[climate].end`.
    OutsidePeriod,
    /// A sensor id absent from the sensor table (only with
    /// `drop_unknown_sensors = true`; otherwise the run stops).
    UnknownSensor,
    /// A row with the wrong number of fields or an empty sensor id.
    MalformedRow,
}

impl Reason {
    /// Every reason, in the column order of `qc_summary.csv`.
    pub const ALL: [Reason; 11] = [
        Reason::OutOfRange,
        Reason::Spike,
        Reason::Stuck,
        Reason::Duplicate,
        Reason::AmbiguousTime,
        Reason::NonexistentTime,
        Reason::UnparsableTime,
        Reason::UnparsableValue,
        Reason::OutsidePeriod,
        Reason::UnknownSensor,
        Reason::MalformedRow,
    ];

    /// The name used in `qc_flags.csv` and `qc_summary.csv`.
    pub const fn name(self) -> &'static str {
        match self {
            Reason::OutOfRange => "out_of_range",
            Reason::Spike => "spike",
            Reason::Stuck => "stuck",
            Reason::Duplicate => "duplicate",
            Reason::AmbiguousTime => "ambiguous_time",
            Reason::NonexistentTime => "nonexistent_time",
            Reason::UnparsableTime => "unparsable_time",
            Reason::UnparsableValue => "unparsable_value",
            Reason::OutsidePeriod => "outside_period",
            Reason::UnknownSensor => "unknown_sensor",
            Reason::MalformedRow => "malformed_row",
        }
    }

    /// The reason called `name`.
    pub fn parse(name: &str) -> Option<Reason> {
        Reason::ALL.into_iter().find(|r| r.name() == name)
    }
}

impl fmt::Display for Reason {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// `[qc]`: thresholds of the quality-control rules. Every key is optional;
/// the defaults are common practice (REFERENCE.md §9.3) unless stated.
#[derive(Debug, Clone, Deserialize, PartialEq)]
#[serde(deny_unknown_fields, default)]
pub struct QcSettings {
    /// Lowest plausible air temperature, °C. Default −10 (REFERENCE.md §9.3,
    /// "plausible for greenhouse").
    pub temperature_min_c: f64,
    /// Highest plausible air temperature, °C. Default 50 (§9.3).
    pub temperature_max_c: f64,
    /// Lowest accepted relative humidity, %. Default 0 (physical limit).
    pub rh_min_pct: f64,
    /// Highest accepted relative humidity, %. Default 100 (physical limit;
    /// §9.3 notes capacitive sensors overshoot to ~103 % near saturation:
    /// raise this to keep such readings).
    pub rh_max_pct: f64,
    /// Lowest accepted PPFD, µmol m⁻² s⁻¹. Default 0 (negative light is
    /// impossible; §9.3 suggests tolerating a dark offset down to −5).
    pub ppfd_min: f64,
    /// Highest accepted PPFD, µmol m⁻² s⁻¹. Default 2500 (§9.3; full sun is
    /// ≈ 2000, REFERENCE.md §2.2).
    pub ppfd_max: f64,
    /// Readings on each side of a reading that form its neighbourhood for the
    /// spike rule. Default 3 (common practice for a Hampel identifier).
    pub spike_window: usize,
    /// Robust z-score beyond which a jump is a spike: `|x − median| > k ·
    /// 1.4826 · MAD` of the neighbourhood. Default 3 (Hampel identifier,
    /// common practice).
    pub spike_k: f64,
    /// Smallest jump in temperature that can be a spike, °C. Default 3
    /// (§9.3: |ΔT| > 3–5 °C between consecutive 5-min records).
    pub spike_min_jump_c: f64,
    /// Smallest jump in RH that can be a spike, %. Default 15 (§9.3: 15–20 %).
    pub spike_min_jump_rh: f64,
    /// Smallest jump in PPFD that can be a spike, µmol m⁻² s⁻¹. Default 1500
    /// (common practice: sun flecks and lamps switching make large genuine
    /// jumps, so only extreme isolated ones are flagged).
    pub spike_min_jump_ppfd: f64,
    /// A channel unchanged for longer than this many hours is stuck.
    /// Default 3 (§9.3: "flat-line: identical values for more than about
    /// 2–3 h"). 0 switches the rule off.
    pub stuck_hours: f64,
    /// Runs of zero light (darkness) are never stuck. Default true.
    pub stuck_skip_dark: bool,
    /// Runs of constant light that are a plateau of the light series (a
    /// rise before, a fall after: a lamp period) are never stuck. Default
    /// true; set false in a sunlit house, where a frozen light sensor may
    /// sit at its day's highest reading.
    pub stuck_skip_lamps: bool,
    /// A gap is an interval without readings longer than this many logging
    /// steps (the median interval of the sensor). Default 2.
    pub gap_factor: f64,
    /// Flag and drop rows of sensors absent from the sensor table instead of
    /// stopping with an error that lists them. Default false.
    pub drop_unknown_sensors: bool,
}

impl Default for QcSettings {
    fn default() -> QcSettings {
        QcSettings {
            temperature_min_c: -10.0,
            temperature_max_c: 50.0,
            rh_min_pct: 0.0,
            rh_max_pct: 100.0,
            ppfd_min: 0.0,
            ppfd_max: 2500.0,
            spike_window: 3,
            spike_k: 3.0,
            spike_min_jump_c: 3.0,
            spike_min_jump_rh: 15.0,
            spike_min_jump_ppfd: 1500.0,
            stuck_hours: 3.0,
            stuck_skip_dark: true,
            stuck_skip_lamps: true,
            gap_factor: 2.0,
            drop_unknown_sensors: false,
        }
    }
}

impl QcSettings {
    /// Check the thresholds; the message names the offending key.
    pub fn check(&self) -> Result<(), (String, String)> {
        let pairs = [
            ("temperature_min_c", self.temperature_min_c, "temperature_max_c", self.temperature_max_c),
            ("rh_min_pct", self.rh_min_pct, "rh_max_pct", self.rh_max_pct),
            ("ppfd_min", self.ppfd_min, "ppfd_max", self.ppfd_max),
        ];
        for (lk, lo, hk, hi) in pairs {
            if !(lo.is_finite() && hi.is_finite() && lo < hi) {
                return Err((format!("qc.{lk}"), format!("needs finite {lk} < {hk}, got {lo} and {hi}")));
            }
        }
        for (k, v) in [
            ("spike_k", self.spike_k),
            ("spike_min_jump_c", self.spike_min_jump_c),
            ("spike_min_jump_rh", self.spike_min_jump_rh),
            ("spike_min_jump_ppfd", self.spike_min_jump_ppfd),
            ("stuck_hours", self.stuck_hours),
        ] {
            if !(v.is_finite() && v >= 0.0) {
                return Err((format!("qc.{k}"), format!("must be a non-negative number, got {v}")));
            }
        }
        if !(self.gap_factor.is_finite() && self.gap_factor >= 1.0) {
            return Err(("qc.gap_factor".into(), format!("must be at least 1, got {}", self.gap_factor)));
        }
        if self.spike_window == 0 {
            return Err(("qc.spike_window".into(), "must be at least 1".into()));
        }
        Ok(())
    }

    /// The plausible range `[lo, hi]` of a channel (index of `Channel::ALL`).
    pub fn range(&self, channel: usize) -> (f64, f64) {
        match channel {
            0 => (self.temperature_min_c, self.temperature_max_c),
            1 => (self.rh_min_pct, self.rh_max_pct),
            _ => (self.ppfd_min, self.ppfd_max),
        }
    }

    /// The smallest spike jump of a channel (index of `Channel::ALL`).
    pub fn min_jump(&self, channel: usize) -> f64 {
        match channel {
            0 => self.spike_min_jump_c,
            1 => self.spike_min_jump_rh,
            _ => self.spike_min_jump_ppfd,
        }
    }
}

/// 1.4826 ≈ 1/Φ⁻¹(3/4): makes the median absolute deviation a consistent
/// estimator of the standard deviation of normal data (Hampel 1974, "The
/// influence curve and its role in robust estimation", JASA 69: 383–393).
pub const MAD_TO_SD: f64 = 1.4826;

fn median(v: &mut [f64]) -> f64 {
    v.sort_unstable_by(f64::total_cmp);
    let n = v.len();
    if n % 2 == 1 { v[n / 2] } else { 0.5 * (v[n / 2 - 1] + v[n / 2]) }
}

/// Spikes in one series (`NaN` = no reading, skipped). Reading `i` is a spike
/// when it jumps away from both its neighbouring readings by more than
/// `min_jump` in the same direction, and, with `m` the median and MAD the
/// median absolute deviation of the up-to-`2·window` readings around it
/// (itself excluded), `|x_i − m| > max(min_jump, k · 1.4826 · MAD)` — a
/// Hampel identifier (Hampel 1974) guarded by an absolute jump, so that a
/// level step (lamps on, vents open) is never a spike. First and last
/// readings are not tested. Cost: O(n) plus O(w log w) per candidate.
pub fn spikes(values: &[f64], window: usize, k: f64, min_jump: f64) -> Vec<usize> {
    let idx = Readings::of(values);
    let mut out = Vec::new();
    let mut buf = Vec::with_capacity(2 * window);
    for j in 1..idx.len().saturating_sub(1) {
        let x = values[idx.at(j)];
        let dp = x - values[idx.at(j - 1)];
        let dn = x - values[idx.at(j + 1)];
        if !(dp.abs() > min_jump && dn.abs() > min_jump && dp.signum() == dn.signum()) {
            continue;
        }
        buf.clear();
        let lo = j.saturating_sub(window);
        let hi = (j + window).min(idx.len() - 1);
        buf.extend((lo..=hi).filter(|&q| q != j).map(|q| values[idx.at(q)]));
        let m = median(&mut buf);
        for b in buf.iter_mut() {
            *b = (*b - m).abs();
        }
        let mad = median(&mut buf);
        if (x - m).abs() > min_jump.max(k * MAD_TO_SD * mad) {
            out.push(idx.at(j));
        }
    }
    out
}

/// Stuck runs in one series: maximal runs of identical readings (`NaN` = no
/// reading, skipped inside a run) whose first and last time are more than
/// `min_ms` apart, and during which `moving(first, last)` says the sensor's
/// other channels changed. `skip` is a value whose runs are never stuck
/// (darkness for light). Returns every index of every stuck run. Cost O(n).
pub fn stuck(
    times: &[i64],
    values: &[f64],
    min_ms: i64,
    skip: Option<f64>,
    moving: impl FnMut(usize, usize) -> bool,
) -> Vec<usize> {
    stuck_runs(times, values, min_ms, skip, false, moving)
}

/// [`stuck`], and with `plateaus` a run is never stuck when it is a plateau
/// of the series: the reading before it and the reading after it (those
/// that exist, at least one) are both lower. Electric lamps hold one PPFD
/// for the whole photoperiod, entered by a rise and left by a fall, while a
/// frozen sensor freezes at whatever it read (common practice for lamp-lit
/// rooms; our rule).
pub fn stuck_runs(
    times: &[i64],
    values: &[f64],
    min_ms: i64,
    skip: Option<f64>,
    plateaus: bool,
    mut moving: impl FnMut(usize, usize) -> bool,
) -> Vec<usize> {
    let mut out = Vec::new();
    if min_ms <= 0 {
        return out;
    }
    let idx = Readings::of(values);
    let mut a = 0;
    while a < idx.len() {
        let mut b = a;
        while b + 1 < idx.len() && values[idx.at(b + 1)] == values[idx.at(a)] {
            b += 1;
        }
        let v = values[idx.at(a)];
        let (first, last) = (idx.at(a), idx.at(b));
        let before = (a > 0).then(|| values[idx.at(a - 1)]);
        let after = (b + 1 < idx.len()).then(|| values[idx.at(b + 1)]);
        let plateau = plateaus
            && (before.is_some() || after.is_some())
            && before.is_none_or(|x| x < v)
            && after.is_none_or(|x| x < v);
        if times[last] - times[first] > min_ms && skip != Some(v) && !plateau && moving(first, last) {
            out.extend((a..=b).map(|q| idx.at(q)));
        }
        a = b + 1;
    }
    out
}

/// The positions of the readings (non-`NaN` values) of a series: the `j`-th
/// reading is at `at(j)`. No list is built when every value is a reading
/// (the usual case), so a long series costs no allocation.
enum Readings {
    All(usize),
    Some(Vec<usize>),
}

impl Readings {
    fn of(values: &[f64]) -> Readings {
        if values.iter().any(|v| v.is_nan()) {
            Readings::Some((0..values.len()).filter(|&i| !values[i].is_nan()).collect())
        } else {
            Readings::All(values.len())
        }
    }

    #[inline]
    fn len(&self) -> usize {
        match self {
            Readings::All(n) => *n,
            Readings::Some(v) => v.len(),
        }
    }

    #[inline]
    fn at(&self, j: usize) -> usize {
        match self {
            Readings::All(_) => j,
            Readings::Some(v) => v[j],
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use statrs::distribution::{ContinuousCDF, Normal};

    #[test]
    fn reason_names_round_trip_and_match_the_shared_vocabulary() {
        let shared = [
            "out_of_range",
            "spike",
            "stuck",
            "duplicate",
            "ambiguous_time",
            "nonexistent_time",
            "unparsable_time",
            "unparsable_value",
            "outside_period",
            "unknown_sensor",
        ];
        for n in shared {
            assert_eq!(Reason::parse(n).unwrap().name(), n);
        }
        assert_eq!(Reason::parse("malformed_row"), Some(Reason::MalformedRow));
    }

    #[test]
    fn mad_constant_is_inverse_normal_quartile() {
        // statrs' normal quantile, an implementation this project did not write.
        let q = Normal::new(0.0, 1.0).unwrap().inverse_cdf(0.75);
        approx::assert_abs_diff_eq!(MAD_TO_SD, 1.0 / q, epsilon = 1e-4);
    }

    #[test]
    fn spike_is_found_and_steps_are_not() {
        let mut v: Vec<f64> = (0..40).map(|i| 20.0 + 0.05 * f64::from(i % 3)).collect();
        v[10] = 35.0; // isolated spike
        for x in v.iter_mut().skip(25) {
            *x += 8.0; // level step (heating on): not a spike
        }
        v[5] = f64::NAN; // a missing reading is skipped
        assert_eq!(spikes(&v, 3, 3.0, 3.0), vec![10]);
        // A jump below the absolute guard is not a spike.
        let mut w = vec![20.0; 20];
        w[8] = 22.0;
        assert!(spikes(&w, 3, 3.0, 3.0).is_empty());
        // Downward spike.
        w[8] = 10.0;
        assert_eq!(spikes(&w, 3, 3.0, 3.0), vec![8]);
    }

    #[test]
    fn stuck_run_longer_than_limit_while_others_move() {
        let times: Vec<i64> = (0..100).map(|i| i * 300_000).collect(); // 5-min steps
        let mut v: Vec<f64> = (0..100).map(|i| 50.0 + f64::from(i)).collect();
        for x in v.iter_mut().take(80).skip(30) {
            *x = 61.5; // 50 readings = 245 min unchanged
        }
        let got = stuck(&times, &v, 3 * 3_600_000, None, |_, _| true);
        assert_eq!(got, (30..80).collect::<Vec<_>>());
        // Not when the other channels are frozen too.
        assert!(stuck(&times, &v, 3 * 3_600_000, None, |_, _| false).is_empty());
        // Not when shorter than the limit.
        assert!(stuck(&times, &v, 5 * 3_600_000, None, |_, _| true).is_empty());
        // Darkness is skipped.
        let dark = vec![0.0; 100];
        assert!(stuck(&times, &dark, 3_600_000, Some(0.0), |_, _| true).is_empty());
        // A lamp period: dark, 12 h at 400, dark again, against a frozen
        // reading mid-morning (a rise before it, a further rise after it).
        let t10: Vec<i64> = (0..200).map(|i| i * 600_000).collect();
        let lamp: Vec<f64> = (0..200).map(|i| if (36..108).contains(&i) { 400.0 } else { 0.0 }).collect();
        assert!(stuck_runs(&t10, &lamp, 3 * 3_600_000, Some(0.0), true, |_, _| true).is_empty());
        assert_eq!(stuck_runs(&t10, &lamp, 3 * 3_600_000, Some(0.0), false, |_, _| true).len(), 72);
        let frozen: Vec<f64> = (0..200)
            .map(|i| match i {
                0..40 => 5.0 * i as f64,
                40..80 => 200.0,
                _ => 200.0 + 3.0 * (i - 79) as f64,
            })
            .collect();
        assert_eq!(stuck_runs(&t10, &frozen, 3 * 3_600_000, Some(0.0), true, |_, _| true).len(), 40);
    }

    #[test]
    fn settings_default_and_check() {
        let q = QcSettings::default();
        assert!(q.check().is_ok());
        let bad = QcSettings { rh_max_pct: -1.0, ..QcSettings::default() };
        assert_eq!(bad.check().unwrap_err().0, "qc.rh_min_pct");
        let parsed: QcSettings = toml::from_str("stuck_hours = 2.5\n").unwrap();
        assert_eq!(parsed.stuck_hours, 2.5);
        assert_eq!(parsed.spike_k, 3.0);
        assert!(toml::from_str::<QcSettings>("stuk_hours = 2\n").is_err());
    }
}
