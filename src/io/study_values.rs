//! Values of the study file read the same way wherever potclim reads TOML (see
//! [`super`]): delimiters, log time zones and fixed offsets, IANA zones, and the
//! line and column of a TOML error.

use crate::io::error::{IoError, Result};
use std::path::Path;

/// Parse a one-character delimiter (`"\t"` and `"tab"` mean tab).
pub fn delimiter_byte(d: &str) -> std::result::Result<u8, String> {
    match d {
        "\t" | "tab" | "\\t" => Ok(b'\t'),
        _ if d.len() == 1 && d.is_ascii() => Ok(d.as_bytes()[0]),
        _ => Err(format!("must be one ASCII character (or \"tab\"), got {d:?}")),
    }
}

/// The zone of a `[[logs]]` block's local times.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LogZone {
    /// An IANA zone, daylight-saving rules included.
    Iana(chrono_tz::Tz),
    /// A fixed offset east of UTC, seconds, all year.
    Fixed(i32),
    /// The offset written in the time column's header (`GMT+01:00`).
    InHeader,
}

/// Parse `timezone` of `[[logs]]`: `in_header`, a fixed offset (see
/// [`fixed_offset`]), or an IANA name (errors as [`parse_timezone`]).
pub fn parse_log_zone(path: &Path, key: &str, text: &str) -> Result<LogZone> {
    if text.eq_ignore_ascii_case("in_header") {
        return Ok(LogZone::InHeader);
    }
    if let Some(s) = fixed_offset(text) {
        return Ok(LogZone::Fixed(s));
    }
    parse_timezone(path, key, text).map(LogZone::Iana)
}

/// A fixed UTC offset written as `UTC+01:00`, `GMT-5`, `+0530`, `UTC+1`
/// (optional `UTC`/`GMT` prefix, a sign, hours of one or two digits, and
/// optionally minutes after a colon or as two more digits): seconds east of
/// UTC, or `None` when the text is not of that form or beyond ±15:59.
pub fn fixed_offset(text: &str) -> Option<i32> {
    let t = text.trim();
    let t = ["UTC", "GMT", "utc", "gmt"].iter().find_map(|p| t.strip_prefix(p)).unwrap_or(t).trim_start();
    let (sign, rest) = match t.as_bytes().first()? {
        b'+' => (1, &t[1..]),
        b'-' => (-1, &t[1..]),
        _ => return None,
    };
    let (h, m) = match rest.split_once(':') {
        Some((h, m)) => (h, m),
        None if rest.len() == 4 => rest.split_at(2),
        None => (rest, "0"),
    };
    let ok = |s: &str, n: usize| !s.is_empty() && s.len() <= n && s.bytes().all(|c| c.is_ascii_digit());
    if !ok(h, 2) || !ok(m, 2) {
        return None;
    }
    let (h, m): (i32, i32) = (h.parse().ok()?, m.parse().ok()?);
    (h <= 15 && m <= 59).then_some(sign * (h * 3600 + m * 60))
}

/// Parse an IANA time-zone name, with a suggestion when it is misspelt.
pub fn parse_timezone(path: &Path, key: &str, name: &str) -> Result<chrono_tz::Tz> {
    name.parse::<chrono_tz::Tz>().map_err(|_| {
        let names = chrono_tz::TZ_VARIANTS.iter().map(|t| t.name());
        let hint = crate::io::error::closest(name, names)
            .map(|s| format!("did you mean `{s}`?"))
            .or_else(|| Some("use an IANA name such as \"Europe/Amsterdam\" or \"America/Toronto\"".into()));
        IoError::Invalid {
            path: path.to_path_buf(),
            key: key.to_string(),
            message: format!("unknown time zone `{name}`"),
            hint,
        }
    })
}

/// Turn a toml error into one with 1-based line and column.
pub fn toml_error(path: &Path, source: &str, e: &toml::de::Error) -> IoError {
    let (line, column) = match e.span() {
        Some(span) => line_col(source, span.start),
        None => (1, 1),
    };
    IoError::Toml { path: path.to_path_buf(), line, column, message: e.message().trim().to_string() }
}

/// 1-based line and column (in characters) of byte offset `offset`.
pub fn line_col(source: &str, offset: usize) -> (usize, usize) {
    let offset = offset.min(source.len());
    let before = &source[..offset];
    let line = before.matches('\n').count() + 1;
    let col = before.rsplit('\n').next().map(|l| l.chars().count()).unwrap_or(0) + 1;
    (line, col)
}
