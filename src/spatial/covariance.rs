//! The one covariance model of the crate and its matrix fill.
//!
//! A stationary, isotropic covariance with one parametrisation:
//!
//! `Cov(Z(s_i), Z(s_j)) = scale [(1 - eta) rho(d_ij; range) + eta 1{i = j}]`
//!
//! with `rho` a family of [`crate::spatial::correlation`], `range` its range
//! parameter in metres, `eta` in `[0, 1)` the nugget share (the part of the
//! variance that is independent between observations) and `scale` the total
//! variance (units of the variable, squared). The likelihood and GLS use
//! `scale = 1` (a correlation matrix `V`, with `sigma2` profiled); kriging,
//! the imputations and the field simulator use the variable's own variance.
//!
//! Kriging states its model as a variogram (nugget `c0`, partial sill `c`,
//! Cressie 1993, *Statistics for Spatial Data*, §2.3): it converts in one
//! place, [`Kernel::from_variogram`], with `scale = c0 + c` and
//! `eta = c0 / (c0 + c)`.
//!
//! The kernel keeps the two numbers the matrices need, the diagonal
//! (`scale`) and the factor of `rho` off the diagonal (`(1 - eta) scale`),
//! so that every fill computes each entry in the same way. Two *different*
//! observations at distance 0 are correlated `(1 - eta)`, not 1 (their
//! nugget parts are independent); [`Kernel::at_distance`] is the one
//! exception, for a target point that may coincide with an observation
//! (kriging's right-hand side, `docs/spatial.md`).
//!
//! Cost of a fill: one correlation evaluation per entry (`n^2/2` for the
//! symmetric fill, `n m` for the cross fill); the symmetric fill runs over
//! column blocks of equal work on up to 8 threads from `n = 256` on.

use super::correlation::Family;
use super::geometry::DUPLICATE_TOLERANCE;
use super::variogram::VariogramModel;
use faer::Mat;

/// Correlation parameters of `V = (1 - eta) R(d; range) + eta I` (the
/// kernel with `scale = 1`).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct CovParams {
    /// The correlation family.
    pub family: Family,
    /// Range parameter `a` in metres (see [`Family::correlation`]).
    pub range: f64,
    /// Nugget share `eta` in `[0, 1)`.
    pub eta: f64,
}

/// A covariance model ready to fill matrices: see the module docs.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Kernel {
    /// The correlation family.
    pub family: Family,
    /// Range parameter in metres.
    pub range: f64,
    /// The diagonal: the total variance `scale`.
    pub total: f64,
    /// The factor of `rho` between different observations: `(1 - eta) scale`.
    pub structured: f64,
}

impl Kernel {
    /// The correlation kernel `(1 - eta) R + eta I` (scale 1) of `p`.
    pub fn correlation(p: &CovParams) -> Kernel {
        Kernel { family: p.family, range: p.range, total: 1.0, structured: 1.0 - p.eta }
    }

    /// `scale` times the correlation kernel of `p`.
    pub fn scaled(p: &CovParams, scale: f64) -> Kernel {
        Kernel { family: p.family, range: p.range, total: scale, structured: (1.0 - p.eta) * scale }
    }

    /// The covariance of a variogram model: `scale = c0 + c` (the sill),
    /// off-diagonal factor `c` (the partial sill), i.e. `eta = c0 / (c0 + c)`.
    /// This is the one conversion between the two parametrisations.
    pub fn from_variogram(m: &VariogramModel) -> Kernel {
        Kernel {
            family: m.family,
            range: m.range,
            total: m.nugget + m.partial_sill,
            structured: m.partial_sill,
        }
    }

    /// The nugget share `eta = 1 - structured / total`.
    pub fn eta(&self) -> f64 {
        1.0 - self.structured / self.total
    }

    /// Covariance of two *different* observations at distance `d` metres:
    /// `(1 - eta) scale rho(d)` (also at `d = 0`).
    #[inline]
    pub fn between(&self, d: f64) -> f64 {
        self.structured * self.family.correlation(d, self.range)
    }

    /// Covariance of an observation and a target point at distance `d`: the
    /// full `scale` when they coincide (`d` up to
    /// [`DUPLICATE_TOLERANCE`]), else [`Kernel::between`].
    #[inline]
    pub fn at_distance(&self, d: f64) -> f64 {
        if d <= DUPLICATE_TOLERANCE { self.total } else { self.between(d) }
    }

    /// The symmetric `n x n` matrix over one point set (`dist(i, j)` the
    /// distance in metres): `scale` on the diagonal, [`Kernel::between`]
    /// elsewhere. Only the lower triangle is filled; the upper is zero
    /// (what [`crate::spatial::factor::Cholesky`] reads).
    pub fn fill_lower<D: Fn(usize, usize) -> f64 + Sync>(&self, n: usize, dist: D) -> Mat<f64> {
        let mut m = Mat::<f64>::zeros(n, n);
        fill_lower_into(&mut m, self, &dist);
        m
    }

    /// The full symmetric matrix (both triangles) of [`Kernel::fill_lower`].
    pub fn fill_symmetric<D: Fn(usize, usize) -> f64 + Sync>(&self, n: usize, dist: D) -> Mat<f64> {
        let mut m = self.fill_lower(n, dist);
        for j in 0..n {
            for i in 0..j {
                m[(i, j)] = m[(j, i)];
            }
        }
        m
    }

    /// The `rows x cols` matrix between two point sets, `f(d(r, c))` with
    /// `f` one of [`Kernel::between`] (different points) or
    /// [`Kernel::at_distance`] (a target may coincide with an observation).
    pub fn fill_cross<D: Fn(usize, usize) -> f64>(
        &self,
        rows: usize,
        cols: usize,
        dist: D,
        coincide: Coincide,
    ) -> Mat<f64> {
        Mat::from_fn(rows, cols, |r, c| match coincide {
            Coincide::Distinct => self.between(dist(r, c)),
            Coincide::Possible => self.at_distance(dist(r, c)),
        })
    }
}

/// Whether two point sets of a cross fill can share a point.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Coincide {
    /// Different observations: [`Kernel::between`] even at distance 0.
    Distinct,
    /// A target may stand where an observation is: [`Kernel::at_distance`].
    Possible,
}

/// Fill the lower triangle of `m` (column-major, faer) in parallel over
/// column blocks of equal work.
fn fill_lower_into<D: Fn(usize, usize) -> f64 + Sync>(m: &mut Mat<f64>, k: &Kernel, dist: &D) {
    fill_lower_columns(m, |j, col| {
        col[j] = k.total;
        for (i, c) in col.iter_mut().enumerate().skip(j + 1) {
            *c = k.between(dist(i, j));
        }
    });
}

/// Call `f(j, column j)` for every column of the square matrix `m`
/// (column-major, faer), `f` writing the lower part (rows `j..n`) of the
/// column; over column blocks of equal lower-triangle work on up to 8
/// threads from `n = 256` on, on the calling thread alone inside
/// [`crate::spatial::factor::sequential`].
pub(crate) fn fill_lower_columns<F: Fn(usize, &mut [f64]) + Sync>(m: &mut Mat<f64>, f: F) {
    let n = m.nrows();
    let threads = if super::factor::is_sequential() {
        1
    } else {
        std::thread::available_parallelism().map(|t| t.get()).unwrap_or(1).min(8)
    };
    let fill_cols = |mut part: faer::MatMut<'_, f64>, j0: usize| {
        for jj in 0..part.ncols() {
            let col = part
                .as_mut()
                .col_mut(jj)
                .try_as_col_major_mut()
                .expect("owned columns are contiguous")
                .as_slice_mut();
            f(j0 + jj, col);
        }
    };
    if threads <= 1 || n < 256 {
        fill_cols(m.as_mut(), 0);
        return;
    }
    // split columns so that each block has about the same number of lower-triangle entries
    let total = (n * (n + 1) / 2) as f64;
    let mut cuts = vec![0usize];
    let mut acc = 0.0;
    for j in 0..n {
        acc += (n - j) as f64;
        if acc >= total * cuts.len() as f64 / threads as f64 && cuts.len() < threads {
            cuts.push(j + 1);
        }
    }
    cuts.push(n);
    cuts.dedup();
    std::thread::scope(|s| {
        let mut rest = m.as_mut();
        let mut start = 0usize;
        for w in cuts.windows(2) {
            let width = w[1] - w[0];
            let (left, right) = rest.split_at_col_mut(width);
            rest = right;
            let j0 = start;
            start += width;
            let g = &fill_cols;
            s.spawn(move || g(left, j0));
        }
    });
}

/// The derivative of the correlation `rho(d; a)` with respect to the log of
/// the range parameter, `d rho / d ln a = -h rho'(h)` at `h = d / a`, given
/// `rho` itself (which the closed forms reuse):
///
/// * exponential `rho = e^-h`: `h rho`;
/// * Gaussian `rho = e^-h^2`: `2 h^2 rho`;
/// * spherical `rho = 1 - 1.5 h + 0.5 h^3` (`h < 1`): `1.5 h (1 - h^2)`, 0
///   beyond (continuous at `h = 1`, so the likelihood is differentiable in
///   the range);
/// * Matérn with `s = sqrt(2 nu) h`: `2^(1-nu)/Gamma(nu) s^(nu+1) K_(nu-1)(s)`,
///   from `d/ds [s^nu K_nu(s)] = -s^nu K_(nu-1)(s)` (Abramowitz & Stegun 1964,
///   9.6.28) and `K_-v = K_v`; closed forms `s^2 e^-s` (nu = 1.5) and
///   `s^2 (1 + s) e^-s / 3` (nu = 2.5).
///
/// Dimensionless. Cost O(1), a Bessel function for a Matérn smoothness other
/// than 0.5, 1.5, 2.5.
#[inline]
pub fn dcorrelation_dlog_range(family: Family, d: f64, range: f64, rho: f64) -> f64 {
    let h = d / range;
    match family {
        Family::Exponential => h * rho,
        Family::Gaussian => 2.0 * h * h * rho,
        Family::Spherical => {
            if h < 1.0 {
                1.5 * h * (1.0 - h * h)
            } else {
                0.0
            }
        }
        Family::Matern { nu } => {
            if h <= 0.0 {
                return 0.0;
            }
            if nu == 0.5 {
                return h * rho;
            }
            let s = (2.0 * nu).sqrt() * h;
            if nu == 1.5 {
                return s * s * (-s).exp();
            }
            if nu == 2.5 {
                return s * s * (1.0 + s) * (-s).exp() / 3.0;
            }
            if !(1e-8..=700.0).contains(&s) {
                return 0.0;
            }
            let log_c = (1.0 - nu) * std::f64::consts::LN_2 - statrs::function::gamma::ln_gamma(nu);
            let k = super::correlation::bessel_k((nu - 1.0).abs(), s);
            if k <= 0.0 {
                return 0.0;
            }
            (log_c + (nu + 1.0) * s.ln() + k.ln()).exp()
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// Three points on a line at 0, 1 and 3 m, exponential, range 2, nugget
    /// share 0.25, scale 4 (hand): diagonal 4, off-diagonal
    /// `3 exp(-d/2)`: 3 e^-0.5, 3 e^-1.5, 3 e^-1.
    #[test]
    fn fill_matches_hand_values() {
        let x = [0.0f64, 1.0, 3.0];
        let k = Kernel::scaled(&CovParams { family: Family::Exponential, range: 2.0, eta: 0.25 }, 4.0);
        let m = k.fill_symmetric(3, |i, j| (x[i] - x[j]).abs());
        assert_relative_eq!(m[(0, 0)], 4.0);
        assert_relative_eq!(m[(1, 0)], 3.0 * (-0.5f64).exp(), epsilon = 1e-15);
        assert_relative_eq!(m[(0, 2)], 3.0 * (-1.5f64).exp(), epsilon = 1e-15);
        assert_relative_eq!(m[(2, 1)], 3.0 * (-1.0f64).exp(), epsilon = 1e-15);
        assert_relative_eq!(k.eta(), 0.25, epsilon = 1e-15);
    }

    /// The variogram conversion keeps the sill on the diagonal and the
    /// partial sill off it; a target on an observation gets the sill.
    #[test]
    fn variogram_conversion() {
        let v = VariogramModel { family: Family::Spherical, nugget: 0.5, partial_sill: 1.5, range: 3.0 };
        let k = Kernel::from_variogram(&v);
        assert_eq!(k.total, 2.0);
        assert_relative_eq!(k.eta(), 0.25);
        assert_eq!(k.at_distance(0.0), 2.0);
        assert_eq!(k.between(0.0), 1.5);
        assert_eq!(k.between(1.0), v.cross_covariance(1.0));
        assert_eq!(k.at_distance(1.0), v.covariance(1.0));
    }

    /// The parallel fill equals the serial one entry by entry (n = 300).
    #[test]
    fn parallel_fill_equals_serial() {
        let n = 300;
        let x: Vec<f64> = (0..n).map(|i| (i as f64 * 0.37).sin() * 5.0).collect();
        let y: Vec<f64> = (0..n).map(|i| (i as f64 * 0.11).cos() * 5.0).collect();
        let k = Kernel::correlation(&CovParams { family: Family::Gaussian, range: 1.3, eta: 0.1 });
        let m = k.fill_lower(n, |i, j| (x[i] - x[j]).hypot(y[i] - y[j]));
        for j in 0..n {
            for i in j..n {
                let want = if i == j { 1.0 } else { k.between((x[i] - x[j]).hypot(y[i] - y[j])) };
                assert_eq!(m[(i, j)], want);
            }
        }
    }

    /// The analytic derivative in the log range equals a central difference
    /// of the correlation itself (step 1e-5 in ln a) for every family, at
    /// distances on both sides of the spherical range.
    #[test]
    fn log_range_derivative_matches_differences() {
        for family in [
            Family::Exponential,
            Family::Gaussian,
            Family::Spherical,
            Family::Matern { nu: 1.5 },
            Family::Matern { nu: 2.5 },
            Family::Matern { nu: 0.8 },
            Family::Matern { nu: 3.3 },
        ] {
            for d in [0.05, 0.4, 1.1, 1.9, 2.6, 4.0] {
                let a: f64 = 2.0;
                let e: f64 = 1e-5;
                let num =
                    (family.correlation(d, a * e.exp()) - family.correlation(d, a * (-e).exp())) / (2.0 * e);
                let got = dcorrelation_dlog_range(family, d, a, family.correlation(d, a));
                assert!((got - num).abs() < 1e-7, "{family} d {d}: {got} vs {num}");
            }
        }
    }
}
