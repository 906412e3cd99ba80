//! Units of logger channels and their conversion to potclim's fixed internal
//! units: °C, % relative humidity, µmol m⁻² s⁻¹ of photosynthetic photon flux
//! density (PPFD, 400–700 nm).
//!
//! Every conversion is affine, `internal = scale · raw + offset`, so one
//! [`Conversion`] per channel is computed once per `[[logs]]` block and applied
//! per cell. The light factors are approximations that depend on the spectrum
//! of the source; the source of each is cited beside its constant, and
//! `docs/study-file.md` repeats them for users.

use std::fmt;

/// Which physical quantity a channel measures.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Channel {
    /// Air temperature, stored in °C.
    Temperature,
    /// Relative humidity, stored in percent.
    Humidity,
    /// Photosynthetic photon flux density, stored in µmol m⁻² s⁻¹.
    Light,
}

impl Channel {
    /// The three channels in column order of `readings.parquet`.
    pub const ALL: [Channel; 3] = [Channel::Temperature, Channel::Humidity, Channel::Light];

    /// The key of the channel in `[logs.columns]` (also the channel's name
    /// in `qc_flags.csv` and in the simulator's scenario files).
    pub const fn key(self) -> &'static str {
        match self {
            Channel::Temperature => "temperature",
            Channel::Humidity => "humidity",
            Channel::Light => "light",
        }
    }

    /// The output column of the channel (name carries the unit).
    pub const fn column(self) -> &'static str {
        match self {
            Channel::Temperature => "temperature_c",
            Channel::Humidity => "rh_pct",
            Channel::Light => "ppfd_umol_m2_s",
        }
    }

    /// The unit names accepted for this channel (the same list for reading
    /// logger exports and for writing simulated ones).
    pub const fn unit_names(self) -> &'static [&'static str] {
        match self {
            Channel::Temperature => &["degC", "degF", "K"],
            Channel::Humidity => &["percent", "fraction"],
            Channel::Light => &["umol_m2_s", "lux_sunlight", "lux_white_led", "lux_hps", "w_m2_shortwave"],
        }
    }

    /// Index 0, 1, 2 in [`Channel::ALL`].
    pub fn index(self) -> usize {
        self as usize
    }

    /// The channel whose [`Channel::key`] is `key`.
    pub fn from_key(key: &str) -> Option<Channel> {
        Channel::ALL.into_iter().find(|c| c.key() == key)
    }
}

impl fmt::Display for Channel {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.key())
    }
}

/// µmol m⁻² s⁻¹ of PPFD per lux of sunlight (sun and sky): 0.0185, i.e.
/// lux ÷ 54. Thimijan, R.W. & Heins, R.D. (1983), "Photometric, radiometric,
/// and quantum light units of measure: a review of procedures for
/// interconversion", HortScience 18(6): 818–822 (REFERENCE.md §2.2).
pub const LUX_SUNLIGHT: f64 = 0.0185;

/// µmol m⁻² s⁻¹ per lux of mogul-base high-pressure sodium lamps: 0.0122,
/// i.e. lux ÷ 82. Thimijan & Heins (1983), HortScience 18(6): 818–822
/// (REFERENCE.md §2.2).
pub const LUX_HPS: f64 = 0.0122;

/// µmol m⁻² s⁻¹ per lux of white LEDs: 0.015 (≈ lux ÷ 67). Common practice,
/// not a published constant: the factor depends strongly on the spectrum
/// (correlated colour temperature and red fraction); white LEDs span roughly
/// lux ÷ 55 to lux ÷ 80 (REFERENCE.md §2.2, "common practice / from
/// memory"). 0.015 sits in the middle of that band. Prefer a quantum sensor
/// (`umol_m2_s`) under LEDs.
pub const LUX_WHITE_LED: f64 = 0.015;

/// µmol m⁻² s⁻¹ of PPFD per W m⁻² of global shortwave (300–3000 nm) solar
/// radiation: 2.0. Field regressions give 1.9–2.1 (Meek et al. 1984, Agron. J.
/// 76: 939–945, ≈ 2.0; from memory per REFERENCE.md §2.3); the published
/// bracket is 1.895 (Coombs et al. 1985, *Techniques in Bioproductivity and
/// Photosynthesis*: 950 W m⁻² total ↔ 1800 µmol m⁻² s⁻¹ PAR) to ≈ 2.3
/// (PAR energy fraction 0.50, Szeicz 1974, J. Appl. Ecol. 11: 617–636, times
/// 4.57 µmol J⁻¹ for daylight PAR, McCree 1972). Valid for sunlight only,
/// never for lamp light.
pub const W_M2_SHORTWAVE: f64 = 2.0;

/// An affine conversion `internal = scale · raw + offset`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Conversion {
    /// Multiplier.
    pub scale: f64,
    /// Added after multiplying.
    pub offset: f64,
}

impl Conversion {
    /// Apply to one raw value. Cost: one multiply-add.
    #[inline]
    pub fn apply(self, raw: f64) -> f64 {
        raw.mul_add(self.scale, self.offset)
    }

    /// The inverse, internal unit → raw unit: `raw = (internal − offset) /
    /// scale`. Used to write values in a logger's unit (the simulator), so
    /// that [`Conversion::apply`] reads them back. Every scale is non-zero.
    /// Cost: one subtraction and one division.
    #[inline]
    pub fn invert(self, internal: f64) -> f64 {
        (internal - self.offset) / self.scale
    }

    /// The conversion of unit `name` of `channel` into the internal unit, or
    /// `None` when the unit does not belong to the channel.
    ///
    /// * `degC` → °C: identity.
    /// * `degF` → °C: `t_C = (t_F − 32) · 5/9` (definition of the Fahrenheit
    ///   scale, NIST SP 811, 2008 edition, appendix B; from memory).
    /// * `K` → °C: `t_C = T − 273.15` (definition of the Celsius scale, SI
    ///   Brochure, 9th edition, BIPM 2019; from memory).
    /// * `percent` → %: identity; `fraction` (0–1) → %: × 100.
    /// * `umol_m2_s`: identity; `lux_*` and `w_m2_shortwave`: the factors
    ///   [`LUX_SUNLIGHT`], [`LUX_WHITE_LED`], [`LUX_HPS`], [`W_M2_SHORTWAVE`].
    pub fn of(channel: Channel, name: &str) -> Option<Conversion> {
        let c = |scale: f64, offset: f64| Some(Conversion { scale, offset });
        match (channel, name) {
            (Channel::Temperature, "degC") => c(1.0, 0.0),
            (Channel::Temperature, "degF") => c(5.0 / 9.0, -32.0 * 5.0 / 9.0),
            (Channel::Temperature, "K") => c(1.0, -273.15),
            (Channel::Humidity, "percent") => c(1.0, 0.0),
            (Channel::Humidity, "fraction") => c(100.0, 0.0),
            (Channel::Light, "umol_m2_s") => c(1.0, 0.0),
            (Channel::Light, "lux_sunlight") => c(LUX_SUNLIGHT, 0.0),
            (Channel::Light, "lux_white_led") => c(LUX_WHITE_LED, 0.0),
            (Channel::Light, "lux_hps") => c(LUX_HPS, 0.0),
            (Channel::Light, "w_m2_shortwave") => c(W_M2_SHORTWAVE, 0.0),
            _ => None,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    fn conv(ch: Channel, u: &str, x: f64) -> f64 {
        Conversion::of(ch, u).unwrap().apply(x)
    }

    #[test]
    fn fahrenheit_and_kelvin_fixed_points() {
        // Fixed points of the scales (definitions): water freezes at 32 °F =
        // 273.15 K = 0 °C and boils at 212 °F = 100 °C at 1 atm; −40 °F = −40 °C.
        assert_abs_diff_eq!(conv(Channel::Temperature, "degF", 32.0), 0.0, epsilon = 1e-12);
        assert_abs_diff_eq!(conv(Channel::Temperature, "degF", 212.0), 100.0, epsilon = 1e-12);
        assert_abs_diff_eq!(conv(Channel::Temperature, "degF", -40.0), -40.0, epsilon = 1e-12);
        assert_abs_diff_eq!(conv(Channel::Temperature, "K", 273.15), 0.0, epsilon = 1e-12);
        assert_abs_diff_eq!(conv(Channel::Temperature, "K", 293.15), 20.0, epsilon = 1e-12);
    }

    #[test]
    fn lux_factors_match_thimijan_heins_worked_values() {
        // REFERENCE.md §2.2 [FOUND]: "full sunlight is 108,000 Lux or 2000 µmol
        // m-2 s-1 (108,000 ∗ 0.0185)" = 1998.
        assert_abs_diff_eq!(conv(Channel::Light, "lux_sunlight", 108_000.0), 1998.0, epsilon = 1e-9);
        // Same table: 10 000 lux → 185 (sunlight, lux ÷ 54) and → 122 (HPS, lux ÷ 82).
        assert_abs_diff_eq!(conv(Channel::Light, "lux_sunlight", 10_000.0), 10_000.0 / 54.0, epsilon = 0.2);
        assert_abs_diff_eq!(conv(Channel::Light, "lux_hps", 10_000.0), 122.0, epsilon = 1e-9);
        assert_abs_diff_eq!(conv(Channel::Light, "lux_hps", 10_000.0), 10_000.0 / 82.0, epsilon = 0.1);
        // White LEDs: common-practice band lux ÷ 80 … lux ÷ 55 (REFERENCE.md §2.2).
        let led = conv(Channel::Light, "lux_white_led", 1.0);
        assert!((1.0 / 80.0..=1.0 / 55.0).contains(&led), "{led}");
    }

    #[test]
    fn shortwave_factor_inside_published_bracket() {
        // REFERENCE.md §2.3: Coombs et al. (1985) 950 W m⁻² ↔ 1800 µmol m⁻² s⁻¹
        // (1.895 per W m⁻²); Szeicz (1974) 0.50 × McCree 4.57 ≈ 2.3.
        let per_w = conv(Channel::Light, "w_m2_shortwave", 1.0);
        assert!((1800.0 / 950.0..=0.50 * 4.57 + 1e-9).contains(&per_w), "{per_w}");
        assert_abs_diff_eq!(conv(Channel::Light, "w_m2_shortwave", 950.0), 1900.0, epsilon = 1e-9);
    }

    #[test]
    fn humidity_fraction_to_percent() {
        assert_abs_diff_eq!(conv(Channel::Humidity, "fraction", 0.655), 65.5, epsilon = 1e-12);
        assert_abs_diff_eq!(conv(Channel::Humidity, "percent", 65.5), 65.5, epsilon = 1e-12);
    }

    /// `invert` undoes `apply` for every unit of every channel, within a few
    /// ulps of the operands (property of an affine map with a non-zero scale).
    #[test]
    fn invert_undoes_apply_for_every_unit() {
        for ch in Channel::ALL {
            assert_eq!(Channel::from_key(ch.key()), Some(ch));
            for u in ch.unit_names() {
                let c = Conversion::of(ch, u).unwrap();
                for x in [-40.0, 0.0, 0.655, 17.3, 1234.5] {
                    let back = c.apply(c.invert(x));
                    // Rounding of the subtraction and the multiply-add: a few
                    // ulps of the larger of |x| and the offset.
                    let tol = 4.0 * f64::EPSILON * (x.abs() + c.offset.abs()).max(1.0);
                    assert!((back - x).abs() <= tol, "{ch} {u} {x} {back}");
                }
            }
        }
        // Defining points (see above): 100 °C = 212 °F = 373.15 K.
        assert_abs_diff_eq!(
            Conversion::of(Channel::Temperature, "degF").unwrap().invert(100.0),
            212.0,
            epsilon = 1e-12
        );
        assert_abs_diff_eq!(
            Conversion::of(Channel::Temperature, "K").unwrap().invert(100.0),
            373.15,
            epsilon = 1e-12
        );
        assert_eq!(Channel::from_key("pressure"), None);
    }

    #[test]
    fn units_belong_to_their_channel() {
        assert!(Conversion::of(Channel::Light, "degC").is_none());
        assert!(Conversion::of(Channel::Temperature, "lux_hps").is_none());
        for ch in Channel::ALL {
            for u in ch.unit_names() {
                assert!(Conversion::of(ch, u).is_some(), "{ch} {u}");
            }
        }
    }
}
