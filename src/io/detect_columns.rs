//! What the other columns of an export hold, as [`super`] guesses it: the channel a
//! header names by a word, quantities that are not channels, row counters, and a
//! unit decided by the range of the values.

use super::number;
use crate::io::units::Channel;

/// Words of a header cell, lower case.
pub(super) fn words(s: &str) -> Vec<String> {
    s.to_lowercase()
        .split(|c: char| !c.is_alphanumeric())
        .filter(|w| !w.is_empty())
        .map(String::from)
        .collect()
}

/// Summary of a numeric column.
#[derive(Debug, Clone, Copy)]
pub(super) struct Range {
    pub(super) min: f64,
    pub(super) max: f64,
    pub(super) median: f64,
}

pub(super) fn range_of(cells: &[String], dc: bool) -> Option<Range> {
    let mut v: Vec<f64> = cells.iter().filter_map(|c| number(c, dc)).collect();
    let filled = cells.iter().filter(|c| !c.is_empty()).count();
    if v.is_empty() || v.len() * 10 < filled * 8 {
        return None;
    }
    v.sort_by(f64::total_cmp);
    Some(Range { min: v[0], max: v[v.len() - 1], median: v[v.len() / 2] })
}

/// Whether a numeric column counts rows (1, 2, 3, ... or any run of
/// consecutive whole numbers).
pub(super) fn counter(cells: &[String], dc: bool) -> bool {
    let v: Vec<f64> = cells.iter().filter_map(|c| number(c, dc)).collect();
    v.len() >= 3
        && v.len() == cells.len()
        && v.iter().all(|x| x.fract() == 0.0)
        && v.windows(2).take(50).all(|w| w[1] == w[0] + 1.0)
}

pub(super) fn fmt_num(x: f64) -> String {
    let s = format!("{x:.2}");
    s.trim_end_matches('0').trim_end_matches('.').to_string()
}

/// The unit of a column that names its channel by a word but not its unit,
/// decided by the values' range (ranges of a growing space, common
/// practice: air −10..45 °C, so a median of 5..40 reads °C and 41..104 °F;
/// 230..340 reads kelvin; humidity up to 1 is a fraction, up to 100 percent).
pub(super) fn unit_by_range(
    ch: Channel,
    r: Range,
) -> std::result::Result<(&'static str, String), Vec<&'static str>> {
    let span = format!("values {}..{}", fmt_num(r.min), fmt_num(r.max));
    match ch {
        Channel::Temperature => {
            if r.min >= 230.0 && r.max <= 340.0 {
                Ok(("K", format!("{span}: a kelvin range")))
            } else if (5.0..=40.0).contains(&r.median) && r.min >= -40.0 && r.max <= 60.0 {
                Ok((
                    "degC",
                    format!(
                        "{span}: a °C range (in °F the median would be {:.0} °C)",
                        (r.median - 32.0) * 5.0 / 9.0
                    ),
                ))
            } else if (41.0..=104.0).contains(&r.median) && r.min >= -40.0 && r.max <= 140.0 {
                Ok(("degF", format!("{span}: a °F range (median {:.0} °C)", (r.median - 32.0) * 5.0 / 9.0)))
            } else {
                Err(vec!["degC", "degF", "K"])
            }
        }
        Channel::Humidity => {
            if r.min >= 0.0 && r.max <= 1.0 {
                Ok(("fraction", format!("{span}: a fraction of 1")))
            } else if r.min >= 0.0 && r.max <= 100.5 && r.max > 1.5 {
                Ok(("percent", format!("{span}: percent")))
            } else {
                Err(vec!["percent", "fraction"])
            }
        }
        Channel::Light => {
            Err(vec!["umol_m2_s", "w_m2_shortwave", "lux_sunlight", "lux_hps", "lux_white_led"])
        }
    }
}

/// Whether a header names a quantity that is not a channel (dew point,
/// battery, serial number, wet bulb, heat index, VPD, absolute humidity).
pub(super) fn not_a_channel(name: &str) -> bool {
    let text = name.to_lowercase();
    ["dew", "batt", "volt", "serial", "wet", "heat index", "vpd", "abs"].iter().any(|p| text.contains(p))
}

/// The channel a header names by a word alone (no unit).
pub(super) fn channel_word(name: &str) -> Option<Channel> {
    let w = words(name);
    let has = |xs: &[&str]| w.iter().any(|x| xs.contains(&x.as_str()));
    let text = name.to_lowercase();
    if not_a_channel(name) {
        return None;
    }
    if has(&["temp", "temperature", "t", "tair", "airt", "ta", "temperatur", "air"])
        || text.starts_with("temp")
        || text.starts_with("airt")
    {
        return Some(Channel::Temperature);
    }
    if has(&["rh", "hum", "humidity", "humid", "feuchte", "rf"]) || text.starts_with("humid") {
        return Some(Channel::Humidity);
    }
    if has(&[
        "light",
        "par",
        "ppfd",
        "lux",
        "lx",
        "radiation",
        "solar",
        "rad",
        "slr",
        "irradiance",
        "licht",
        "pyr",
    ]) || text.starts_with("light")
    {
        return Some(Channel::Light);
    }
    None
}
