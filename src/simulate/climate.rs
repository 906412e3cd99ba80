//! The true climate field of a synthetic study: a reference time series
//! (diurnal cycles of light and temperature, day-to-day weather) plus static
//! spatial components (gradient, draught factors, shading, a Gaussian random
//! temperature offset), and the indicators computed from it at each pot over
//! its own growth window.
//!
//! # The model (all documented in `docs/simulate.md`)
//!
//! With `h` the local clock hour (study time zone), `r` = sunrise, `q` =
//! sunset (hours), and `logistic(u) = 1 / (1 + exp(-u))`:
//!
//! * daylight `D(h) = sin(pi (h - r) / (q - r))` for `r <= h < q`, else 0;
//!   **night** is exactly `h < r or h >= q` (where `D = 0`);
//! * reference PPFD `L_ref(t) = peak_ppfd * cloud(day) * D(h)`;
//! * heating schedule `s(h) = logistic((h - r - 1) / 0.5) * (1 - logistic((h - q) / 0.5))`
//!   (day setpoint from an hour after light-on until light-off);
//! * reference temperature
//!   `T_ref(t) = T_night + (T_day - T_night) s(h) + solar_gain L_ref / 1000 + w(t)`,
//!   `w` the daily weather offset (AR(1) over days, linearly interpolated
//!   between local noons);
//! * draught weight `n(t) = 1 - s(h)`;
//! * at a point `p`:
//!   `T(t, p) = T_ref(t) + g(p) + f(p) - sum_k [day_drop_k + (night_drop_k - day_drop_k) n(t)] exp(-d_k(p) / decay_k)`
//!   with `g` the gradient about the compartment centre, `f` the random field
//!   and `d_k` the distance to opening `k`;
//! * `PPFD(t, p) = L_ref(t) prod_j (1 - reduction_j exp(-w_j(p) / depth_j))`,
//!   `w_j` the distance to wall `j`;
//! * `RH(t, p) = min(100, 100 e_a / e°(T(t, p)))` at constant actual vapour
//!   pressure `e_a`, with `e°` of FAO-56 eq. 11 ([`saturation_vapour_pressure`]).

use super::scenario::Scenario;
use chrono::{DateTime, Duration, NaiveDate, Utc};
use rand::{Rng, RngExt};
use rand_distr::{Distribution, StandardNormal};

/// Saturation vapour pressure (kPa) at `t` °C: FAO-56 eq. 11, the one
/// implementation in [`crate::climate::psychro`] (the simulator's
/// temperatures are finite and far above -237 °C, where it is defined).
pub fn saturation_vapour_pressure(t: f64) -> f64 {
    crate::climate::psychro::saturation_vapour_pressure(t).unwrap_or(f64::NAN)
}

/// Distance (metres) from point `p` to the segment `a`-`b`
/// ([`crate::spatial::geometry::distance_to_segment`]).
pub fn distance_to_segment(p: [f64; 2], a: [f64; 2], b: [f64; 2]) -> f64 {
    crate::spatial::geometry::distance_to_segment(p[0], p[1], a, b)
}

fn logistic(u: f64) -> f64 {
    1.0 / (1.0 + (-u).exp())
}

/// The reference series on the logging grid, common to every point.
#[derive(Debug, Clone)]
pub struct Reference {
    /// UTC instants, one logging step apart.
    pub times: Vec<DateTime<Utc>>,
    /// Index of the first instant inside the study period.
    pub first_in_period: usize,
    /// Night (`h < sunrise` or `h >= sunset`, local clock).
    pub night: Vec<bool>,
    /// Reference temperature, °C.
    pub temperature: Vec<f64>,
    /// Reference PPFD (unshaded), µmol m-2 s-1.
    pub ppfd: Vec<f64>,
    /// Draught weight `n(t)` in [0, 1].
    pub draught_weight: Vec<f64>,
}

/// Static climate components at one point.
#[derive(Debug, Clone)]
pub struct Components {
    /// Gradient offset, °C.
    pub gradient: f64,
    /// Random-field offset, °C.
    pub field: f64,
    /// `exp(-d_k / decay_k)` per draught.
    pub draught: Vec<f64>,
    /// Light factor (1 = unshaded).
    pub light: f64,
    /// Distance to every opening, metres.
    pub distance: Vec<f64>,
}

/// Build the reference series from `lead` before the study period to its
/// end. Draws the daily cloud factors and weather offsets from `rng`.
pub fn reference<R: Rng + ?Sized>(sc: &Scenario, lead: Duration, rng: &mut R) -> Reference {
    let cl = &sc.spec.climate;
    let (t0, t1) = sc.period_utc();
    let step = Duration::minutes(sc.step_minutes);
    let first = t0 - lead;
    let start_date = sc.start.date();
    // Days from one before the (lead-extended) start to one after the end.
    let lead_days = lead.num_days() + 2;
    let n_days = (sc.end.date() - start_date).num_days() + lead_days + 2;
    let cloud: Vec<f64> =
        (0..n_days).map(|_| cl.cloud_min + (1.0 - cl.cloud_min) * rng.random::<f64>()).collect();
    let mut weather = Vec::with_capacity(n_days as usize);
    let phi = cl.weather_persistence;
    for k in 0..n_days {
        let e: f64 = StandardNormal.sample(rng);
        let w = if k == 0 {
            cl.weather_sd * e
        } else {
            phi * weather[k as usize - 1] + (1.0 - phi * phi).sqrt() * cl.weather_sd * e
        };
        weather.push(w);
    }
    let day_of = |d: NaiveDate| ((d - start_date).num_days() + lead_days) as usize;
    let mut r = Reference {
        times: Vec::new(),
        first_in_period: 0,
        night: Vec::new(),
        temperature: Vec::new(),
        ppfd: Vec::new(),
        draught_weight: Vec::new(),
    };
    let mut t = first;
    while t < t1 {
        if t < t0 {
            r.first_in_period += 1;
        }
        let local = t.with_timezone(&sc.tz).naive_local();
        use chrono::Timelike;
        let h = local.hour() as f64 + local.minute() as f64 / 60.0;
        let day = day_of(local.date());
        let (rise, set) = (sc.sunrise_h, sc.sunset_h);
        let daylight =
            if h >= rise && h < set { (std::f64::consts::PI * (h - rise) / (set - rise)).sin() } else { 0.0 };
        let ppfd = cl.peak_ppfd * cloud[day] * daylight;
        let s = logistic((h - rise - 1.0) / 0.5) * (1.0 - logistic((h - set) / 0.5));
        // Weather: linear between local noons of neighbouring days.
        let u = h / 24.0 - 0.5;
        let w = if u >= 0.0 {
            weather[day] * (1.0 - u) + weather[day + 1] * u
        } else {
            weather[day] * (1.0 + u) - weather[day - 1] * u
        };
        let temp = cl.night_temperature - super::scorings::spell_drop(&sc.spells, local.date()) * (1.0 - s)
            + (cl.day_temperature - cl.night_temperature) * s
            + cl.solar_gain * ppfd / 1000.0
            + w;
        r.times.push(t);
        r.night.push(!(h >= rise && h < set));
        r.temperature.push(temp);
        r.ppfd.push(ppfd);
        r.draught_weight.push(1.0 - s);
        t += step;
    }
    r
}

/// Static components at point `p`; `field` is the random-field value there.
pub fn components(sc: &Scenario, p: [f64; 2], field: f64) -> Components {
    let cl = &sc.spec.climate;
    let c = sc.spec.compartment;
    let gradient = cl.gradient[0] * (p[0] - c.length / 2.0) + cl.gradient[1] * (p[1] - c.width / 2.0);
    let opening =
        |name: &str| sc.spec.opening.iter().find(|o| o.name == name).expect("checked by Scenario::load");
    let draught = cl
        .draught
        .iter()
        .map(|d| {
            let o = opening(&d.opening);
            (-distance_to_segment(p, o.from, o.to) / d.decay).exp()
        })
        .collect();
    let light = cl
        .shade
        .iter()
        .map(|s| {
            let w = match s.wall.as_str() {
                "south" => p[1],
                "north" => c.width - p[1],
                "west" => p[0],
                _ => c.length - p[0],
            };
            1.0 - s.reduction * (-w.max(0.0) / s.depth).exp()
        })
        .product();
    let distance = sc.spec.opening.iter().map(|o| distance_to_segment(p, o.from, o.to)).collect();
    Components { gradient, field, draught, light, distance }
}

/// True temperature (°C) at a point with components `c` at reference index `i`.
pub fn temperature(sc: &Scenario, r: &Reference, c: &Components, i: usize) -> f64 {
    let n = r.draught_weight[i];
    let cool: f64 = sc
        .spec
        .climate
        .draught
        .iter()
        .zip(&c.draught)
        .map(|(d, f)| (d.day_drop + (d.night_drop - d.day_drop) * n) * f)
        .sum();
    r.temperature[i] + c.gradient + c.field - cool
}

/// True relative humidity (%) at temperature `t` °C and vapour pressure `ea` kPa.
pub fn relative_humidity(t: f64, ea: f64) -> f64 {
    (100.0 * ea / saturation_vapour_pressure(t)).min(100.0)
}

/// An indicator definition, checked by [`Scenario::load`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Statistic {
    /// Mean over the selected instants.
    Mean,
    /// Minimum.
    Min,
    /// Maximum.
    Max,
    /// Hours (count of selected instants times the step) strictly below the threshold.
    HoursBelow(f64),
    /// Hours at or above... strictly above the threshold.
    HoursAbove(f64),
    /// Daily light integral, mol m-2 d-1, averaged over the window's days.
    DailyIntegral,
}

/// Evaluate a statistic over `values` (one per logging instant in a
/// window), counting only instants selected by `keep`.
///
/// * `Mean`/`Min`/`Max`: over the kept instants (`None` if none);
/// * `HoursBelow(c)`: `step_h * #{kept i : v_i < c}` (`HoursAbove`: `v_i > c`);
/// * `DailyIntegral`: `sum_i v_i * 60 step_min / 1e6 / n_days` (the sum of
///   PPFD times the step in seconds, in mol m-2, per day; REFERENCE.md §2.1).
pub fn evaluate(
    stat: Statistic,
    values: &[f64],
    keep: &[bool],
    step_minutes: i64,
    n_days: f64,
) -> Option<f64> {
    let kept = values.iter().zip(keep).filter(|(_, k)| **k).map(|(v, _)| *v);
    let step_h = step_minutes as f64 / 60.0;
    match stat {
        Statistic::Mean => {
            let (s, n) = kept.fold((0.0, 0usize), |(s, n), v| (s + v, n + 1));
            (n > 0).then(|| s / n as f64)
        }
        Statistic::Min => kept.min_by(|a, b| a.total_cmp(b)),
        Statistic::Max => kept.max_by(|a, b| a.total_cmp(b)),
        Statistic::HoursBelow(c) => Some(kept.filter(|v| *v < c).count() as f64 * step_h),
        Statistic::HoursAbove(c) => Some(kept.filter(|v| *v > c).count() as f64 * step_h),
        Statistic::DailyIntegral => {
            (n_days > 0.0).then(|| kept.sum::<f64>() * 60.0 * step_minutes as f64 / 1e6 / n_days)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    /// FAO-56 Annex 2 / Example 3 values (REFERENCE.md §1.1, [FOUND] for 15
    /// and 24.5 °C): e°(15) = 1.705 kPa, e°(24.5) = 3.075 kPa, e°(0) = 0.6108.
    #[test]
    fn saturation_vapour_pressure_matches_fao56() {
        assert_abs_diff_eq!(saturation_vapour_pressure(15.0), 1.705, epsilon = 5e-4);
        assert_abs_diff_eq!(saturation_vapour_pressure(24.5), 3.075, epsilon = 5e-4);
        assert_abs_diff_eq!(saturation_vapour_pressure(0.0), 0.6108, epsilon = 1e-12);
        // RH at constant vapour pressure falls as temperature rises.
        assert!(relative_humidity(24.5, 1.2) < relative_humidity(15.0, 1.2));
        assert_abs_diff_eq!(relative_humidity(15.0, 1.705), 100.0, epsilon = 0.05);
    }

    #[test]
    fn segment_distance_hand_worked() {
        // Perpendicular foot inside the segment, beyond its end, degenerate segment.
        assert_abs_diff_eq!(distance_to_segment([3.0, 1.0], [0.0, 0.0], [4.0, 0.0]), 1.0, epsilon = 1e-15);
        assert_abs_diff_eq!(distance_to_segment([7.0, 4.0], [0.0, 0.0], [4.0, 0.0]), 5.0, epsilon = 1e-15);
        assert_abs_diff_eq!(distance_to_segment([3.0, 4.0], [0.0, 0.0], [0.0, 0.0]), 5.0, epsilon = 1e-15);
    }

    /// Hand-worked: six 10-minute instants, two of them at night and below
    /// 12 °C -> 2 * 1/6 h = 0.3333 h; constant 500 µmol for 12 h at 10-min
    /// steps over one day is 21.6 mol m-2 d-1 (REFERENCE.md §2.1 worked value).
    #[test]
    fn statistics_hand_worked() {
        let v = [11.0, 13.0, 11.5, 12.0, 10.0, 15.0];
        let night = [true, true, true, true, false, false];
        assert_abs_diff_eq!(
            evaluate(Statistic::HoursBelow(12.0), &v, &night, 10, 1.0).unwrap(),
            2.0 / 6.0,
            epsilon = 1e-12
        );
        assert_abs_diff_eq!(
            evaluate(Statistic::HoursAbove(12.0), &v, &[true; 6], 10, 1.0).unwrap(),
            2.0 / 6.0,
            epsilon = 1e-12
        );
        assert_abs_diff_eq!(evaluate(Statistic::Mean, &v, &night, 10, 1.0).unwrap(), 11.875, epsilon = 1e-12);
        assert_eq!(evaluate(Statistic::Min, &v, &[false; 6], 10, 1.0), None);
        let ppfd: Vec<f64> = (0..144).map(|i| if i < 72 { 500.0 } else { 0.0 }).collect();
        assert_abs_diff_eq!(
            evaluate(Statistic::DailyIntegral, &ppfd, &[true; 144], 10, 1.0).unwrap(),
            21.6,
            epsilon = 1e-9
        );
    }
}
