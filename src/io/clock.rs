//! Logger time stamps: parsing the text of a time cell into an instant, and
//! turning local wall-clock times into UTC with the IANA rules of chrono-tz.
//!
//! Three formats exist (`time_format` in `[[logs]]`): a chrono strftime
//! pattern, `rfc3339` (with offset), and `unix` (epoch seconds, possibly
//! fractional). Patterns made only of the fixed-width fields `%Y %m %d %H %M
//! %S` and literal characters are compiled into a byte-level parser (the
//! common logger formats, millions of rows); a cell the fast parser cannot
//! read, and every other pattern, goes through chrono's own parser, so the
//! meaning of a pattern is always chrono's.
//!
//! Local times are converted by [`LocalClock`], which caches the UTC offset
//! per local hour: an hour whose first and last millisecond map to one and the
//! same offset has that offset throughout (zones change offset at most once
//! in an hour), so only the hours around a daylight-saving transition are
//! resolved per stamp through chrono-tz.

use chrono::{DateTime, LocalResult, NaiveDateTime, Offset, TimeZone};
use chrono_tz::Tz;
use std::collections::HashMap;

/// Milliseconds in one hour.
const HOUR_MS: i64 = 3_600_000;

/// A parsed time cell.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Stamp {
    /// Wall-clock time without offset: milliseconds since 1970-01-01 00:00
    /// of the same wall clock (to be resolved in a time zone).
    Local(i64),
    /// An instant: milliseconds since the Unix epoch, UTC.
    Utc(i64),
}

/// How a `[[logs]]` block writes its time stamps.
#[derive(Debug, Clone)]
pub enum TimeFormat {
    /// A chrono strftime pattern.
    Pattern(Pattern),
    /// RFC 3339 with an offset (`2026-03-01T08:00:00+01:00`, `...Z`).
    Rfc3339,
    /// Seconds since 1970-01-01 00:00 UTC, integer or fractional.
    Unix,
}

/// A compiled strftime pattern.
#[derive(Debug, Clone)]
pub struct Pattern {
    text: String,
    fast: Option<Vec<Item>>,
    /// For a fast pattern whose date and hour fields all come before its
    /// minute and second fields: the index of the first item after them and
    /// its byte offset (see [`StampMemo`]).
    split: Option<(usize, usize)>,
    has_offset: bool,
}

#[derive(Debug, Clone, Copy)]
enum Item {
    Lit(u8),
    Num(Field, usize),
    /// `%p`: `AM` or `PM`, any case.
    AmPm,
}

#[derive(Debug, Clone, Copy)]
enum Field {
    Year,
    Month,
    Day,
    Hour,
    /// `%I`: hour of a 12-hour clock, 01..12.
    Hour12,
    Minute,
    Second,
}

impl TimeFormat {
    /// Compile `time_format`: `rfc3339`, `unix`, or a strftime pattern that
    /// chrono accepts and that names at least a date and an hour.
    pub fn compile(spec: &str) -> Result<TimeFormat, String> {
        match spec {
            "rfc3339" | "RFC3339" => return Ok(TimeFormat::Rfc3339),
            "unix" => return Ok(TimeFormat::Unix),
            _ => {}
        }
        use chrono::format::{Item as CItem, StrftimeItems};
        if StrftimeItems::new(spec).any(|i| matches!(i, CItem::Error)) {
            return Err(format!("`{spec}` is not a valid strftime pattern"));
        }
        let has = |s: &[&str]| s.iter().any(|p| spec.contains(p));
        let has_date = has(&["%Y", "%y", "%F", "%D", "%x", "%G"]) || has(&["%s"]);
        let has_hour = has(&["%H", "%I", "%k", "%l", "%T", "%R", "%X", "%r", "%s", "%c"]);
        if !has_date || !has_hour {
            return Err(format!("`{spec}` does not name a date and an hour (e.g. \"%Y-%m-%d %H:%M:%S\")"));
        }
        let has_offset = has(&["%z", "%:z", "%#z", "%::z", "%:::z"]);
        let fast = if has_offset { None } else { compile_fast(spec) };
        let split = fast.as_deref().and_then(split_of);
        Ok(TimeFormat::Pattern(Pattern { text: spec.to_string(), fast, split, has_offset }))
    }

    /// Whether stamps of this format carry their own offset (no zone needed).
    pub fn is_absolute(&self) -> bool {
        match self {
            TimeFormat::Pattern(p) => p.has_offset,
            TimeFormat::Rfc3339 | TimeFormat::Unix => true,
        }
    }

    /// What to show a user as "the pattern".
    pub fn describe(&self) -> String {
        match self {
            TimeFormat::Pattern(p) => p.text.clone(),
            TimeFormat::Rfc3339 => "rfc3339".into(),
            TimeFormat::Unix => "unix".into(),
        }
    }

    /// Parse one cell (surrounding whitespace ignored); `None` when it does
    /// not match. `decimal_comma` lets `unix` read `1772352000,5`.
    pub fn parse(&self, cell: &str, decimal_comma: bool) -> Option<Stamp> {
        let cell = cell.trim();
        if cell.is_empty() {
            return None;
        }
        match self {
            TimeFormat::Pattern(p) => {
                if p.has_offset {
                    return DateTime::parse_from_str(cell, &p.text)
                        .ok()
                        .map(|t| Stamp::Utc(t.timestamp_millis()));
                }
                if let Some(ms) = p.fast.as_deref().and_then(|items| parse_fast(items, cell.as_bytes())) {
                    return Some(Stamp::Local(ms));
                }
                NaiveDateTime::parse_from_str(cell, &p.text)
                    .ok()
                    .map(|t| Stamp::Local(t.and_utc().timestamp_millis()))
            }
            TimeFormat::Rfc3339 => DateTime::parse_from_rfc3339(cell)
                .ok()
                .or_else(|| DateTime::parse_from_rfc3339(&cell.replacen(' ', "T", 1)).ok())
                .map(|t| Stamp::Utc(t.timestamp_millis())),
            TimeFormat::Unix => {
                let s = if decimal_comma { cell.replace(',', ".") } else { cell.to_string() };
                let x: f64 = s.parse().ok()?;
                // About ±3000 years either side of 1970: anything beyond is not a time.
                if !x.is_finite() || x.abs() > 1e11 {
                    return None;
                }
                Some(Stamp::Utc((x * 1000.0).round() as i64))
            }
        }
    }

    /// [`TimeFormat::parse`] on the bytes of a cell. A fixed-width pattern
    /// reads the bytes directly; a cell it cannot read, and every other
    /// format, goes through [`TimeFormat::parse`] (text that is not UTF-8
    /// never matches), so the result is always that of `parse`.
    #[inline]
    pub fn parse_bytes(&self, cell: &[u8], decimal_comma: bool) -> Option<Stamp> {
        if let TimeFormat::Pattern(Pattern { fast: Some(items), has_offset: false, .. }) = self
            && let Some(ms) = parse_fast(items, cell)
        {
            return Some(Stamp::Local(ms));
        }
        self.parse(std::str::from_utf8(cell).ok()?, decimal_comma)
    }

    /// [`TimeFormat::parse_bytes`] that remembers the date-and-hour part of
    /// the last cell it read in `memo`: a cell with the same part (the next
    /// reading of the same hour) reads only its minutes and seconds. Same
    /// results as `parse_bytes`, whatever `memo` holds.
    #[inline]
    pub fn parse_bytes_memo(&self, cell: &[u8], decimal_comma: bool, memo: &mut StampMemo) -> Option<Stamp> {
        let TimeFormat::Pattern(Pattern {
            fast: Some(items), has_offset: false, split: Some((i, off)), ..
        }) = self
        else {
            return self.parse_bytes(cell, decimal_comma);
        };
        let (i, off) = (*i, *off);
        if memo.valid && cell.len() >= off && cell[..off] == memo.key[..] {
            let mut f = memo.fields;
            if read_items(&items[i..], &cell[off..], &mut f).is_some() && f.minute <= 59 && f.second <= 59 {
                return Some(Stamp::Local(memo.base + i64::from(f.minute * 60 + f.second) * 1000));
            }
        } else {
            let mut f = Fields::default();
            if read_items(items, cell, &mut f).is_some()
                && let Some(ms) = f.millis()
            {
                memo.key.clear();
                memo.key.extend_from_slice(&cell[..off]);
                memo.fields = f;
                memo.base = ms - i64::from(f.minute * 60 + f.second) * 1000;
                memo.valid = true;
                return Some(Stamp::Local(ms));
            }
        }
        self.parse(std::str::from_utf8(cell).ok()?, decimal_comma)
    }
}

/// The last date-and-hour part read by [`TimeFormat::parse_bytes_memo`]:
/// its bytes, its fields and its local milliseconds at minute 0, second 0.
/// One per reader (a file); start with `StampMemo::default()`.
#[derive(Debug, Clone, Default)]
pub struct StampMemo {
    valid: bool,
    key: Vec<u8>,
    fields: Fields,
    base: i64,
}

/// Where the minutes and seconds of a fast pattern start: the index of the
/// first item after every year, month, day and hour field, and its byte
/// offset; `None` when a date or hour field comes after a minute or second.
fn split_of(items: &[Item]) -> Option<(usize, usize)> {
    if items.iter().any(|it| matches!(it, Item::AmPm)) {
        return None; // the hour is not known before the AM/PM mark
    }
    let is_date_hour = |it: &Item| {
        matches!(it, Item::Num(Field::Year | Field::Month | Field::Day | Field::Hour | Field::Hour12, _))
    };
    let last = items.iter().rposition(is_date_hour)?;
    let head = &items[..=last];
    if head.iter().any(|it| matches!(it, Item::Num(Field::Minute | Field::Second, _))) {
        return None;
    }
    let off = head.iter().map(|it| if let Item::Num(_, w) = it { *w } else { 1 }).sum();
    Some((last + 1, off))
}

fn compile_fast(spec: &str) -> Option<Vec<Item>> {
    let b = spec.as_bytes();
    let mut items = Vec::new();
    let mut i = 0;
    while i < b.len() {
        if b[i] == b'%' {
            let f = *b.get(i + 1)?;
            items.push(match f {
                b'Y' => Item::Num(Field::Year, 4),
                b'm' => Item::Num(Field::Month, 2),
                b'd' => Item::Num(Field::Day, 2),
                b'H' => Item::Num(Field::Hour, 2),
                b'I' => Item::Num(Field::Hour12, 2),
                b'p' => Item::AmPm,
                b'M' => Item::Num(Field::Minute, 2),
                b'S' => Item::Num(Field::Second, 2),
                b'%' => Item::Lit(b'%'),
                _ => return None,
            });
            i += 2;
        } else if b[i].is_ascii() && !b[i].is_ascii_whitespace() {
            items.push(Item::Lit(b[i]));
            i += 1;
        } else {
            // Whitespace in chrono patterns matches any run of whitespace; leave
            // that (and non-ASCII literals) to chrono.
            if b[i] == b' ' {
                items.push(Item::Lit(b' '));
                i += 1;
            } else {
                return None;
            }
        }
    }
    // A 12-hour clock needs its AM/PM mark and no 24-hour field (chrono
    // decides the other combinations).
    let has = |f: &dyn Fn(&Item) -> bool| items.iter().any(f);
    let h12 = has(&|it| matches!(it, Item::Num(Field::Hour12, _)));
    let ampm = has(&|it| matches!(it, Item::AmPm));
    let h24 = has(&|it| matches!(it, Item::Num(Field::Hour, _)));
    if h12 != ampm || (h12 && h24) {
        return None;
    }
    Some(items)
}

/// The fields of a time stamp read so far (defaults: 1970-01-01 00:00:00).
#[derive(Debug, Clone, Copy)]
struct Fields {
    year: i64,
    month: u32,
    day: u32,
    hour: u32,
    minute: u32,
    second: u32,
    /// The hour is of a 12-hour clock (1..=12), `pm` says which half.
    h12: bool,
    pm: bool,
}

impl Default for Fields {
    fn default() -> Fields {
        Fields { year: 1970, month: 1, day: 1, hour: 0, minute: 0, second: 0, h12: false, pm: false }
    }
}

impl Fields {
    /// Local milliseconds since 1970-01-01 00:00, or `None` when a field is
    /// out of its range (month 13, 31 April, hour 24, ...).
    fn millis(&self) -> Option<i64> {
        let Fields { year: y, month: mo, day: d, hour: h, minute: mi, second: se, h12, pm } = *self;
        // 12 AM is midnight, 12 PM noon (chrono's reading of %I with %p).
        let h = match h12 {
            true if !(1..=12).contains(&h) => return None,
            true => h % 12 + if pm { 12 } else { 0 },
            false => h,
        };
        if !(1..=12).contains(&mo) || d < 1 || d > days_in_month(y, mo) || h > 23 || mi > 59 || se > 59 {
            return None;
        }
        let days = days_from_civil(y, mo, d);
        Some(((days * 86_400) + i64::from(h * 3600 + mi * 60 + se)) * 1000)
    }
}

/// Read `items` from the whole of `s` into `f`; `None` when `s` does not
/// match them (a literal differs, a field is not all digits, bytes are left
/// over or missing).
#[inline]
fn read_items(items: &[Item], s: &[u8], f: &mut Fields) -> Option<()> {
    let mut pos = 0;
    for it in items {
        match *it {
            Item::Lit(c) => {
                if *s.get(pos)? != c {
                    return None;
                }
                pos += 1;
            }
            Item::AmPm => {
                let m = s.get(pos..pos + 2)?;
                f.pm = match (m[0].to_ascii_uppercase(), m[1].to_ascii_uppercase()) {
                    (b'A', b'M') => false,
                    (b'P', b'M') => true,
                    _ => return None,
                };
                pos += 2;
            }
            Item::Num(field, w) => {
                let digits = s.get(pos..pos + w)?;
                let mut v = 0u32;
                for &c in digits {
                    if !c.is_ascii_digit() {
                        return None;
                    }
                    v = v * 10 + u32::from(c - b'0');
                }
                pos += w;
                match field {
                    Field::Year => f.year = i64::from(v),
                    Field::Month => f.month = v,
                    Field::Day => f.day = v,
                    Field::Hour => f.hour = v,
                    Field::Hour12 => {
                        f.hour = v;
                        f.h12 = true;
                    }
                    Field::Minute => f.minute = v,
                    Field::Second => f.second = v,
                }
            }
        }
    }
    (pos == s.len()).then_some(())
}

/// The byte-level parser for fixed-width patterns. Returns local milliseconds
/// since 1970-01-01 00:00, or `None` (the caller then asks chrono).
fn parse_fast(items: &[Item], s: &[u8]) -> Option<i64> {
    let mut f = Fields::default();
    read_items(items, s, &mut f)?;
    f.millis()
}

fn is_leap(y: i64) -> bool {
    (y % 4 == 0 && y % 100 != 0) || y % 400 == 0
}

fn days_in_month(y: i64, m: u32) -> u32 {
    match m {
        1 | 3 | 5 | 7 | 8 | 10 | 12 => 31,
        4 | 6 | 9 | 11 => 30,
        _ => {
            if is_leap(y) {
                29
            } else {
                28
            }
        }
    }
}

/// Days since 1970-01-01 of a proleptic Gregorian date. The algorithm is
/// H. Hinnant, "chrono-Compatible Low-Level Date Algorithms" (2013,
/// `days_from_civil`): shift the year to start in March so the leap day is
/// last, count 400-year eras of 146 097 days. Cost O(1).
pub fn days_from_civil(y: i64, m: u32, d: u32) -> i64 {
    let y = if m <= 2 { y - 1 } else { y };
    let era = y.div_euclid(400);
    let yoe = y - era * 400;
    let mp = i64::from((m + 9) % 12);
    let doy = (153 * mp + 2) / 5 + i64::from(d) - 1;
    let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    era * 146_097 + doe - 719_468
}

/// What a local wall-clock time means in a zone.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Resolution {
    /// Exactly one instant (UTC milliseconds).
    Single(i64),
    /// The fall-back hour: the same wall-clock time happened twice; the two
    /// instants, earliest first.
    Ambiguous(i64, i64),
    /// The spring-forward gap: the wall clock skipped this time.
    Nonexistent,
}

/// Converts local wall-clock milliseconds to UTC in one zone, with the
/// per-hour offset cache described in the module docs.
#[derive(Debug, Clone)]
pub struct LocalClock {
    tz: Tz,
    last_hour: i64,
    last_offset: Option<i64>,
    cache: HashMap<i64, Option<i64>>,
}

impl LocalClock {
    /// A clock for zone `tz`.
    pub fn new(tz: Tz) -> LocalClock {
        LocalClock { tz, last_hour: i64::MIN, last_offset: None, cache: HashMap::new() }
    }

    /// The zone.
    pub fn zone(&self) -> Tz {
        self.tz
    }

    /// Resolve local milliseconds since 1970-01-01 00:00 (wall clock).
    pub fn resolve(&mut self, local_ms: i64) -> Resolution {
        let hour = local_ms.div_euclid(HOUR_MS);
        if hour != self.last_hour {
            let tz = self.tz;
            self.last_offset = *self.cache.entry(hour).or_insert_with(|| hour_offset(tz, hour));
            self.last_hour = hour;
        }
        match self.last_offset {
            Some(off) => Resolution::Single(local_ms - off),
            None => resolve_exact(self.tz, local_ms),
        }
    }
}

fn naive(local_ms: i64) -> Option<NaiveDateTime> {
    DateTime::from_timestamp_millis(local_ms).map(|t| t.naive_utc())
}

fn single_offset_ms(tz: Tz, local_ms: i64) -> Option<i64> {
    match tz.from_local_datetime(&naive(local_ms)?) {
        LocalResult::Single(t) => Some(i64::from(t.offset().fix().local_minus_utc()) * 1000),
        _ => None,
    }
}

fn hour_offset(tz: Tz, hour: i64) -> Option<i64> {
    let a = single_offset_ms(tz, hour * HOUR_MS)?;
    let b = single_offset_ms(tz, hour * HOUR_MS + HOUR_MS - 1)?;
    (a == b).then_some(a)
}

/// Resolve one local time through chrono-tz without the cache.
pub fn resolve_exact(tz: Tz, local_ms: i64) -> Resolution {
    let Some(n) = naive(local_ms) else {
        return Resolution::Nonexistent;
    };
    match tz.from_local_datetime(&n) {
        LocalResult::Single(t) => Resolution::Single(t.timestamp_millis()),
        LocalResult::Ambiguous(a, b) => {
            let (a, b) = (a.timestamp_millis(), b.timestamp_millis());
            Resolution::Ambiguous(a.min(b), a.max(b))
        }
        LocalResult::None => Resolution::Nonexistent,
    }
}

/// Format UTC milliseconds as `2026-03-29T01:00:00Z` (milliseconds shown
/// only when not zero).
pub fn format_utc(ms: i64) -> String {
    match DateTime::from_timestamp_millis(ms) {
        Some(t) if ms.rem_euclid(1000) != 0 => t.format("%Y-%m-%dT%H:%M:%S%.3fZ").to_string(),
        Some(t) => t.format("%Y-%m-%dT%H:%M:%SZ").to_string(),
        None => ms.to_string(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use chrono::{NaiveDate, Utc};

    fn local(s: &str) -> i64 {
        NaiveDateTime::parse_from_str(s, "%Y-%m-%d %H:%M:%S").unwrap().and_utc().timestamp_millis()
    }

    #[test]
    fn days_from_civil_agrees_with_chrono() {
        let epoch = NaiveDate::from_ymd_opt(1970, 1, 1).unwrap();
        let mut d = NaiveDate::from_ymd_opt(1890, 1, 1).unwrap();
        let end = NaiveDate::from_ymd_opt(2110, 12, 31).unwrap();
        while d <= end {
            use chrono::Datelike;
            assert_eq!(
                days_from_civil(i64::from(d.year()), d.month(), d.day()),
                (d - epoch).num_days(),
                "{d}"
            );
            d = d.succ_opt().unwrap();
        }
    }

    #[test]
    fn fast_parser_agrees_with_chrono_and_falls_back() {
        for (pat, cells) in [
            ("%Y-%m-%d %H:%M:%S", vec!["2026-03-01 08:05:09", "2024-02-29 23:59:59", "2026-3-1 8:05:09"]),
            ("%d.%m.%Y %H:%M", vec!["01.03.2026 08:05", "31.12.1999 00:00", "1.3.2026 8:05"]),
            ("%m/%d/%Y %H:%M:%S", vec!["03/08/2026 01:59:00", "12/31/2026 23:00:00"]),
            ("%Y-%m-%dT%H:%M", vec!["2026-10-25T02:30"]),
        ] {
            let f = TimeFormat::compile(pat).unwrap();
            for c in cells {
                let want = NaiveDateTime::parse_from_str(c, pat).unwrap().and_utc().timestamp_millis();
                assert_eq!(f.parse(c, false), Some(Stamp::Local(want)), "{pat} {c}");
            }
        }
        let f = TimeFormat::compile("%Y-%m-%d %H:%M:%S").unwrap();
        for bad in ["2026-02-29 00:00:00", "2026-13-01 00:00:00", "2026-03-01 24:00:00", "garbage", ""] {
            assert_eq!(f.parse(bad, false), None, "{bad}");
        }
    }

    /// 12-hour clocks (`%I` with `%p`) take the byte-level parser and agree
    /// with chrono's parser cell by cell on generated stamps: hours 00..13,
    /// marks in any case and malformed marks, day-first and month-first.
    #[test]
    fn twelve_hour_clock_agrees_with_chrono() {
        use rand::{RngExt, SeedableRng};
        let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(12);
        let marks = ["AM", "PM", "am", "pm", "Pm", "aM", "XM", "A.", "  "];
        let mut fast_hits = 0;
        for pat in ["%m/%d/%Y %I:%M:%S %p", "%d/%m/%Y %I:%M %p", "%Y-%m-%d %I:%M:%S%p"] {
            let f = TimeFormat::compile(pat).unwrap();
            let TimeFormat::Pattern(p) = &f else { unreachable!() };
            let items = p.fast.as_deref().expect("a 12-hour pattern takes the fast parser");
            assert!(p.split.is_none());
            for _ in 0..20_000 {
                let (y, mo, d) =
                    (rng.random_range(2024..2028), rng.random_range(0..14), rng.random_range(0..32));
                let (h, mi, se) = (rng.random_range(0..14), rng.random_range(0..61), rng.random_range(0..61));
                let mark = marks[rng.random_range(0..marks.len())];
                let c = match pat {
                    "%m/%d/%Y %I:%M:%S %p" => format!("{mo:02}/{d:02}/{y} {h:02}:{mi:02}:{se:02} {mark}"),
                    "%d/%m/%Y %I:%M %p" => format!("{d:02}/{mo:02}/{y} {h:02}:{mi:02} {mark}"),
                    _ => format!("{y}-{mo:02}-{d:02} {h:02}:{mi:02}:{se:02}{mark}"),
                };
                let want =
                    NaiveDateTime::parse_from_str(&c, pat).ok().map(|t| t.and_utc().timestamp_millis());
                let fast = parse_fast(items, c.as_bytes());
                // chrono reads second 60 (a leap second); the fast parser
                // leaves it to chrono.
                if se < 60 || fast.is_some() {
                    assert_eq!(fast, want, "{pat} {c:?}");
                }
                assert_eq!(f.parse(&c, false), want.map(Stamp::Local), "{pat} {c:?}");
                fast_hits += usize::from(fast.is_some());
            }
        }
        assert!(fast_hits > 5_000, "{fast_hits}");
        // 12 AM is midnight and 12 PM noon.
        let f = TimeFormat::compile("%m/%d/%Y %I:%M %p").unwrap();
        let at = |s: &str| {
            NaiveDateTime::parse_from_str(s, "%Y-%m-%d %H:%M").unwrap().and_utc().timestamp_millis()
        };
        assert_eq!(f.parse("03/08/2026 12:30 AM", false), Some(Stamp::Local(at("2026-03-08 00:30"))));
        assert_eq!(f.parse("03/08/2026 12:30 PM", false), Some(Stamp::Local(at("2026-03-08 12:30"))));
        // Without its mark, or with a 24-hour field, chrono decides.
        for pat in ["%m/%d/%Y %I:%M", "%m/%d/%Y %H:%M %p"] {
            let TimeFormat::Pattern(p) = TimeFormat::compile(pat).unwrap() else { unreachable!() };
            assert!(p.fast.is_none(), "{pat}");
        }
    }

    #[test]
    fn parse_bytes_agrees_with_parse() {
        for pat in ["%Y-%m-%d %H:%M:%S", "%d.%m.%Y %H:%M", "%Y-%m-%d %H:%M:%S%.f", "rfc3339", "unix"] {
            let f = TimeFormat::compile(pat).unwrap();
            for c in [
                "2026-03-01 08:05:09",
                " 2026-03-01 08:05:09",
                "01.03.2026 08:05",
                "1.3.2026 8:05",
                "2026-03-01 00:00:01.250",
                "2026-03-01T08:00:00+01:00",
                "1772352000",
                "1772352000,5",
                "2026-02-30 00:00:00",
                "",
                "x",
            ] {
                for comma in [false, true] {
                    assert_eq!(f.parse_bytes(c.as_bytes(), comma), f.parse(c, comma), "{pat} {c:?}");
                }
            }
            assert_eq!(f.parse_bytes(b"2026-03-01 08:05:\xB0", false), None);
        }
    }

    /// The memo that skips re-reading a repeated date and hour changes no
    /// result: a long sequence of cells (consecutive minutes, with damaged
    /// cells mixed in) read with one memo gives what chrono's own parser
    /// gives for each cell alone.
    #[test]
    fn memo_parse_agrees_with_chrono_cell_by_cell() {
        use rand::{RngExt, SeedableRng};
        let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(11);
        for pat in
            ["%Y-%m-%d %H:%M:%S", "%d.%m.%Y %H:%M", "%m/%d/%Y %H:%M:%S", "%H:%M %d.%m.%Y", "%Y%m%d%H%M"]
        {
            let f = TimeFormat::compile(pat).unwrap();
            let mut memo = StampMemo::default();
            let mut t = NaiveDate::from_ymd_opt(2026, 2, 27).unwrap().and_hms_opt(22, 50, 0).unwrap();
            let mut hits = 0;
            for _ in 0..20_000 {
                t += chrono::Duration::seconds(rng.random_range(0..200));
                let mut c = t.format(pat).to_string().into_bytes();
                match rng.random_range(0..20) {
                    0 => {
                        let i = rng.random_range(0..c.len());
                        c[i] = b"x9:0 -"[rng.random_range(0..6)];
                    }
                    1 => c.truncate(rng.random_range(0..c.len())),
                    2 => c.push(b'7'),
                    3 => c.insert(0, b' '),
                    _ => {}
                }
                let text = String::from_utf8(c.clone()).unwrap();
                let want = NaiveDateTime::parse_from_str(text.trim(), pat)
                    .ok()
                    .filter(|_| !text.trim().is_empty())
                    .map(|t| Stamp::Local(t.and_utc().timestamp_millis()));
                let got = f.parse_bytes_memo(&c, false, &mut memo);
                assert_eq!(got, want, "{pat} {text:?}");
                hits += usize::from(got.is_some());
            }
            assert!(hits > 15_000, "{pat}: {hits}");
        }
        // Patterns with the hour after the minutes read without a memo.
        assert!(split_of(&compile_fast("%H:%M %d.%m.%Y").unwrap()).is_none());
        assert_eq!(split_of(&compile_fast("%Y-%m-%d %H:%M:%S").unwrap()), Some((7, 13)));
    }

    #[test]
    fn fractional_seconds_go_through_chrono() {
        let f = TimeFormat::compile("%Y-%m-%d %H:%M:%S%.f").unwrap();
        assert_eq!(
            f.parse("2026-03-01 00:00:01.250", false),
            Some(Stamp::Local(local("2026-03-01 00:00:01") + 250))
        );
    }

    #[test]
    fn rfc3339_unix_and_offset_patterns_are_instants() {
        let want = DateTime::parse_from_rfc3339("2026-03-01T07:00:00Z").unwrap().timestamp_millis();
        let rfc = TimeFormat::compile("rfc3339").unwrap();
        assert_eq!(rfc.parse("2026-03-01T08:00:00+01:00", false), Some(Stamp::Utc(want)));
        assert_eq!(rfc.parse("2026-03-01 07:00:00Z", false), Some(Stamp::Utc(want)));
        let unix = TimeFormat::compile("unix").unwrap();
        assert_eq!(unix.parse(&(want / 1000).to_string(), false), Some(Stamp::Utc(want)));
        assert_eq!(unix.parse(&format!("{},5", want / 1000), true), Some(Stamp::Utc(want + 500)));
        let z = TimeFormat::compile("%Y-%m-%d %H:%M:%S %z").unwrap();
        assert!(z.is_absolute());
        assert_eq!(z.parse("2026-03-01 02:00:00 -0500", false), Some(Stamp::Utc(want)));
    }

    #[test]
    fn invalid_or_incomplete_patterns_are_rejected() {
        assert!(TimeFormat::compile("%Y-%m-%d %Q").is_err());
        assert!(TimeFormat::compile("%Y-%m-%d").is_err());
        assert!(TimeFormat::compile("%H:%M").is_err());
    }

    /// Every local minute from 2026-01-01 to 2027-01-01 in four zones,
    /// through the cached clock, against chrono-tz (IANA tz database) directly.
    #[test]
    fn cached_clock_agrees_with_chrono_tz_over_a_year() {
        for tz in [
            chrono_tz::Europe::Amsterdam,
            chrono_tz::America::New_York,
            chrono_tz::Australia::Lord_Howe,
            chrono_tz::Asia::Kathmandu,
        ] {
            let mut clock = LocalClock::new(tz);
            let mut t = local("2026-01-01 00:00:00");
            let end = local("2027-01-01 00:00:00");
            while t < end {
                assert_eq!(clock.resolve(t), resolve_exact(tz, t), "{tz} {t}");
                t += 60_000;
            }
        }
    }

    #[test]
    fn european_transitions_2026() {
        // IANA rules for the EU: last Sunday of March 01:00 UTC and last Sunday
        // of October 01:00 UTC (2026-03-29 and 2026-10-25).
        let tz = chrono_tz::Europe::Amsterdam;
        let mut c = LocalClock::new(tz);
        assert_eq!(c.resolve(local("2026-03-29 02:30:00")), Resolution::Nonexistent);
        let utc = |s: &str| local(s);
        assert_eq!(c.resolve(local("2026-03-29 03:00:00")), Resolution::Single(utc("2026-03-29 01:00:00")));
        assert_eq!(c.resolve(local("2026-03-29 01:59:00")), Resolution::Single(utc("2026-03-29 00:59:00")));
        assert_eq!(
            c.resolve(local("2026-10-25 02:30:00")),
            Resolution::Ambiguous(utc("2026-10-25 00:30:00"), utc("2026-10-25 01:30:00"))
        );
        // Cross-check with chrono-tz's own formatting of the offsets.
        let t = tz.from_utc_datetime(
            &DateTime::<Utc>::from_timestamp_millis(utc("2026-10-25 01:30:00")).unwrap().naive_utc(),
        );
        assert_eq!(t.format("%H:%M %Z").to_string(), "02:30 CET");
    }

    #[test]
    fn north_american_transitions_2026() {
        // US rules: second Sunday of March and first Sunday of November at
        // 02:00 local (2026-03-08, 2026-11-01); Toronto follows them.
        let mut c = LocalClock::new(chrono_tz::America::Toronto);
        assert_eq!(c.resolve(local("2026-03-08 02:15:00")), Resolution::Nonexistent);
        assert_eq!(c.resolve(local("2026-03-08 03:00:00")), Resolution::Single(local("2026-03-08 07:00:00")));
        assert_eq!(
            c.resolve(local("2026-11-01 01:30:00")),
            Resolution::Ambiguous(local("2026-11-01 05:30:00"), local("2026-11-01 06:30:00"))
        );
    }

    #[test]
    fn utc_formatting() {
        assert_eq!(format_utc(local("2026-03-29 01:00:00")), "2026-03-29T01:00:00Z");
        assert_eq!(format_utc(local("2026-03-29 01:00:00") + 5), "2026-03-29T01:00:00.005Z");
    }
}
