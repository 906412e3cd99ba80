//! Colour scales of the report: a perceptually uniform, colour-blind-safe
//! sequential scale (viridis) for values and standard errors, a diverging
//! scale centred at zero for residuals, and a categorical palette for lines.
//!
//! Scales are small anchor tables interpolated linearly in sRGB, so they stay
//! readable in code review. With 18 viridis anchors the interpolation stays
//! within 2 steps of 8 bits per channel of the full 256-entry table at the
//! entries halfway between anchors (checked in the tests); 9 anchors were
//! not enough near the yellow end, where the blue channel bends (hence the
//! extra anchor at entry 248).

/// An sRGB colour, 8 bits per channel.
pub type Rgb = (u8, u8, u8);

/// Viridis anchors `(t, r, g, b)` with channels in 0..1: every 16th entry
/// (0, 16, ..., 240), entry 248 and the last (255) of the 256-entry viridis table by
/// Stéfan van der Walt and Nathaniel Smith (2015), released under CC0 with
/// matplotlib's `_cm_listed.py`, at `t = index / 255`.
const VIRIDIS: [(f64, f64, f64, f64); 18] = [
    (0.0 / 255.0, 0.267004, 0.004874, 0.329415),
    (16.0 / 255.0, 0.282327, 0.094955, 0.417331),
    (32.0 / 255.0, 0.278826, 0.175490, 0.483397),
    (48.0 / 255.0, 0.258965, 0.251537, 0.524736),
    (64.0 / 255.0, 0.229739, 0.322361, 0.545706),
    (80.0 / 255.0, 0.199430, 0.387607, 0.554642),
    (96.0 / 255.0, 0.172719, 0.448791, 0.557885),
    (112.0 / 255.0, 0.149039, 0.508051, 0.557250),
    (128.0 / 255.0, 0.127568, 0.566949, 0.550556),
    (144.0 / 255.0, 0.120638, 0.625828, 0.533488),
    (160.0 / 255.0, 0.157851, 0.683765, 0.501686),
    (176.0 / 255.0, 0.246070, 0.738910, 0.452024),
    (192.0 / 255.0, 0.369214, 0.788888, 0.382914),
    (208.0 / 255.0, 0.515992, 0.831158, 0.294279),
    (224.0 / 255.0, 0.678489, 0.863742, 0.189503),
    (240.0 / 255.0, 0.845561, 0.887322, 0.099702),
    (248.0 / 255.0, 0.926106, 0.897330, 0.104071),
    (1.0, 0.993248, 0.906157, 0.143936),
];

/// Diverging anchors, blue (negative) through near-white (zero) to red
/// (positive): the 7-class "RdBu" scheme of ColorBrewer (Brewer, Harrower et
/// al., colorbrewer2.org, marked colour-blind safe there), reversed so that
/// negative is blue; hex values from memory.
const DIVERGING: [(f64, Rgb); 7] = [
    (0.0, (33, 102, 172)),
    (1.0 / 6.0, (103, 169, 207)),
    (2.0 / 6.0, (209, 229, 240)),
    (3.0 / 6.0, (247, 247, 247)),
    (4.0 / 6.0, (253, 219, 199)),
    (5.0 / 6.0, (239, 138, 98)),
    (1.0, (178, 24, 43)),
];

/// Categorical palette for lines and markers (Okabe & Ito 2008, "Color
/// Universal Design", values from memory), without its yellow, which is
/// unreadable on white.
pub const CATEGORICAL: [Rgb; 7] =
    [(0, 114, 178), (213, 94, 0), (0, 158, 115), (204, 121, 167), (86, 180, 233), (230, 159, 0), (0, 0, 0)];

/// One colour per logger line, twelve apart: the nine colours of Paul Tol's
/// "muted" qualitative scheme (Tol 2021, "Colour schemes", SRON technical
/// note SRON/EPS/TN/09-002, issue 3.2: distinct under the common colour-vision
/// deficiencies; rose, indigo, sand, green, cyan, wine, teal, olive, purple),
/// then three hues that scheme lacks, Okabe & Ito's (2008) blue, vermillion
/// and orange (values as in [`CATEGORICAL`]). Past twelve loggers colours
/// repeat and [`logger_line`] dashes the repeats, so no two lines look alike.
pub const LOGGER_LINES: [Rgb; 12] = [
    (0xCC, 0x66, 0x77),
    (0x33, 0x22, 0x88),
    (0xDD, 0xCC, 0x77),
    (0x11, 0x77, 0x33),
    (0x88, 0xCC, 0xEE),
    (0x88, 0x22, 0x55),
    (0x44, 0xAA, 0x99),
    (0x99, 0x99, 0x33),
    (0xAA, 0x44, 0x99),
    (0, 114, 178),
    (213, 94, 0),
    (230, 159, 0),
];

/// The line of the `k`-th logger (0-based, in one order shared by every
/// figure of a report, so a logger keeps its colour across figures): its
/// colour and whether it is dashed (from the thirteenth logger on).
pub fn logger_line(k: usize) -> (Rgb, bool) {
    (LOGGER_LINES[k % LOGGER_LINES.len()], k >= LOGGER_LINES.len())
}

/// Viridis at `t` in 0..1 (clamped; NaN maps to 0).
pub fn viridis(t: f64) -> Rgb {
    let t = if t.is_nan() { 0.0 } else { t.clamp(0.0, 1.0) };
    let i = VIRIDIS.iter().position(|a| a.0 >= t).unwrap_or(VIRIDIS.len() - 1).max(1);
    let (t0, r0, g0, b0) = VIRIDIS[i - 1];
    let (t1, r1, g1, b1) = VIRIDIS[i];
    let f = ((t - t0) / (t1 - t0)).clamp(0.0, 1.0);
    let ch = |a: f64, b: f64| ((a + f * (b - a)) * 255.0).round().clamp(0.0, 255.0) as u8;
    (ch(r0, r1), ch(g0, g1), ch(b0, b1))
}

/// The diverging scale at `t` in 0..1 (0.5 is zero).
pub fn diverging(t: f64) -> Rgb {
    let t = if t.is_nan() { 0.5 } else { t.clamp(0.0, 1.0) };
    let i = DIVERGING.iter().position(|a| a.0 >= t).unwrap_or(DIVERGING.len() - 1).max(1);
    let (t0, c0) = DIVERGING[i - 1];
    let (t1, c1) = DIVERGING[i];
    let f = ((t - t0) / (t1 - t0)).clamp(0.0, 1.0);
    let ch = |a: u8, b: u8| (a as f64 + f * (b as f64 - a as f64)).round().clamp(0.0, 255.0) as u8;
    (ch(c0.0, c1.0), ch(c0.1, c1.1), ch(c0.2, c1.2))
}

/// Which scale a map uses.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Scale {
    /// Viridis over `[lo, hi]`.
    Sequential {
        /// Value at the dark end.
        lo: f64,
        /// Value at the bright end.
        hi: f64,
    },
    /// Diverging over `[-half, half]`, zero at the centre.
    Diverging {
        /// Largest absolute value shown at full colour.
        half: f64,
    },
}

impl Scale {
    /// A sequential scale over the finite values given; a constant or empty
    /// set gets a unit-wide interval around its value so the legend is drawable.
    pub fn sequential(values: impl IntoIterator<Item = f64>) -> Scale {
        let (lo, hi) = finite_extent(values).unwrap_or((0.0, 1.0));
        if hi > lo { Scale::Sequential { lo, hi } } else { Scale::Sequential { lo: lo - 0.5, hi: hi + 0.5 } }
    }

    /// A diverging scale symmetric about zero covering every finite value.
    pub fn diverging(values: impl IntoIterator<Item = f64>) -> Scale {
        let half = values.into_iter().filter(|v| v.is_finite()).fold(0.0f64, |m, v| m.max(v.abs()));
        Scale::Diverging { half: if half > 0.0 { half } else { 1.0 } }
    }

    /// The displayed interval.
    pub fn bounds(&self) -> (f64, f64) {
        match *self {
            Scale::Sequential { lo, hi } => (lo, hi),
            Scale::Diverging { half } => (-half, half),
        }
    }

    /// Colour of a value.
    pub fn colour(&self, v: f64) -> Rgb {
        let (lo, hi) = self.bounds();
        let t = (v - lo) / (hi - lo);
        match self {
            Scale::Sequential { .. } => viridis(t),
            Scale::Diverging { .. } => diverging(t),
        }
    }
}

/// Smallest and largest finite value, `None` when there is none.
pub fn finite_extent(values: impl IntoIterator<Item = f64>) -> Option<(f64, f64)> {
    values.into_iter().filter(|v| v.is_finite()).fold(None, |acc, v| match acc {
        None => Some((v, v)),
        Some((lo, hi)) => Some((lo.min(v), hi.max(v))),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn to8(c: (f64, f64, f64)) -> Rgb {
        ((c.0 * 255.0).round() as u8, (c.1 * 255.0).round() as u8, (c.2 * 255.0).round() as u8)
    }

    /// Anchors reproduce the table exactly, and between anchors the linear
    /// interpolation stays within 2 steps (8 bits) of the full CC0 viridis
    /// table.
    #[test]
    fn viridis_matches_the_published_table() {
        assert_eq!(viridis(0.0), (68, 1, 84));
        assert_eq!(viridis(1.0), (253, 231, 37));
        assert_eq!(viridis(128.0 / 255.0), to8((0.127568, 0.566949, 0.550556)));
        // Entries halfway between anchors, from the same table.
        let mid = [
            (8, (0.277018, 0.050344, 0.375715)),
            (88, (0.185556, 0.418570, 0.556753)),
            (184, (0.304148, 0.764704, 0.419943)),
            (232, (0.762373, 0.876424, 0.137064)),
            (244, (0.886271, 0.892374, 0.095374)),
            (252, (0.964894, 0.902323, 0.123941)),
        ];
        for (i, c) in mid {
            let got = viridis(i as f64 / 255.0);
            let want = to8(c);
            for (g, w) in [(got.0, want.0), (got.1, want.1), (got.2, want.2)] {
                assert!((g as i32 - w as i32).abs() <= 2, "entry {i}: {got:?} vs {want:?}");
            }
        }
    }

    #[test]
    fn diverging_is_centred_at_zero() {
        let s = Scale::diverging([-0.5, 2.0, 1.0]);
        assert_eq!(s.bounds(), (-2.0, 2.0));
        assert_eq!(s.colour(0.0), (247, 247, 247));
        assert_eq!(s.colour(-2.0), (33, 102, 172));
        assert_eq!(s.colour(2.0), (178, 24, 43));
        // Symmetric magnitudes get colours of equal distance from white.
        let (a, b) = (s.colour(-1.0), s.colour(1.0));
        assert!(a.2 > a.0 && b.0 > b.2, "{a:?} {b:?}");
    }

    /// The logger palette holds twelve different colours, each far from the
    /// others (Euclidean sRGB distance at least 55 of 441) and from white.
    #[test]
    fn logger_lines_are_distinct() {
        let d = |a: Rgb, b: Rgb| {
            let f = |x: u8, y: u8| (x as f64 - y as f64).powi(2);
            (f(a.0, b.0) + f(a.1, b.1) + f(a.2, b.2)).sqrt()
        };
        for (i, &a) in LOGGER_LINES.iter().enumerate() {
            assert!(d(a, (255, 255, 255)) > 60.0, "{i} too pale");
            for (j, &b) in LOGGER_LINES.iter().enumerate().take(i) {
                assert!(d(a, b) >= 55.0, "{i} and {j} look alike");
            }
        }
        assert_eq!(logger_line(0), (LOGGER_LINES[0], false));
        assert_eq!(logger_line(12), (LOGGER_LINES[0], true));
    }

    #[test]
    fn degenerate_ranges_are_drawable() {
        assert_eq!(Scale::sequential([3.0, 3.0]).bounds(), (2.5, 3.5));
        assert_eq!(Scale::sequential([f64::NAN]).bounds(), (0.0, 1.0));
        assert_eq!(Scale::diverging([0.0]).bounds(), (-1.0, 1.0));
    }
}
