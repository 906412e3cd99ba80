//! Plane geometry of the spatial stage: checked point sets (sensors, pots),
//! the distance of a point to an opening's segment, duplicate positions and
//! collinearity. Coordinates are metres on the compartment floor plan.

use super::error::{Result, SpatialError};
use std::path::PathBuf;

/// Prefix of the distance covariates: `distance_<opening>` is the distance
/// in metres from each pot to one `[[openings]]` entry ([`distances_to_opening`]).
pub const DISTANCE_PREFIX: &str = "distance_";

/// Two positions closer than this (metres) count as the same position.
pub const DUPLICATE_TOLERANCE: f64 = 1e-6;

/// A set of named positions in metres, checked to be finite.
#[derive(Debug, Clone)]
pub struct Points {
    /// Identifiers (sensor or pot ids).
    pub ids: Vec<String>,
    /// x in metres.
    pub x: Vec<f64>,
    /// y in metres.
    pub y: Vec<f64>,
}

/// Where a point set came from, for error messages.
#[derive(Debug, Clone, Default)]
pub struct Origin {
    /// The table's path.
    pub path: Option<PathBuf>,
    /// The physical line of each point.
    pub lines: Option<Vec<usize>>,
}

impl Points {
    /// Build a point set, rejecting NaN or infinite coordinates
    /// ([`SpatialError::NonFinitePosition`]) and, when `compartment` =
    /// `Some((length, width))`, positions outside `[0, length] x [0, width]`
    /// ([`SpatialError::OutsideCompartment`]). `what` is "sensor" or "pot".
    pub fn new(
        what: &'static str,
        ids: Vec<String>,
        x: Vec<f64>,
        y: Vec<f64>,
        compartment: Option<(f64, f64)>,
        origin: &Origin,
    ) -> Result<Points> {
        if ids.len() != x.len() || x.len() != y.len() {
            return Err(SpatialError::BadInput {
                what: format!("{what} positions"),
                message: format!("{} ids, {} x and {} y values", ids.len(), x.len(), y.len()),
            });
        }
        for i in 0..ids.len() {
            let line = origin.lines.as_ref().and_then(|l| l.get(i).copied());
            if !(x[i].is_finite() && y[i].is_finite()) {
                return Err(SpatialError::NonFinitePosition {
                    path: origin.path.clone(),
                    line,
                    what,
                    id: ids[i].clone(),
                    x: x[i],
                    y: y[i],
                });
            }
            if let Some((length, width)) = compartment {
                // A millimetre of slack for rounding in hand-measured positions.
                let tol = 1e-3;
                if x[i] < -tol || x[i] > length + tol || y[i] < -tol || y[i] > width + tol {
                    return Err(SpatialError::OutsideCompartment {
                        path: origin.path.clone(),
                        line,
                        what,
                        id: ids[i].clone(),
                        x: x[i],
                        y: y[i],
                        length,
                        width,
                    });
                }
            }
        }
        Ok(Points { ids, x, y })
    }

    /// Number of points.
    pub fn len(&self) -> usize {
        self.x.len()
    }

    /// True when there are no points.
    pub fn is_empty(&self) -> bool {
        self.x.is_empty()
    }

    /// Distance between point `i` of `self` and point `j` of `other`.
    #[inline]
    pub fn dist_to(&self, i: usize, other: &Points, j: usize) -> f64 {
        (self.x[i] - other.x[j]).hypot(self.y[i] - other.y[j])
    }

    /// The subset at `idx`, in that order.
    pub fn subset(&self, idx: &[usize]) -> Points {
        Points {
            ids: idx.iter().map(|&i| self.ids[i].clone()).collect(),
            x: idx.iter().map(|&i| self.x[i]).collect(),
            y: idx.iter().map(|&i| self.y[i]).collect(),
        }
    }

    /// Pairs `(i, j)`, `i < j`, of points closer than [`DUPLICATE_TOLERANCE`].
    /// Cost O(n log n) by sorting on x.
    pub fn duplicates(&self) -> Vec<(usize, usize)> {
        let mut order: Vec<usize> = (0..self.len()).collect();
        order.sort_by(|&a, &b| self.x[a].total_cmp(&self.x[b]));
        let mut out = Vec::new();
        for (k, &a) in order.iter().enumerate() {
            for &b in &order[k + 1..] {
                if self.x[b] - self.x[a] > DUPLICATE_TOLERANCE {
                    break;
                }
                if self.dist_to(a, self, b) <= DUPLICATE_TOLERANCE {
                    out.push((a.min(b), a.max(b)));
                }
            }
        }
        out.sort_unstable();
        out
    }

    /// True when all points lie on one straight line (within 1e-9 of the
    /// spread, relative), including the cases of fewer than three distinct
    /// points. Computed from the smallest eigenvalue of the 2 x 2 covariance
    /// matrix of the coordinates.
    pub fn collinear(&self) -> bool {
        let n = self.len();
        if n < 3 {
            return true;
        }
        let mx = self.x.iter().sum::<f64>() / n as f64;
        let my = self.y.iter().sum::<f64>() / n as f64;
        let (mut sxx, mut syy, mut sxy) = (0.0, 0.0, 0.0);
        for i in 0..n {
            let (dx, dy) = (self.x[i] - mx, self.y[i] - my);
            sxx += dx * dx;
            syy += dy * dy;
            sxy += dx * dy;
        }
        let tr = sxx + syy;
        let det = sxx * syy - sxy * sxy;
        let disc = ((tr * tr / 4.0) - det).max(0.0).sqrt();
        let lmin = tr / 2.0 - disc;
        lmin <= 1e-9 * tr.max(f64::MIN_POSITIVE)
    }

    /// The largest distance between two points (0 for fewer than two).
    /// Cost O(n^2); used on sensor sets.
    pub fn max_distance(&self) -> f64 {
        let mut m: f64 = 0.0;
        for i in 0..self.len() {
            for j in i + 1..self.len() {
                m = m.max(self.dist_to(i, self, j));
            }
        }
        m
    }
}

/// Distance in metres from point `(px, py)` to the nearest point of the
/// segment from `a` to `b` (a point when `a == b`): the projection parameter
/// `t = ((p - a)·(b - a)) / |b - a|^2` is clamped to `[0, 1]` and the distance
/// to `a + t (b - a)` returned. O(1).
pub fn distance_to_segment(px: f64, py: f64, a: [f64; 2], b: [f64; 2]) -> f64 {
    let (dx, dy) = (b[0] - a[0], b[1] - a[1]);
    let len2 = dx * dx + dy * dy;
    let t = if len2 > 0.0 { (((px - a[0]) * dx + (py - a[1]) * dy) / len2).clamp(0.0, 1.0) } else { 0.0 };
    (px - (a[0] + t * dx)).hypot(py - (a[1] + t * dy))
}

/// Distance of every point to one opening's segment (see
/// [`distance_to_segment`]): the `distance_<opening>` covariate.
pub fn distances_to_opening(points: &Points, from: [f64; 2], to: [f64; 2]) -> Vec<f64> {
    (0..points.len()).map(|i| distance_to_segment(points.x[i], points.y[i], from, to)).collect()
}

/// The sensors of the sensor table as a checked point set (errors name the
/// table and line; positions must lie in the compartment when one is given).
pub fn sensor_points(
    sensors: &crate::io::layout::Sensors,
    compartment: Option<crate::io::study::Compartment>,
) -> Result<Points> {
    let origin = Origin { path: Some(sensors.table.path.clone()), lines: Some(sensors.table.lines.clone()) };
    Points::new(
        "sensor",
        sensors.ids.clone(),
        sensors.x.clone(),
        sensors.y.clone(),
        compartment.map(|c| (c.length, c.width)),
        &origin,
    )
}

/// The pots of the pot table as a checked point set (as [`sensor_points`]).
pub fn pot_points(
    pots: &crate::io::layout::Pots,
    compartment: Option<crate::io::study::Compartment>,
) -> Result<Points> {
    let origin = Origin { path: Some(pots.table.path.clone()), lines: Some(pots.table.lines.clone()) };
    Points::new(
        "pot",
        pots.ids.clone(),
        pots.x.clone(),
        pots.y.clone(),
        compartment.map(|c| (c.length, c.width)),
        &origin,
    )
}

/// The `distance_<name>` covariate of every `[[openings]]` entry, in the
/// order declared: `(name, metres from each point to the segment)`.
pub fn opening_distances(openings: &[crate::io::study::Opening], points: &Points) -> Vec<(String, Vec<f64>)> {
    openings.iter().map(|o| (o.name.clone(), distances_to_opening(points, o.from, o.to))).collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    fn pts(x: &[f64], y: &[f64]) -> Points {
        let ids = (0..x.len()).map(|i| format!("s{i}")).collect();
        Points::new("sensor", ids, x.to_vec(), y.to_vec(), None, &Origin::default()).unwrap()
    }

    /// Hand-computed cases: perpendicular foot inside the segment, beyond
    /// either end (distance to the end point), and a degenerate segment.
    #[test]
    fn segment_distance() {
        let (a, b) = ([0.0, 0.0], [4.0, 0.0]);
        assert_relative_eq!(distance_to_segment(2.0, 3.0, a, b), 3.0);
        assert_relative_eq!(distance_to_segment(7.0, 4.0, a, b), 5.0);
        assert_relative_eq!(distance_to_segment(-3.0, -4.0, a, b), 5.0);
        assert_relative_eq!(distance_to_segment(1.0, 1.0, [2.0, 2.0], [2.0, 2.0]), 2f64.sqrt());
        // Slanted segment from (0,0) to (2,2): the point (2,0) projects to (1,1).
        assert_relative_eq!(distance_to_segment(2.0, 0.0, [0.0, 0.0], [2.0, 2.0]), 2f64.sqrt());
    }

    #[test]
    fn bad_positions_are_typed_errors() {
        let o = Origin { path: Some("sensors.csv".into()), lines: Some(vec![2, 3]) };
        let e = Points::new(
            "sensor",
            vec!["a".into(), "b".into()],
            vec![1.0, f64::NAN],
            vec![1.0, 1.0],
            None,
            &o,
        )
        .unwrap_err();
        let msg = e.to_string();
        assert!(matches!(e, SpatialError::NonFinitePosition { .. }));
        assert!(msg.contains("sensors.csv:3") && msg.contains("`b`"), "{msg}");
        let e = Points::new(
            "sensor",
            vec!["a".into(), "b".into()],
            vec![1.0, 12.5],
            vec![1.0, 1.0],
            Some((10.0, 5.0)),
            &o,
        )
        .unwrap_err();
        let msg = e.to_string();
        assert!(matches!(e, SpatialError::OutsideCompartment { .. }));
        assert!(msg.contains("12.5") && msg.contains("[0, 10]"), "{msg}");
    }

    /// Sensor-table positions: the error names the file and the row's own
    /// line; opening distances come in declaration order.
    #[test]
    fn sensor_table_and_openings() {
        let table = crate::io::table::Table {
            path: "layout/sensors.csv".into(),
            headers: vec!["id".into(), "x".into(), "y".into()],
            header_line: 3,
            rows: vec![],
            lines: vec![4, 6],
        };
        let s = crate::io::layout::Sensors {
            ids: vec!["L1".into(), "L2".into()],
            x: vec![1.0, 2.0],
            y: vec![1.0, 9.0],
            z: None,
            table,
        };
        let c = crate::io::study::Compartment { length: 10.0, width: 5.0 };
        let e = sensor_points(&s, Some(c)).unwrap_err().to_string();
        assert!(e.contains("layout/sensors.csv:6") && e.contains("L2") && e.contains("outside"), "{e}");
        let p = sensor_points(&s, None).unwrap();
        let o = vec![
            crate::io::study::Opening { name: "door".into(), from: [0.0, 0.0], to: [0.0, 10.0] },
            crate::io::study::Opening { name: "vent".into(), from: [5.0, 9.0], to: [5.0, 9.0] },
        ];
        let d = opening_distances(&o, &p);
        assert_eq!(d[0].0, "door");
        assert_eq!(d[0].1, vec![1.0, 2.0]);
        assert_relative_eq!(d[1].1[1], 3.0);
    }

    #[test]
    fn duplicates_and_collinearity() {
        let p = pts(&[0.0, 1.0, 0.0, 2.0], &[0.0, 1.0, 0.0, 2.0]);
        assert_eq!(p.duplicates(), vec![(0, 2)]);
        assert!(p.collinear());
        let q = pts(&[0.0, 1.0, 0.0], &[0.0, 0.0, 1.0]);
        assert!(!q.collinear());
        assert!(q.duplicates().is_empty());
        assert_relative_eq!(q.max_distance(), 2f64.sqrt());
    }
}
