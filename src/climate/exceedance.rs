//! Threshold indicators as expectations over a Gaussian predictive
//! distribution: the expected share of a step spent below or above a
//! threshold, and the expected capped excess over a base, for a value known
//! only as `T ~ N(mu, sigma^2)` (a kriged temperature and its kriging standard
//! error, nugget included).
//!
//! Counting the steps at which a kriged (smoothed) series crosses a threshold
//! undercounts the crossings of the true series: the kriged mean stays above a
//! threshold that the true value crosses (the smoothing effect of kriging,
//! Cressie 1993, *Statistics for Spatial Data*, rev. ed., §5.6 on nonlinear
//! functionals; Chilès & Delfiner 2012, *Geostatistics*, 2nd ed., §6.2 on
//! indicator estimation). The conditional expectation of the indicator,
//! `E[1{T < b}] = Phi((b - mu) / sigma)`, is its best predictor under the
//! Gaussian model, and summed over steps it gives expected hours below.
//! With `sigma = 0` the formulas reduce to the counting rules of
//! [`super::indicator`] (strict thresholds).

use statrs::function::erf::erfc;

/// The standard normal distribution function `Phi(z) = erfc(-z / sqrt 2) / 2`
/// (Abramowitz & Stegun 1964, 26.2.29), accurate in both tails.
pub fn normal_cdf(z: f64) -> f64 {
    0.5 * erfc(-z / std::f64::consts::SQRT_2)
}

/// The standard normal density `phi(z) = exp(-z^2 / 2) / sqrt(2 pi)`.
pub fn normal_pdf(z: f64) -> f64 {
    (-0.5 * z * z).exp() / (2.0 * std::f64::consts::PI).sqrt()
}

/// `P(T < b)` for `T ~ N(mu, sigma^2)`: `Phi((b - mu) / sigma)`; with
/// `sigma = 0` (or not finite) the indicator `mu < b` itself.
pub fn prob_below(mu: f64, sigma: f64, b: f64) -> f64 {
    if sigma > 0.0 && sigma.is_finite() { normal_cdf((b - mu) / sigma) } else { f64::from(u8::from(mu < b)) }
}

/// `P(T > b)` for `T ~ N(mu, sigma^2)`: `Phi((mu - b) / sigma)`; with
/// `sigma = 0` the indicator `mu > b`.
pub fn prob_above(mu: f64, sigma: f64, b: f64) -> f64 {
    if sigma > 0.0 && sigma.is_finite() { normal_cdf((mu - b) / sigma) } else { f64::from(u8::from(mu > b)) }
}

/// The expected excess over `b`, `E[(T - b)+]` for `T ~ N(mu, sigma^2)`:
/// `sigma phi(z) + (mu - b) Phi(z)` with `z = (mu - b) / sigma` (the first
/// partial moment of the normal distribution; e.g. Winkler, Roodman & Britney
/// 1972, *Management Science* 19: 290–296, and the expected-shortfall
/// literature); `max(mu - b, 0)` when `sigma = 0`.
pub fn expected_excess(mu: f64, sigma: f64, b: f64) -> f64 {
    if sigma > 0.0 && sigma.is_finite() {
        let z = (mu - b) / sigma;
        (sigma * normal_pdf(z) + (mu - b) * normal_cdf(z)).max(0.0)
    } else {
        (mu - b).max(0.0)
    }
}

/// The expected capped excess `E[(min(T, cap) - base)+]` of one step's
/// integrated degree days (°C; times the step in days gives °C d):
/// `E[(T - base)+] - E[(T - cap)+]` for `cap > base` (the part of the excess
/// above the cap is cut off), 0 for `cap <= base`, `E[(T - base)+]` without a
/// cap.
pub fn expected_capped_excess(mu: f64, sigma: f64, base: f64, cap: Option<f64>) -> f64 {
    match cap {
        Some(c) if c <= base => 0.0,
        Some(c) => (expected_excess(mu, sigma, base) - expected_excess(mu, sigma, c)).max(0.0),
        None => expected_excess(mu, sigma, base),
    }
}

/// The variance of one step's hours-below (or above) indicator `1{T < b}`
/// with `P(T < b) = p`: the Bernoulli variance `p (1 - p)`.
pub fn indicator_variance(p: f64) -> f64 {
    (p * (1.0 - p)).max(0.0)
}

/// The second partial moment `E[((T - b)+)^2]` for `T ~ N(mu, sigma^2)`:
/// `((mu - b)^2 + sigma^2) Phi(z) + (mu - b) sigma phi(z)`, `z = (mu - b) /
/// sigma` (the partial moments of the normal distribution, Winkler, Roodman &
/// Britney 1972, *Management Science* 19: 290–296, eq. 6 with `n = 2`);
/// `max(mu - b, 0)^2` when `sigma = 0`.
pub fn second_partial_moment(mu: f64, sigma: f64, b: f64) -> f64 {
    if sigma > 0.0 && sigma.is_finite() {
        let (d, z) = (mu - b, (mu - b) / sigma);
        ((d * d + sigma * sigma) * normal_cdf(z) + d * sigma * normal_pdf(z)).max(0.0)
    } else {
        (mu - b).max(0.0).powi(2)
    }
}

/// The variance of one step's capped excess `g = (min(T, cap) - base)+`
/// for `T ~ N(mu, sigma^2)`: `E[g^2] - E[g]^2` with, for `cap > base`,
/// `g = (T - base)+ - (T - cap)+` and so
/// `E[g^2] = M2(base) - M2(cap) - 2 (cap - base) M1(cap)` (expanding the
/// square; `M1`, `M2` the first and second partial moments,
/// [`expected_excess`] and [`second_partial_moment`]); without a cap
/// `E[g^2] = M2(base)`. 0 for `cap <= base` or `sigma = 0`.
pub fn capped_excess_variance(mu: f64, sigma: f64, base: f64, cap: Option<f64>) -> f64 {
    if !(sigma > 0.0 && sigma.is_finite()) {
        return 0.0;
    }
    let m1 = expected_capped_excess(mu, sigma, base, cap);
    let m2 = match cap {
        Some(c) if c <= base => return 0.0,
        Some(c) => {
            second_partial_moment(mu, sigma, base)
                - second_partial_moment(mu, sigma, c)
                - 2.0 * (c - base) * expected_excess(mu, sigma, c)
        }
        None => second_partial_moment(mu, sigma, base),
    };
    (m2 - m1 * m1).max(0.0)
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use rand::{RngExt, SeedableRng};
    use rand_chacha::ChaCha8Rng;
    use rand_distr::StandardNormal;

    /// Phi against tabulated values (Abramowitz & Stegun 1964, table 26.1:
    /// Phi(1) = 0.8413447461, Phi(1.96) = 0.9750021049, Phi(-3) = 0.0013498980).
    #[test]
    fn normal_cdf_matches_tables() {
        assert_relative_eq!(normal_cdf(0.0), 0.5, epsilon = 1e-15);
        assert_relative_eq!(normal_cdf(1.0), 0.8413447461, epsilon = 1e-10);
        assert_relative_eq!(normal_cdf(1.96), 0.9750021049, epsilon = 1e-10);
        assert_relative_eq!(normal_cdf(-3.0), 0.0013498980, epsilon = 1e-10);
    }

    /// The expectations against seeded Monte Carlo draws of `T ~ N(mu,
    /// sigma^2)`; the tolerance is four Monte Carlo standard errors (the
    /// sample SD of the summand over sqrt(draws)) plus two draws' worth.
    #[test]
    fn expectations_match_monte_carlo() {
        let mut rng = ChaCha8Rng::seed_from_u64(7);
        let draws = 200_000;
        for &(mu, sigma, b, cap) in
            &[(12.3, 0.6, 12.0, Some(13.0)), (11.0, 1.5, 12.0, None), (25.0, 3.0, 10.0, Some(30.0))]
        {
            let (mut below, mut above, mut ex, mut cx) = (Vec::new(), Vec::new(), Vec::new(), Vec::new());
            for _ in 0..draws {
                let t = mu + sigma * rng.sample::<f64, _>(StandardNormal);
                below.push(f64::from(u8::from(t < b)));
                above.push(f64::from(u8::from(t > b)));
                ex.push((t - b).max(0.0));
                cx.push((cap.map_or(t, |c| t.min(c)) - b).max(0.0));
            }
            let check = |xs: &[f64], want: f64, what: &str| {
                let n = xs.len() as f64;
                let m = xs.iter().sum::<f64>() / n;
                let sd = (xs.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
                // Plus 2/n: a rare event (p ~ 1e-7) may have no draw at all.
                let tol = 4.0 * sd / n.sqrt() + 2.0 / n;
                assert!((m - want).abs() <= tol, "{what}: MC {m} vs {want} (tol {tol})");
            };
            check(&below, prob_below(mu, sigma, b), "below");
            check(&above, prob_above(mu, sigma, b), "above");
            check(&ex, expected_excess(mu, sigma, b), "excess");
            check(&cx, expected_capped_excess(mu, sigma, b, cap), "capped excess");
            // The variances against the sample variances: tolerance four
            // Monte Carlo SEs of a sample variance, sqrt((m4 - v^2) / n).
            let check_var = |xs: &[f64], want: f64, what: &str| {
                let n = xs.len() as f64;
                let m = xs.iter().sum::<f64>() / n;
                let v = xs.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (n - 1.0);
                let m4 = xs.iter().map(|x| (x - m).powi(4)).sum::<f64>() / n;
                let tol = 4.0 * ((m4 - v * v).max(0.0) / n).sqrt() + 2.0 / n;
                assert!((v - want).abs() <= tol, "{what}: MC variance {v} vs {want} (tol {tol})");
            };
            check_var(&below, indicator_variance(prob_below(mu, sigma, b)), "below");
            check_var(&ex, capped_excess_variance(mu, sigma, b, None), "excess");
            check_var(&cx, capped_excess_variance(mu, sigma, b, cap), "capped excess");
        }
    }

    /// With no uncertainty the expectations are the counting rules.
    #[test]
    fn zero_sigma_is_counting() {
        assert_eq!(prob_below(11.9, 0.0, 12.0), 1.0);
        assert_eq!(prob_below(12.0, 0.0, 12.0), 0.0);
        assert_eq!(prob_above(12.0, 0.0, 12.0), 0.0);
        assert_eq!(expected_capped_excess(35.0, 0.0, 10.0, Some(30.0)), 20.0);
        assert_eq!(expected_capped_excess(35.0, 1.0, 10.0, Some(5.0)), 0.0);
        assert_eq!(capped_excess_variance(35.0, 0.0, 10.0, Some(30.0)), 0.0);
        assert_eq!(second_partial_moment(13.0, 0.0, 10.0), 9.0);
        // At mu = b the second partial moment is half the variance (symmetry).
        assert_relative_eq!(second_partial_moment(10.0, 2.0, 10.0), 2.0, epsilon = 1e-14);
    }
}
