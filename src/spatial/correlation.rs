//! Correlation families shared by kriging ([`crate::spatial`]), the spatial
//! GLS trait models ([`crate::model`]) and the random fields of
//! [`crate::simulate`]. There is exactly one implementation of each family in
//! the crate, so that a range fitted by one stage means the same thing in every
//! other stage.
//!
//! # Conventions (stated once, used everywhere; see `docs/spatial.md`)
//!
//! With `h = d / a`, `d` the distance in metres and `a > 0` the *range
//! parameter* (metres):
//!
//! | family | correlation `rho(d; a)` | practical range (`rho = 0.05`) |
//! |---|---|---|
//! | exponential | `exp(-h)` | `ln(20) a = 2.9957 a` |
//! | Gaussian | `exp(-h^2)` | `sqrt(ln 20) a = 1.7308 a` |
//! | spherical | `1 - 1.5 h + 0.5 h^3` for `h < 1`, else `0` | `a` (correlation is exactly 0 from `a` on) |
//! | Matérn(nu) | `2^(1-nu)/Gamma(nu) s^nu K_nu(s)`, `s = sqrt(2 nu) h` | solved numerically (`2.739 a` at nu = 1.5, `2.647 a` at nu = 2.5) |
//!
//! The Matérn family uses the `sqrt(2 nu)` scaling (Stein 1999, *Interpolation
//! of Spatial Data*, §2.10; Rasmussen & Williams 2006, *Gaussian Processes for
//! Machine Learning*, eq. 4.14), so that nu = 0.5 is exactly the exponential
//! family with the same `a`, and nu -> infinity tends to `exp(-h^2/2)`.
//! The exponential, Gaussian and spherical forms follow Journel & Huijbregts
//! (1978), *Mining Geostatistics*, and Cressie (1993), *Statistics for Spatial
//! Data*, §2.3.1.
//!
//! The *practical range* is the distance at which the correlation falls to
//! 0.05, i.e. where the semivariogram reaches 95 % of the partial sill above the
//! nugget (not 95 % of the total sill).

use serde::{Deserialize, Serialize};
use std::fmt;

/// A stationary, isotropic correlation family.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(try_from = "String", into = "String")]
pub enum Family {
    /// `exp(-d/a)`.
    Exponential,
    /// `exp(-(d/a)^2)`.
    Gaussian,
    /// `1 - 1.5 h + 0.5 h^3` for `h = d/a < 1`, else 0.
    Spherical,
    /// Matérn with smoothness `nu > 0` in the `sqrt(2 nu) d / a` scaling.
    Matern {
        /// Smoothness; 0.5, 1.5 and 2.5 use closed forms.
        nu: f64,
    },
}

impl Family {
    /// Every family name the parser accepts, for help texts and error hints.
    pub const NAMES: &'static [&'static str] = &[
        "exponential",
        "gaussian",
        "spherical",
        "matern_1.5",
        "matern_2.5",
        "matern_<nu> (any nu > 0, e.g. matern_0.8)",
    ];

    /// Parse a family name: `exponential`, `gaussian`, `spherical`,
    /// `matern_1.5`, `matern_2.5` or `matern_<nu>` with any positive `nu`.
    pub fn parse(name: &str) -> Result<Family, String> {
        let lower = name.trim().to_ascii_lowercase();
        match lower.as_str() {
            "exponential" => return Ok(Family::Exponential),
            "gaussian" => return Ok(Family::Gaussian),
            "spherical" => return Ok(Family::Spherical),
            _ => {}
        }
        if let Some(nu) = lower.strip_prefix("matern_") {
            return match nu.parse::<f64>() {
                Ok(nu) if nu.is_finite() && nu > 0.0 && nu <= 50.0 => Ok(Family::Matern { nu }),
                _ => Err(format!(
                    "`{name}`: the Matérn smoothness after `matern_` must be a number in (0, 50], e.g. matern_1.5"
                )),
            };
        }
        Err(format!("unknown correlation family `{name}`; expected one of: {}", Family::NAMES.join(", ")))
    }

    /// The canonical name, which [`Family::parse`] reads back.
    pub fn name(&self) -> String {
        match self {
            Family::Exponential => "exponential".into(),
            Family::Gaussian => "gaussian".into(),
            Family::Spherical => "spherical".into(),
            Family::Matern { nu } => format!("matern_{nu}"),
        }
    }

    /// Correlation at distance `d >= 0` for range parameter `range > 0`
    /// (both in the same unit, metres in this crate). Returns 1 at `d = 0`.
    ///
    /// Cost: O(1) for the closed forms; about 75 exponentials for a Matérn
    /// smoothness other than 0.5, 1.5 and 2.5 (see [`bessel_k`]).
    #[inline]
    pub fn correlation(&self, d: f64, range: f64) -> f64 {
        let h = d / range;
        match *self {
            Family::Exponential => (-h).exp(),
            Family::Gaussian => (-h * h).exp(),
            Family::Spherical => {
                if h < 1.0 {
                    1.0 - 1.5 * h + 0.5 * h * h * h
                } else {
                    0.0
                }
            }
            Family::Matern { nu } => matern(nu, h),
        }
    }

    /// The practical range for range parameter `range`: the distance at which
    /// the correlation equals 0.05 (for the spherical family, where it reaches
    /// zero: `range` itself).
    pub fn practical_range(&self, range: f64) -> f64 {
        let ln20 = 20f64.ln();
        match *self {
            Family::Exponential => ln20 * range,
            Family::Gaussian => ln20.sqrt() * range,
            Family::Spherical => range,
            Family::Matern { nu } => {
                if nu == 0.5 {
                    return ln20 * range;
                }
                // rho is decreasing in h; bisect rho(h) = 0.05 on [0, 100].
                let (mut lo, mut hi) = (0.0f64, 100.0f64);
                for _ in 0..200 {
                    let mid = 0.5 * (lo + hi);
                    if matern(nu, mid) > 0.05 {
                        lo = mid;
                    } else {
                        hi = mid;
                    }
                }
                0.5 * (lo + hi) * range
            }
        }
    }
}

impl fmt::Display for Family {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.name())
    }
}

impl TryFrom<String> for Family {
    type Error = String;
    fn try_from(s: String) -> Result<Self, Self::Error> {
        Family::parse(&s)
    }
}

impl From<Family> for String {
    fn from(f: Family) -> String {
        f.name()
    }
}

/// Matérn correlation at scaled distance `h = d / a` (the `sqrt(2 nu)` form).
fn matern(nu: f64, h: f64) -> f64 {
    if h <= 0.0 {
        return 1.0;
    }
    if nu == 0.5 {
        return (-h).exp();
    }
    if nu == 1.5 {
        let s = 3f64.sqrt() * h;
        return (1.0 + s) * (-s).exp();
    }
    if nu == 2.5 {
        let s = 5f64.sqrt() * h;
        return (1.0 + s + s * s / 3.0) * (-s).exp();
    }
    let s = (2.0 * nu).sqrt() * h;
    if s < 1e-8 {
        return 1.0;
    }
    if s > 700.0 {
        return 0.0;
    }
    // 2^(1-nu)/Gamma(nu) s^nu K_nu(s), evaluated in logs to avoid overflow of
    // K_nu at small s and of s^nu at large nu.
    let log_c = (1.0 - nu) * std::f64::consts::LN_2 - statrs::function::gamma::ln_gamma(nu);
    let k = bessel_k(nu, s);
    if k <= 0.0 {
        return 0.0;
    }
    (log_c + nu * s.ln() + k.ln()).exp().min(1.0)
}

/// Modified Bessel function of the second kind `K_nu(x)` for `x > 0`, by the
/// trapezoidal rule on the integral representation
/// `K_nu(x) = ∫_0^∞ exp(-x cosh t) cosh(nu t) dt`
/// (Abramowitz & Stegun 1964, *Handbook of Mathematical Functions*, 9.6.24).
///
/// The integrand is analytic and decays double-exponentially, so the
/// trapezoidal rule converges geometrically; the step shrinks as
/// `1/sqrt(x)` because the integrand's width does. Relative error below 1e-8
/// for `nu` in (0, 10] and `x` in [1e-6, 600] against scipy's `kv`
/// (checked in the tests below); at most a few hundred terms.
pub fn bessel_k(nu: f64, x: f64) -> f64 {
    debug_assert!(x > 0.0);
    let h = (0.5 / x.sqrt()).min(0.1);
    let mut sum = 0.5 * (-x).exp();
    let mut t = 0.0;
    for _ in 0..100_000 {
        t += h;
        let f = (-x * t.cosh() + (nu * t).min(700.0)).exp() * 0.5 * (1.0 + (-2.0 * nu * t).exp());
        sum += f;
        if x * t.sinh() > nu && f < 1e-17 * sum {
            break;
        }
    }
    h * sum
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// Check values: scikit-learn 1.9.1 `Matern(length_scale=1.7, nu)` at
    /// d = 0.5, 1, 2, 4 (../shared/CROSSCHECKS.md §3, `out/s03.txt`), which uses
    /// the same sqrt(2 nu) scaling as this module.
    #[test]
    fn matern_matches_general_purpose_gp_library() {
        let d = [0.5, 1.0, 2.0, 4.0];
        let cases: [(f64, [f64; 4]); 4] = [
            (0.5, [0.745188817, 0.555306373, 0.3083651679, 0.0950890768]),
            (1.0, [0.8666037761, 0.6750672653, 0.3662317771, 0.0905731973]),
            (1.5, [0.9069238478, 0.7288235052, 0.395895919, 0.0862068504]),
            (2.5, [0.9334598079, 0.7761778718, 0.4276780701, 0.0803603051]),
        ];
        for (nu, want) in cases {
            for (di, w) in d.iter().zip(want) {
                let got = Family::Matern { nu }.correlation(*di, 1.7);
                assert_relative_eq!(got, w, max_relative = 1e-8);
            }
        }
    }

    /// Check values: ../shared/REFERENCE.md §4.1 table (c = 1, a = 1, no
    /// nugget; semivariance = 1 - correlation) for the spherical, exponential
    /// and Gaussian families.
    #[test]
    fn classical_families_match_reference_table() {
        let rows = [
            (0.25, 0.367188, 0.221199, 0.060587),
            (0.5, 0.687500, 0.393469, 0.221199),
            (1.0, 1.0, 0.632121, 0.632121),
            (2.0, 1.0, 0.864665, 0.981684),
            (3.0, 1.0, 0.950213, 0.999877),
        ];
        for (h, sph, exp, gau) in rows {
            assert!((1.0 - Family::Spherical.correlation(h, 1.0) - sph).abs() < 1e-6);
            assert!((1.0 - Family::Exponential.correlation(h, 1.0) - exp).abs() < 1e-6);
            assert!((1.0 - Family::Gaussian.correlation(h, 1.0) - gau).abs() < 1e-6);
        }
    }

    /// The general-nu path (Bessel integral) must reproduce the closed forms.
    #[test]
    fn bessel_path_reproduces_closed_forms() {
        for &nu in &[1.5f64, 2.5] {
            for &h in &[1e-4, 0.01, 0.3, 1.0, 2.0, 5.0, 20.0] {
                let closed = Family::Matern { nu }.correlation(h, 1.0);
                let s = (2.0 * nu).sqrt() * h;
                let via_k =
                    (2f64).powf(1.0 - nu) / statrs::function::gamma::gamma(nu) * s.powf(nu) * bessel_k(nu, s);
                assert_relative_eq!(closed, via_k, max_relative = 1e-8, epsilon = 1e-300);
            }
        }
    }

    /// Check values: scipy 1.17.1 `scipy.special.kv(nu, x)`, printed with
    /// `repr(float(kv(nu, x)))` for the (nu, x) pairs listed here.
    #[test]
    fn bessel_k_matches_scipy() {
        let cases = [
            (0.3, 1e-3, 14.406547529041038),
            (1.0, 0.1, 9.853844780870606),
            (1.0, 1.0, 0.6019072301972346),
            (0.8, 3.0, 0.038121704182096226),
            (5.0, 0.5, 12097.979476096392),
            (2.2, 30.0, 2.308550810254649e-14),
            (0.7, 300.0, 3.726732058793266e-132),
        ];
        for (nu, x, want) in cases {
            assert_relative_eq!(bessel_k(nu, x), want, max_relative = 1e-8);
        }
    }

    /// Practical ranges: ../shared/REFERENCE.md §4.1 "Matérn distance where
    /// correlation = 0.05", rho-form column (2.739 at nu = 1.5, 2.647 at 2.5),
    /// and 3a / sqrt(3) a for the exponential / Gaussian (to the stated 3
    /// decimals: ln 20 = 2.996, sqrt(ln 20) = 1.731).
    #[test]
    fn practical_ranges() {
        assert!((Family::Matern { nu: 1.5 }.practical_range(1.0) - 2.739).abs() < 1e-3);
        assert!((Family::Matern { nu: 2.5 }.practical_range(1.0) - 2.647).abs() < 1e-3);
        assert!((Family::Exponential.practical_range(2.0) - 2.0 * 2.996).abs() < 1e-3);
        assert!((Family::Gaussian.practical_range(1.0) - 1.731).abs() < 1e-3);
        assert_eq!(Family::Spherical.practical_range(4.0), 4.0);
        for f in [Family::Exponential, Family::Gaussian, Family::Matern { nu: 0.8 }] {
            let pr = f.practical_range(3.0);
            assert_relative_eq!(f.correlation(pr, 3.0), 0.05, max_relative = 1e-6);
        }
    }

    #[test]
    fn parse_round_trip_and_errors() {
        for f in [
            Family::Exponential,
            Family::Gaussian,
            Family::Spherical,
            Family::Matern { nu: 1.5 },
            Family::Matern { nu: 0.8 },
        ] {
            assert_eq!(Family::parse(&f.name()).unwrap(), f);
        }
        let e = Family::parse("expnential").unwrap_err();
        assert!(e.contains("expnential") && e.contains("exponential"));
        assert!(Family::parse("matern_-1").is_err());
    }
}
