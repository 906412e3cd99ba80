//! Psychrometrics of moist air after FAO-56 (Allen, Pereira, Raes & Smith
//! 1998, *Crop evapotranspiration*, FAO Irrigation and Drainage Paper 56,
//! chapter 3): saturation vapour pressure (eq. 11), actual vapour pressure
//! from relative humidity (hourly form, `e_a = e°(T)·RH/100`), vapour pressure
//! deficit and the dew point by inverting eq. 11 (`e_a = e°(T_dew)`, eq. 14).
//!
//! One formula is used everywhere so that VPD and dew point are consistent:
//! `e°(T_dew(T, RH)) == e_a(T, RH)` to rounding. Other saturation formulas
//! (Hyland–Wexler in ASHRAE, Ambaum 2020, Bolton 1980, Magnus forms) differ by
//! up to about 0.4 % between 5 and 40 °C; the cross-check against PsychroLib
//! and MetPy states that difference as its tolerance.
//!
//! Units: temperatures °C, relative humidity %, pressures kPa. Over liquid
//! water at all temperatures (no ice branch): greenhouse air below 0 °C is
//! rare and the FAO formula is defined for liquid water.

/// FAO-56 eq. 11 coefficient `a` (kPa).
pub const FAO_A_KPA: f64 = 0.6108;
/// FAO-56 eq. 11 coefficient `b` (dimensionless).
pub const FAO_B: f64 = 17.27;
/// FAO-56 eq. 11 coefficient `c` (°C).
pub const FAO_C: f64 = 237.3;

/// Saturation vapour pressure over liquid water, FAO-56 eq. 11:
/// `e°(T) = 0.6108 · exp(17.27·T / (T + 237.3))` kPa, `T` in °C.
/// Cost O(1). Returns `None` for non-finite `T` or `T <= -237.3` (pole).
///
/// ```
/// // FAO-56 Example 3: e°(15) = 1.705 kPa, e°(24.5) = 3.075 kPa.
/// let e = potclim::climate::psychro::saturation_vapour_pressure(15.0).unwrap();
/// assert!((e - 1.705).abs() < 5e-4);
/// ```
pub fn saturation_vapour_pressure(t_c: f64) -> Option<f64> {
    if !t_c.is_finite() || t_c <= -FAO_C {
        return None;
    }
    Some(FAO_A_KPA * (FAO_B * t_c / (t_c + FAO_C)).exp())
}

/// Actual vapour pressure from temperature and relative humidity, the
/// per-record (hourly) FAO-56 form `e_a = e°(T) · RH / 100` kPa.
/// Returns `None` when `T` or `RH` is not finite or `RH < 0`.
pub fn actual_vapour_pressure(t_c: f64, rh_pct: f64) -> Option<f64> {
    if !rh_pct.is_finite() || rh_pct < 0.0 {
        return None;
    }
    Some(saturation_vapour_pressure(t_c)? * rh_pct / 100.0)
}

/// Vapour pressure deficit `VPD = e°(T) − e_a = e°(T) · (1 − RH/100)` kPa
/// (FAO-56 chapter 3, per record). Negative when RH exceeds 100 %
/// (supersaturated readings are the ingest stage's to clip).
/// Returns `None` when an input is missing.
pub fn vapour_pressure_deficit(t_c: f64, rh_pct: f64) -> Option<f64> {
    let es = saturation_vapour_pressure(t_c)?;
    let ea = actual_vapour_pressure(t_c, rh_pct)?;
    Some(es - ea)
}

/// Dew point (°C) of vapour pressure `e_a` kPa, by inverting FAO-56 eq. 11:
/// `L = ln(e_a / 0.6108)`, `T_d = 237.3 · L / (17.27 − L)`
/// (the Magnus inversion of REFERENCE §1.4 with the FAO coefficients).
/// Returns `None` for `e_a <= 0` (no dew point) or non-finite input.
pub fn dew_point_from_vapour_pressure(ea_kpa: f64) -> Option<f64> {
    if !ea_kpa.is_finite() || ea_kpa <= 0.0 {
        return None;
    }
    let l = (ea_kpa / FAO_A_KPA).ln();
    if l >= FAO_B {
        return None;
    }
    Some(FAO_C * l / (FAO_B - l))
}

/// Dew point (°C) from temperature (°C) and relative humidity (%):
/// `γ = ln(RH/100) + 17.27·T/(T + 237.3)`, `T_d = 237.3·γ / (17.27 − γ)`.
/// `None` when `RH <= 0` or an input is missing. Cost O(1).
pub fn dew_point(t_c: f64, rh_pct: f64) -> Option<f64> {
    dew_point_from_vapour_pressure(actual_vapour_pressure(t_c, rh_pct)?)
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    /// FAO-56 Example 3 (found values, REFERENCE §1.1) and the e°(T) column of
    /// REFERENCE §1.1 (eq. 11 at 3 decimals, the Annex 2 Table 2.3 layout), ±0.001 kPa.
    #[test]
    fn saturation_vapour_pressure_matches_fao56_table() {
        let table = [
            (5.0, 0.872),
            (10.0, 1.228),
            (15.0, 1.705),
            (20.0, 2.338),
            (24.5, 3.075),
            (25.0, 3.168),
            (30.0, 4.243),
            (35.0, 5.623),
            (40.0, 7.376),
        ];
        for (t, e) in table {
            assert_abs_diff_eq!(saturation_vapour_pressure(t).unwrap(), e, epsilon = 1e-3);
        }
        // Unrounded values of REFERENCE §1.1, 5 decimals.
        assert_abs_diff_eq!(saturation_vapour_pressure(0.0).unwrap(), 0.61080, epsilon = 1e-5);
        assert_abs_diff_eq!(saturation_vapour_pressure(20.0).unwrap(), 2.33828, epsilon = 1e-5);
        assert_abs_diff_eq!(saturation_vapour_pressure(40.0).unwrap(), 7.37561, epsilon = 1e-5);
    }

    /// REFERENCE §1.4 check table (FAO coefficients): e_a, VPD and dew point.
    #[test]
    fn dew_point_and_vpd_match_reference_table() {
        let rows = [
            (25.0, 60.0, 1.9007, 1.2671, 16.696),
            (20.0, 80.0, 1.8706, 0.4677, 16.445),
            (30.0, 40.0, 1.6972, 2.5458, 14.926),
            (10.0, 95.0, 1.1666, 0.0614, 9.237),
        ];
        for (t, rh, ea, vpd, td) in rows {
            assert_abs_diff_eq!(actual_vapour_pressure(t, rh).unwrap(), ea, epsilon = 1e-4);
            assert_abs_diff_eq!(vapour_pressure_deficit(t, rh).unwrap(), vpd, epsilon = 1e-4);
            assert_abs_diff_eq!(dew_point(t, rh).unwrap(), td, epsilon = 1e-3);
        }
        // Round trip of REFERENCE §1.4: e°(16.696) = 1.9007.
        assert_abs_diff_eq!(saturation_vapour_pressure(16.696).unwrap(), 1.9007, epsilon = 1e-4);
    }

    /// Self-consistency: the dew point of saturated air is the air temperature.
    #[test]
    fn saturated_air_has_dew_point_equal_to_temperature() {
        for t in [-5.0, 0.0, 12.5, 37.0] {
            assert_abs_diff_eq!(dew_point(t, 100.0).unwrap(), t, epsilon = 1e-10);
        }
    }

    /// Cross-check against two general-purpose libraries, fixtures written by
    /// `tests/reference/climate_psychro.py` (5–40 °C, RH 20–95 %). The
    /// tolerances are the expected formula differences (CROSSCHECKS §6):
    /// * PsychroLib (ASHRAE 2017 Hyland–Wexler): e° within 1.2e-3 relative
    ///   (FAO-56 differs from it by at most 1.06e-3 over 5–40 °C), VPD the
    ///   same relative bound; dew point within 0.02 °C where PsychroLib
    ///   returns a dew point (above 0.01 °C; below it returns the frost point).
    /// * MetPy (Ambaum 2020 e°, Bolton 1980 dew-point inversion): e° and VPD
    ///   within 3.5e-3 relative (Ambaum runs up to 0.29 % below FAO-56 at
    ///   40 °C), dew point within 0.12 °C (its inversion is not the inverse
    ///   of its own e°, CROSSCHECKS §6).
    #[test]
    fn agrees_with_psychrolib_and_metpy_within_formula_differences() {
        let text = include_str!(concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/tests/reference/fixtures/climate_psychro.json"
        ));
        let doc: serde_json::Value = serde_json::from_str(text).unwrap();
        let rows = doc["rows"].as_array().unwrap();
        assert_eq!(rows.len(), 75);
        let mut dew_checked = 0;
        for r in rows {
            let g = |k: &str| r[k].as_f64().unwrap();
            let (t, rh) = (g("t_c"), g("rh_pct"));
            let es = saturation_vapour_pressure(t).unwrap();
            let vpd = vapour_pressure_deficit(t, rh).unwrap();
            let td = dew_point(t, rh).unwrap();
            assert!((es / g("es_kpa_psychrolib") - 1.0).abs() < 1.2e-3, "PsychroLib e° at {t}");
            assert!((vpd / g("vpd_kpa_psychrolib") - 1.0).abs() < 1.2e-3, "PsychroLib VPD at {t}, {rh}");
            assert!((es / g("es_kpa_metpy") - 1.0).abs() < 3.5e-3, "MetPy e° at {t}");
            assert!((vpd / g("vpd_kpa_metpy") - 1.0).abs() < 3.5e-3, "MetPy VPD at {t}, {rh}");
            assert_abs_diff_eq!(td, g("td_c_metpy"), epsilon = 0.12);
            if g("td_c_psychrolib") > 0.01 {
                assert_abs_diff_eq!(td, g("td_c_psychrolib"), epsilon = 0.02);
                dew_checked += 1;
            }
        }
        assert!(dew_checked > 50);
    }

    #[test]
    fn undefined_inputs_are_none() {
        assert!(dew_point(20.0, 0.0).is_none());
        assert!(dew_point(f64::NAN, 50.0).is_none());
        assert!(vapour_pressure_deficit(20.0, f64::NAN).is_none());
        assert!(saturation_vapour_pressure(-300.0).is_none());
    }
}
