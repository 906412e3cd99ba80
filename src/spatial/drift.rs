//! Openings as external drift: the drift variable `v(s) = exp(-d(s) / L)`
//! of the distance `d` from a location to a declared opening (a door, a vent),
//! with the decay length `L` estimated by leave-one-sensor-out
//! cross-validation.
//!
//! A draught from an opening cools the air most at the opening and less with
//! distance; a drift that decays with the distance lets kriging with an
//! external drift (Wackernagel 2003, *Multivariate Geostatistics*, 3rd ed.,
//! ch. 38; Chilès & Delfiner 2012, *Geostatistics*, 2nd ed., §3.6) carry the
//! one logger near the opening's cold reading to the pots around it, instead
//! of spreading it over the floor. The decay length is not known in a real
//! house, so it is chosen by cross-validation: for every candidate `L` on a
//! grid (geometric, from half the smallest sensor distance to the opening to
//! the largest sensor-pair distance, which is as far as the layout can
//! identify a length), the drift-residual variogram is refitted and the whole
//! method is scored by leave-one-sensor-out cross-validation over every time
//! step ([`super::mapping::loso`]); the grid's best `L` is then refined by a
//! golden-section search between its neighbours (Kiefer 1953, *Proc. AMS*
//! 4: 502–506). Cost: one pooled variogram fit and one cross-validation per
//! evaluated length (about 30).

use super::error::Result;

/// The drift `exp(-d / L)` of each distance `d` (metres) for the decay
/// length `length` (metres, > 0): 1 at the opening, `e^-1` at distance `L`.
/// Cost O(n).
///
/// ```
/// let v = potclim::spatial::drift::decay(&[0.0, 2.0], 2.0);
/// assert_eq!(v[0], 1.0);
/// assert!((v[1] - (-1.0f64).exp()).abs() < 1e-15);
/// ```
pub fn decay(distances: &[f64], length: f64) -> Vec<f64> {
    distances.iter().map(|d| (-d / length).exp()).collect()
}

/// The candidate decay lengths for sensors at distances `at_sensors` from an
/// opening, when the largest sensor-pair distance is `max_pair`: `count`
/// lengths spaced geometrically from half the smallest positive sensor
/// distance to the opening (at least 0.1 m) to `max_pair`. Empty when the
/// layout has no extent.
pub fn length_grid(at_sensors: &[f64], max_pair: f64, count: usize) -> Vec<f64> {
    let dmin = at_sensors.iter().copied().filter(|d| *d > 0.0).fold(f64::INFINITY, f64::min);
    let lo = if dmin.is_finite() { (dmin / 2.0).max(0.1) } else { 0.1 };
    let hi = max_pair;
    if !(hi.is_finite() && hi > lo) || count < 2 {
        return Vec::new();
    }
    let r = (hi / lo).ln() / (count - 1) as f64;
    (0..count).map(|k| lo * (r * k as f64).exp()).collect()
}

/// The result of the search over decay lengths.
#[derive(Clone, Debug)]
pub struct LengthSearch<T> {
    /// The decay length with the smallest score, metres.
    pub length: f64,
    /// Its score (cross-validated RMSE) and payload.
    pub best: (f64, T),
    /// Every evaluated length with its score, in order of length.
    pub scan: Vec<(f64, f64)>,
}

/// Minimise `score(L)` over `grid` (increasing lengths), then refine between
/// the best grid point's neighbours by `refine` golden-section steps on
/// `ln L`. `score` returns `None` for a length that cannot be scored (it is
/// skipped). Returns `None` when no length could be scored.
pub fn search_length<T, F>(grid: &[f64], refine: usize, mut score: F) -> Result<Option<LengthSearch<T>>>
where
    F: FnMut(f64) -> Result<Option<(f64, T)>>,
{
    let mut scan: Vec<(f64, f64)> = Vec::new();
    let mut best: Option<(f64, f64, T)> = None;
    let mut consider = |l: f64, s: Option<(f64, T)>, best: &mut Option<(f64, f64, T)>| {
        if let Some((v, p)) = s
            && v.is_finite()
        {
            scan.push((l, v));
            if best.as_ref().is_none_or(|b| v < b.1) {
                *best = Some((l, v, p));
            }
        }
    };
    for &l in grid {
        let s = score(l)?;
        consider(l, s, &mut best);
    }
    let Some((l0, _, _)) = best.as_ref() else { return Ok(None) };
    let k = grid.iter().position(|g| g == l0).unwrap_or(0);
    let (mut a, mut b) = (grid[k.saturating_sub(1)].ln(), grid[(k + 1).min(grid.len() - 1)].ln());
    if refine > 0 && b > a {
        let g = (5f64.sqrt() - 1.0) / 2.0;
        let mut c = b - g * (b - a);
        let mut d = a + g * (b - a);
        let mut fc = score(c.exp())?;
        let vc = fc.as_ref().map_or(f64::INFINITY, |s| s.0);
        consider(c.exp(), fc.take(), &mut best);
        let mut fd = score(d.exp())?;
        let vd = fd.as_ref().map_or(f64::INFINITY, |s| s.0);
        consider(d.exp(), fd.take(), &mut best);
        let (mut vc, mut vd) = (vc, vd);
        for _ in 0..refine {
            if vc < vd {
                b = d;
                d = c;
                vd = vc;
                c = b - g * (b - a);
                let s = score(c.exp())?;
                vc = s.as_ref().map_or(f64::INFINITY, |s| s.0);
                consider(c.exp(), s, &mut best);
            } else {
                a = c;
                c = d;
                vc = vd;
                d = a + g * (b - a);
                let s = score(d.exp())?;
                vd = s.as_ref().map_or(f64::INFINITY, |s| s.0);
                consider(d.exp(), s, &mut best);
            }
        }
    }
    scan.sort_by(|x, y| x.0.total_cmp(&y.0));
    let (length, v, p) = best.expect("checked above");
    Ok(Some(LengthSearch { length, best: (v, p), scan }))
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn grid_spans_the_layout() {
        let g = length_grid(&[1.0, 4.0, 9.0], 20.0, 5);
        assert_eq!(g.len(), 5);
        assert_relative_eq!(g[0], 0.5);
        assert_relative_eq!(g[4], 20.0, max_relative = 1e-12);
        assert!(g.windows(2).all(|w| w[1] > w[0]));
        assert!(length_grid(&[1.0], 0.2, 5).is_empty());
    }

    /// The search finds the minimum of a smooth function of `ln L` to well
    /// within a grid step (a parabola in `ln L` with its minimum at 2.7 m).
    #[test]
    fn search_finds_a_smooth_minimum() {
        let grid = length_grid(&[1.0], 20.0, 12);
        let f = |l: f64| -> Result<Option<(f64, ())>> { Ok(Some(((l.ln() - 2.7f64.ln()).powi(2), ()))) };
        let s = search_length(&grid, 12, f).unwrap().unwrap();
        assert!((s.length - 2.7).abs() < 0.01, "{}", s.length);
        assert!(s.scan.len() >= 12 && s.scan.windows(2).all(|w| w[0].0 <= w[1].0));
        let none = search_length(&grid, 3, |_| -> Result<Option<(f64, ())>> { Ok(None) }).unwrap();
        assert!(none.is_none());
    }

    /// Kriging with the decaying door drift, and leave-one-sensor-out
    /// cross-validation with it, against dense numpy solves
    /// (`tests/reference/drift.py` -> `fixtures/drift.json`).
    #[test]
    fn external_drift_matches_numpy_fixture() {
        use crate::spatial::correlation::Family;
        use crate::spatial::geometry::distances_to_opening;
        use crate::spatial::kriging::testdata::{nums, pts};
        use crate::spatial::kriging::{Drift, Interpolator, Spec, krige};
        use crate::spatial::mapping::loso;
        use crate::spatial::variogram::VariogramModel;
        let path = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/reference/fixtures/drift.json");
        let f: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
        let xy = |v: &serde_json::Value| -> Vec<[f64; 2]> {
            v.as_array().unwrap().iter().map(|p| [p[0].as_f64().unwrap(), p[1].as_f64().unwrap()]).collect()
        };
        let (s, t) = (pts(&xy(&f["sensors"])), pts(&xy(&f["targets"])));
        let z = nums(&f["values"]);
        let door = xy(&f["door"]);
        let (ds, dt) =
            (distances_to_opening(&s, door[0], door[1]), distances_to_opening(&t, door[0], door[1]));
        let m = &f["model"];
        let model = VariogramModel {
            family: Family::Exponential,
            nugget: m["nugget"].as_f64().unwrap(),
            partial_sill: m["partial_sill"].as_f64().unwrap(),
            range: m["range"].as_f64().unwrap(),
        };
        let spec = |l: f64| Spec {
            method: Interpolator::ExternalDrift,
            model,
            neighbours: None,
            drift: Some(Drift { name: "door".into(), at_sensors: decay(&ds, l), at_targets: decay(&dt, l) }),
        };
        let k = &f["ked"];
        let p = krige(&s, &z, &t, &spec(k["length"].as_f64().unwrap())).unwrap();
        assert_eq!(p.method, Interpolator::ExternalDrift);
        let se = p.se.unwrap();
        for (i, (pv, vv)) in nums(&k["pred"]).iter().zip(nums(&k["var"])).enumerate() {
            assert_relative_eq!(p.value[i], *pv, max_relative = 1e-10);
            assert_relative_eq!(se[i] * se[i], vv, max_relative = 1e-9);
        }
        for case in f["loo"].as_array().unwrap() {
            let l = case["length"].as_f64().unwrap();
            let series = nalgebra::DMatrix::from_row_slice(1, z.len(), &z);
            let sc = loso(&s, &series, &spec(l)).unwrap().unwrap();
            assert_relative_eq!(sc.rmse, case["rmse"].as_f64().unwrap(), max_relative = 1e-9);
            assert_relative_eq!(sc.mean_error, case["mean_error"].as_f64().unwrap(), max_relative = 1e-8);
            assert_relative_eq!(sc.msse.unwrap(), case["msse"].as_f64().unwrap(), max_relative = 1e-9);
        }
    }
}
