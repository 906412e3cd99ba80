//! The time of an export, as [`super`] guesses it: the candidate date and clock
//! parts, the column(s) and pattern that read the sample to plausible instants,
//! day-first or month-first, and a time zone named in the preamble.

use super::{TIME_SHARE, number};
use crate::io::clock::{Stamp, TimeFormat};

/// Candidate date parts: (pattern, order) where order is `ymd`, `dmy`, `mdy`.
const DATES: [(&str, &str); 12] = [
    ("%Y-%m-%d", "ymd"),
    ("%Y/%m/%d", "ymd"),
    ("%Y.%m.%d", "ymd"),
    ("%d.%m.%Y", "dmy"),
    ("%d/%m/%Y", "dmy"),
    ("%m/%d/%Y", "mdy"),
    ("%d-%m-%Y", "dmy"),
    ("%m-%d-%Y", "mdy"),
    ("%d.%m.%y", "dmy"),
    ("%d/%m/%y", "dmy"),
    ("%m/%d/%y", "mdy"),
    ("%d-%m-%y", "dmy"),
];

/// Candidate time-of-day parts.
const CLOCKS: [&str; 6] = ["%H:%M:%S", "%H:%M", "%I:%M:%S %p", "%I:%M %p", "%H:%M:%S%.f", "%H.%M.%S"];

/// The day-first/month-first twin of a date part (`%d/%m/%Y` ↔ `%m/%d/%Y`).
pub(super) fn twin(date: &str) -> Option<String> {
    if date.starts_with("%d") {
        Some(date.replacen("%d", "\u{1}", 1).replacen("%m", "%d", 1).replacen('\u{1}', "%m", 1))
    } else if date.starts_with("%m") {
        Some(date.replacen("%m", "\u{1}", 1).replacen("%d", "%m", 1).replacen('\u{1}', "%d", 1))
    } else {
        None
    }
}

/// Instants between 1990 and 2100 (a pattern that reads `26` as the year 26
/// does not fit).
fn plausible(ms: i64) -> bool {
    (631_152_000_000..4_102_444_800_000).contains(&ms)
}

/// The share of `cells` that `pattern` reads to a plausible instant.
fn share(pattern: &str, cells: &[String], decimal_comma: bool) -> f64 {
    let Ok(tf) = TimeFormat::compile(pattern) else { return 0.0 };
    if cells.is_empty() {
        return 0.0;
    }
    let ok = cells
        .iter()
        .filter(|c| match tf.parse(c, decimal_comma) {
            Some(Stamp::Local(t)) | Some(Stamp::Utc(t)) => plausible(t),
            None => false,
        })
        .count();
    ok as f64 / cells.len() as f64
}

/// What was found about the time column(s).
pub(super) struct TimeGuess {
    /// One column, or date and time-of-day columns.
    pub(super) columns: Vec<usize>,
    /// The pattern(s): one when decided, two (day-first, month-first) when not.
    pub(super) patterns: Vec<String>,
    /// Why.
    pub(super) why: String,
}

/// Full-stamp patterns of one column.
fn stamp_patterns() -> Vec<(String, &'static str)> {
    let mut out = vec![
        ("rfc3339".to_string(), "ymd"),
        ("%Y-%m-%d %H:%M:%S %z".to_string(), "ymd"),
        ("%Y-%m-%dT%H:%M:%S%z".to_string(), "ymd"),
    ];
    for (d, o) in DATES {
        for c in CLOCKS {
            out.push((format!("{d} {c}"), o));
            if o == "ymd" && !c.contains("%p") {
                out.push((format!("{d}T{c}"), o));
            }
        }
    }
    out
}

/// The patterns among `candidates` that read the cells, best first, with
/// day-first/month-first twins kept together.
fn fitting<'a>(
    candidates: impl Iterator<Item = (String, &'a str)>,
    cells: &[String],
    dc: bool,
) -> Vec<String> {
    candidates.filter(|(p, _)| share(p, cells, dc) >= TIME_SHARE).map(|(p, _)| p).collect()
}

/// Find the time column(s) and pattern among the data cells of `cols`.
pub(super) fn find_time(header: &[String], cols: &[Vec<String>], dc: bool) -> Option<TimeGuess> {
    let stamps = stamp_patterns();
    // Unix seconds: whole numbers between 2001 and 2100.
    let unix = |cells: &[String]| {
        !cells.is_empty()
            && cells.iter().all(|c| number(c, dc).is_some_and(|x| (1e9..4.1e9).contains(&x)))
            && cells.iter().any(|c| !c.contains(['.', ',']))
    };
    for (j, cells) in cols.iter().enumerate() {
        if cells.is_empty() || !cells.iter().any(|c| c.contains([':', '-', '/', '.', 'T'])) {
            if unix(cells) && j < header.len() {
                return Some(TimeGuess {
                    columns: vec![j],
                    patterns: vec!["unix".into()],
                    why: format!("the cells of `{}` are seconds since 1970 ({}, ...)", header[j], cells[0]),
                });
            }
            continue;
        }
        let fit = fitting(stamps.iter().map(|(p, o)| (p.clone(), *o)), cells, dc);
        if let Some(first) = fit.first() {
            return Some(decide_order(vec![j], first, &fit, cells, header, dc));
        }
    }
    // Date and time of day in two neighbouring columns.
    for j in 0..cols.len().saturating_sub(1) {
        let (a, b) = (&cols[j], &cols[j + 1]);
        if a.is_empty() || b.is_empty() || a.len() != b.len() {
            continue;
        }
        let joined: Vec<String> = a.iter().zip(b).map(|(x, y)| format!("{x} {y}")).collect();
        let mut cand = Vec::new();
        for (d, o) in DATES {
            for c in CLOCKS {
                cand.push((format!("{d} {c}"), o));
            }
        }
        let fit = fitting(cand.into_iter(), &joined, dc);
        if let Some(first) = fit.first() {
            return Some(decide_order(vec![j, j + 1], first, &fit, &joined, header, dc));
        }
    }
    None
}

/// Keep the first fitting pattern, unless its day-first/month-first twin
/// fits as well: then both are choices (no day above 12 in the sample).
fn decide_order(
    columns: Vec<usize>,
    first: &str,
    fit: &[String],
    cells: &[String],
    header: &[String],
    dc: bool,
) -> TimeGuess {
    let names: Vec<String> = columns.iter().map(|&j| format!("`{}`", header[j])).collect();
    let names = names.join(" and ");
    let date = first.split([' ', 'T']).next().unwrap_or(first);
    let rest = &first[date.len()..];
    let example = cells.first().cloned().unwrap_or_default();
    if let Some(t) = twin(date) {
        let other = format!("{t}{rest}");
        // Both orders fit the share, but one reads more cells: the other
        // fails on the days above 12.
        let (a, b) = (share(first, cells, dc), share(&other, cells, dc));
        if fit.contains(&other) && b > a {
            return TimeGuess {
                columns,
                patterns: vec![other.clone()],
                why: format!(
                    "{names}: {:.0}% of {} sampled stamps read (a day above 12 fixes the order, e.g. `{}`)",
                    b * 100.0,
                    cells.len(),
                    day_above_12(&other, cells).unwrap_or(example)
                ),
            };
        }
        if fit.contains(&other) && a == b {
            let (dmy, mdy) =
                if date.starts_with("%d") { (first.to_string(), other) } else { (other, first.to_string()) };
            return TimeGuess {
                columns,
                patterns: vec![dmy, mdy],
                why: format!(
                    "{names} read as day-first and as month-first dates: no day above 12 in the {} rows sampled (e.g. `{example}`)",
                    cells.len()
                ),
            };
        }
        return TimeGuess {
            columns,
            patterns: vec![first.to_string()],
            why: format!(
                "{names}: {:.0}% of {} sampled stamps read (a day above 12 fixes the order, e.g. `{}`)",
                a * 100.0,
                cells.len(),
                day_above_12(first, cells).unwrap_or(example)
            ),
        };
    }
    TimeGuess {
        columns,
        patterns: vec![first.to_string()],
        why: format!("{names}: every sampled stamp read (e.g. `{example}`)"),
    }
}

/// A cell whose day (by `pattern`) is above 12, for the comment.
fn day_above_12(pattern: &str, cells: &[String]) -> Option<String> {
    let tf = TimeFormat::compile(pattern).ok()?;
    cells
        .iter()
        .find(|c| match tf.parse(c, false) {
            Some(Stamp::Local(t)) => {
                chrono::DateTime::from_timestamp_millis(t).is_some_and(|d| chrono::Datelike::day(&d) > 12)
            }
            _ => false,
        })
        .cloned()
}

/// Preamble text naming a time zone: `Time zone: UTC+01:00`,
/// `timezone=Europe/Berlin`, `GMT-05:00`. Returns (value, line index).
pub(super) fn zone_in_preamble(lines: &[String]) -> Option<(String, usize)> {
    for (i, l) in lines.iter().enumerate() {
        let low = l.to_lowercase();
        for tok in
            l.split(|c: char| c.is_whitespace() || c == ',' || c == ';' || c == '=' || c == '"' || c == '\t')
        {
            let tok = tok.trim_matches(|c: char| c == '(' || c == ')' || c == '[' || c == ']');
            if tok.contains('/') && tok.parse::<chrono_tz::Tz>().is_ok() {
                return Some((tok.to_string(), i));
            }
            if (tok.starts_with("UTC") || tok.starts_with("GMT"))
                && crate::io::study::fixed_offset(tok).is_some()
            {
                return Some((tok.to_string(), i));
            }
        }
        if low.contains("zone") {
            for tok in l.split([' ', ':', '=', ',', ';', '\t']) {
                if (tok.starts_with('+') || tok.starts_with('-'))
                    && crate::io::study::fixed_offset(tok).is_some()
                {
                    return Some((tok.to_string(), i));
                }
            }
        }
    }
    None
}
