//! Each pot's indicators over its own growth window from per-pot mapped
//! series ([`PotSeries`]): the series along the pots' paths (or at fixed
//! pots), and, for pots that move, the series at their starting (`[pots]`)
//! positions, so that the value each pot would have had without moves is
//! computed by the same per-location code as its value along its path
//! (`docs/spatial.md`, "Pots that move"). No kriging here: the series are
//! the mapping stage's.

use crate::climate::{LocationSeries, combine_window, daily_values_expected};
use nalgebra::DMatrix;

/// The mapped variables' series at one location per pot (column `j` of
/// each matrix is pot `j`'s series, steps x pots): along the pots' paths, or
/// at their starting positions.
pub struct PotSeries<'a> {
    /// Temperature, °C.
    pub temperature: Option<&'a DMatrix<f64>>,
    /// Relative humidity, %.
    pub humidity: Option<&'a DMatrix<f64>>,
    /// PPFD, µmol m⁻² s⁻¹.
    pub light: Option<&'a DMatrix<f64>>,
    /// Kriging SEs of temperature, for the expectation form of its
    /// threshold statistics.
    pub temperature_se: Option<&'a DMatrix<f64>>,
}

impl<'a> PotSeries<'a> {
    /// From `(variable, series, SEs)` triples.
    pub fn of(
        vars: impl Iterator<Item = (&'a str, &'a DMatrix<f64>, Option<&'a DMatrix<f64>>)>,
    ) -> PotSeries<'a> {
        let mut s = PotSeries { temperature: None, humidity: None, light: None, temperature_se: None };
        for (name, m, se) in vars {
            match name {
                "temperature" => (s.temperature, s.temperature_se) = (Some(m), se),
                "humidity" => s.humidity = Some(m),
                _ => s.light = Some(m),
            }
        }
        s
    }

    /// Each pot's value of `ind` over its window of days `windows[j]`
    /// (NaN when no day of the window is valid) and its count of valid days,
    /// from its own series by the climate stage's per-location code
    /// (threshold statistics of temperature as expectations over each
    /// step's kriged distribution, `crate::climate::exceedance`).
    pub fn window_values(
        &self,
        ind: &crate::climate::Indicator,
        cal: &crate::climate::Calendar,
        windows: &[std::ops::Range<usize>],
        min_cov: f64,
    ) -> (Vec<f64>, Vec<usize>) {
        let n_steps = cal.n_steps;
        let nan = vec![f64::NAN; n_steps];
        // DMatrix storage is column-major: column j is one contiguous slice.
        let col =
            |m: Option<&'a DMatrix<f64>>, j: usize| m.map(|m| &m.as_slice()[j * n_steps..(j + 1) * n_steps]);
        let how = ind.statistic.combine();
        let mut value = vec![f64::NAN; windows.len()];
        let mut valid = vec![0usize; windows.len()];
        for (j, window) in windows.iter().enumerate() {
            let series = LocationSeries {
                temperature: col(self.temperature, j).unwrap_or(&nan),
                humidity: col(self.humidity, j).unwrap_or(&nan),
                light: col(self.light, j).unwrap_or(&nan),
            };
            let daily: Vec<Option<f64>> =
                daily_values_expected(ind, cal, &series, col(self.temperature_se, j), min_cov)
                    .into_iter()
                    .map(|d| d.value)
                    .collect();
            let w = combine_window(&daily, window.clone(), how);
            value[j] = w.value.unwrap_or(f64::NAN);
            valid[j] = w.valid_days;
        }
        (value, valid)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::climate::Indicator;
    use crate::climate::config::{Period, Statistic, Variable};
    use crate::io::moves::Moves;
    use crate::spatial::paths::tests::{cal, mv, two_pots};
    use crate::spatial::paths::{Evened, Paths};

    fn indicator(statistic: Statistic) -> Indicator {
        Indicator {
            name: "x".into(),
            variable: Variable::Temperature,
            statistic,
            period: Period::All,
            variable_at: (1, 1),
            period_at: (1, 1),
        }
    }

    /// Two places over two days of hourly steps, one at 5 °C and one at
    /// 15 °C throughout; pot a starts at the cold place and pot b at the
    /// warm one, and they swap after 12 hours. By hand: hours below 10 °C
    /// along the paths 12 (a) and 36 (b), without moves 48 and 0; the mean
    /// of daily means along the paths (10 + 15) / 2 = 12.5 and
    /// (10 + 5) / 2 = 7.5, without moves 5 and 15. Both spreads halve.
    #[test]
    fn values_along_the_paths_and_without_moves_by_hand() {
        let cal = cal(2);
        let pots = two_pots();
        let at = |x: f64, line: usize| mv(&cal, 12, x, 0.0, line);
        let moves =
            Moves { path: "m.csv".into(), rows: vec![vec![at(1.0, 2)], vec![at(0.0, 3)]], shared: vec![] };
        let paths = Paths::new(&pots, &moves, &cal).unwrap();
        let at_places = DMatrix::from_fn(48, 2, |_, p| if p == 0 { 5.0 } else { 15.0 });
        let along = paths.along(&at_places);
        let path = PotSeries { temperature: Some(&along), humidity: None, light: None, temperature_se: None };
        let start = PotSeries { temperature: Some(&at_places), ..path };
        let windows = [0..2, 0..2];
        let cold = indicator(Statistic::HoursBelow { threshold: 10.0 });
        let (hours, valid) = path.window_values(&cold, &cal, &windows, 0.8);
        assert_eq!((hours.clone(), valid), (vec![12.0, 36.0], vec![2, 2]));
        let unmoved = start.window_values(&cold, &cal, &windows, 0.8).0;
        assert_eq!(unmoved, vec![48.0, 0.0]);
        let e = Evened::new("cold", "h", hours, unmoved);
        assert!((e.spread.sd_ratio.unwrap() - 0.5).abs() < 1e-12, "{:?}", e.spread);
        let mean = indicator(Statistic::Mean);
        let (m_path, m_start) = (
            path.window_values(&mean, &cal, &windows, 0.8).0,
            start.window_values(&mean, &cal, &windows, 0.8).0,
        );
        assert_eq!((m_path, m_start.clone()), (vec![12.5, 7.5], vec![5.0, 15.0]));
        let e = Evened::new("mean", "°C", vec![12.5, 7.5], m_start);
        assert!((e.spread.range_ratio.unwrap() - 0.5).abs() < 1e-12, "{:?}", e.spread);
    }
}
