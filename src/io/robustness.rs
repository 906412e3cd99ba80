//! Property tests of the export readers on damaged input (test-only module):
//! seeded mutations of exports in the table form (hand-written blocks: a
//! preamble, a sensor column, separate date and time columns, decimal commas,
//! a 12-hour clock, a serial number in the first row only, quoted cells),
//! and of a workbook's bytes. Every mutated file either reads, with every
//! data row accounted for (`rows_read` = rows with an instant + rows dropped
//! with one flag that has no instant), or gives an error naming the file;
//! nothing panics. The layouts' own mutations are in `layouts.rs`.

use super::clock::TimeFormat;
use super::logs::{FileRead, LogFormat, SensorSource, read_bytes, read_file};
use super::study::LogZone;
use super::units::{Channel, Conversion};
use rand::{RngExt, SeedableRng};
use std::path::Path;

/// A block of the table form.
/// `marks` is the delimiter and whether the decimal mark is a comma.
fn block(
    marks: (u8, bool),
    time: (&str, Option<&str>),
    pattern: &str,
    zone: chrono_tz::Tz,
    sensor: SensorSource,
    skip_lines: usize,
    channels: [Option<(&str, &str)>; 3],
) -> LogFormat {
    let mut chans: [Option<(String, Conversion)>; 3] = [None, None, None];
    for ch in Channel::ALL {
        if let Some((col, unit)) = channels[ch.index()] {
            chans[ch.index()] = Some((col.to_string(), Conversion::of(ch, unit).unwrap()));
        }
    }
    let (delimiter, decimal_comma) = marks;
    LogFormat {
        block: 1,
        delimiter,
        decimal_comma,
        time_column: time.0.to_string(),
        clock_column: time.1.map(str::to_string),
        time_format: TimeFormat::compile(pattern).unwrap(),
        zone: LogZone::Iana(zone),
        zone_given: true,
        sensor,
        skip_lines,
        after_header: 0,
        layout: None,
        sheet: None,
        channels: chans,
        files: vec![],
    }
}

/// Local wall-clock times every `step` minutes from the UTC instant `start`
/// in `tz` (IANA rules through chrono-tz), as a logger keeping local time
/// writes them.
fn local_times(tz: chrono_tz::Tz, start: &str, n: usize, step: i64) -> Vec<chrono::NaiveDateTime> {
    let t0 = chrono::DateTime::parse_from_rfc3339(start).unwrap().with_timezone(&chrono::Utc);
    (0..n as i64)
        .map(|i| (t0 + chrono::Duration::minutes(step * i)).with_timezone(&tz).naive_local())
        .collect()
}

/// The table-form exports the mutations start from, with their blocks.
fn bases() -> Vec<(LogFormat, String)> {
    let mut out = Vec::new();
    // Semicolons, decimal commas, day-first date and time apart, a preamble,
    // a sensor column; Australia/Sydney across the end of daylight saving.
    let f = block(
        (b';', true),
        ("Datum", Some("Zeit")),
        "%d.%m.%Y %H:%M",
        chrono_tz::Australia::Sydney,
        SensorSource::Column("Fühler".into()),
        2,
        [Some(("T [°C]", "degC")), Some(("rF [%]", "percent")), None],
    );
    let mut t = String::from("Export;v3\nIntervall;20 min\nFühler;Datum;Zeit;T [°C];rF [%]\n");
    for (i, l) in local_times(chrono_tz::Australia::Sydney, "2026-04-04T14:00:00Z", 30, 20).iter().enumerate()
    {
        t.push_str(&format!(
            "{};{};{};{},{};{},5\n",
            ["K1", "K2"][i % 2],
            l.format("%d.%m.%Y"),
            l.format("%H:%M"),
            18 + i % 5,
            i % 10,
            60 + i % 9
        ));
    }
    out.push((f, t));
    // A 12-hour clock, month-first, Europe/Berlin across the fall-back hour,
    // °F, a serial number in the first row only, the file stem as sensor.
    let f = block(
        (b',', false),
        ("Time", None),
        "%m/%d/%Y %I:%M %p",
        chrono_tz::Europe::Berlin,
        SensorSource::FileStem,
        0,
        [Some(("Temp (°F)", "degF")), Some(("RH (%)", "percent")), None],
    );
    let mut t = String::from("No.,Time,Temp (°F),RH (%),Serial\n");
    for (i, l) in local_times(chrono_tz::Europe::Berlin, "2026-10-24T23:00:00Z", 30, 10).iter().enumerate() {
        t.push_str(&format!(
            "{},{},{}.{},{}",
            i + 1,
            l.format("%m/%d/%Y %I:%M %p"),
            60 + i % 7,
            i % 10,
            40 + i
        ));
        t.push_str(if i == 0 { ",SN-77\n" } else { "\n" });
    }
    out.push((f, t));
    // Tab-delimited, quoted cells, light in lux (sunlight), Pacific/Auckland
    // across the start of daylight saving.
    let f = block(
        (b'\t', false),
        ("timestamp", None),
        "%Y-%m-%d %H:%M:%S",
        chrono_tz::Pacific::Auckland,
        SensorSource::Column("node".into()),
        0,
        [Some(("air temp", "degC")), None, Some(("light lux", "lux_sunlight"))],
    );
    let mut t = String::from("\"node\"\t\"timestamp\"\t\"air temp\"\t\"light lux\"\n");
    for (i, l) in local_times(chrono_tz::Pacific::Auckland, "2026-09-26T12:00:00Z", 30, 10).iter().enumerate()
    {
        t.push_str(&format!(
            "\"n{}\"\t\"{}\"\t{}.25\t{}\n",
            i % 3,
            l.format("%Y-%m-%d %H:%M:%S"),
            10 + i % 4,
            100 * i
        ));
    }
    out.push((f, t));
    out
}

/// One seeded mutation of `b`: truncation, a stray quote, a byte-order
/// mark, a lone carriage return, a non-UTF-8 byte, deleted bytes, an
/// empty-columns line, a duplicated or dropped line, an emptied cell.
fn mutate(rng: &mut rand_chacha::ChaCha20Rng, b: &mut Vec<u8>, delimiter: u8) {
    let at = rng.random_range(0..=b.len());
    match rng.random_range(0..10) {
        0 => b.truncate(at),
        1 => b.insert(at, b'"'),
        2 => b.splice(0..0, *b"\xEF\xBB\xBF").for_each(drop),
        3 => b.insert(at, b'\r'),
        4 => b.insert(at, [0xB0, 0xFF, 0xC3][rng.random_range(0..3)]),
        5 => {
            let end = (at + rng.random_range(0..8)).min(b.len());
            b.drain(at..end);
        }
        6 => b.splice(at..at, [b'\n', delimiter, delimiter, b'\n']).for_each(drop),
        7 | 8 => {
            // A whole line duplicated or dropped.
            let start = b[..at].iter().rposition(|&c| c == b'\n').map_or(0, |p| p + 1);
            let end = b[at..].iter().position(|&c| c == b'\n').map_or(b.len(), |p| at + p + 1);
            if rng.random_bool(0.5) {
                let line = b[start..end].to_vec();
                b.splice(end..end, line).for_each(drop);
            } else {
                b.drain(start..end);
            }
        }
        _ => {
            // The cell under `at` emptied.
            let start = b[..at].iter().rposition(|&c| c == delimiter || c == b'\n').map_or(0, |p| p + 1);
            let end = b[at..].iter().position(|&c| c == delimiter || c == b'\n').map_or(b.len(), |p| at + p);
            b.drain(start..end);
        }
    }
}

/// Every data row is a reading, or dropped with exactly one flag that has
/// no instant (unreadable or ambiguous time, malformed row, no sensor id).
fn accounted(r: &FileRead) -> bool {
    let dropped = r.flags.iter().filter(|f| f.time.is_none()).count();
    r.rows_read == r.rows.len() + dropped
}

#[test]
fn unmutated_bases_read_every_row_without_a_flag() {
    for (f, text) in bases() {
        let r = read_bytes(&f, Path::new("K1.csv"), 0, text.as_bytes()).unwrap();
        assert_eq!((r.rows_read, r.rows.len(), r.flags.len()), (30, 30, 0), "{:?}\n{text}", r.flags);
    }
}

#[test]
fn mutated_table_exports_never_panic_and_account_for_every_row() {
    let bases = bases();
    let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(20261204);
    let (mut ok, mut err, mut flagged) = (0, 0, 0);
    for case in 0..3000 {
        let (f, base) = &bases[case % bases.len()];
        let mut b = base.clone().into_bytes();
        for _ in 0..rng.random_range(1..5) {
            mutate(&mut rng, &mut b, f.delimiter);
        }
        match read_bytes(f, Path::new("dir/K1.csv"), 0, &b) {
            Ok(r) => {
                ok += 1;
                flagged += usize::from(!r.flags.is_empty());
                assert!(
                    accounted(&r),
                    "case {case}: {} rows read, {} kept, {:?}",
                    r.rows_read,
                    r.rows.len(),
                    r.flags
                );
                assert!(r.flags.iter().all(|x| x.line >= 1), "case {case}: a flag without a line");
            }
            Err(e) => {
                err += 1;
                assert!(e.to_string().contains("K1.csv"), "case {case}: {e}");
            }
        }
    }
    assert!(ok > 1500 && flagged > 500 && err > 10, "{ok} read ({flagged} with flags), {err} errors");
}

/// A workbook's bytes cut short or with bytes overwritten (a half-copied or
/// damaged file): an error naming the file, or a read that accounts for its
/// rows; never a panic inside the spreadsheet reader.
#[test]
fn damaged_workbooks_never_panic() {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/workbooks/bench_a.xlsx");
    let good = std::fs::read(&src).unwrap();
    let mut f = block(
        (b',', false),
        ("Time", None),
        "%Y-%m-%d %H:%M:%S",
        chrono_tz::UTC,
        SensorSource::FileStem,
        2,
        [Some(("Temp (°C)", "degC")), Some(("RH (%)", "percent")), None],
    );
    f.sheet = Some("Readings".into());
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("A7.xlsx");
    std::fs::write(&path, &good).unwrap();
    let r = read_file(&f, &path, 0).unwrap();
    assert_eq!(r.rows_read, 288);
    let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(41);
    let mut errors = 0;
    for case in 0..60 {
        let mut b = good.clone();
        if case % 2 == 0 {
            b.truncate(rng.random_range(0..b.len()));
        } else {
            for _ in 0..rng.random_range(1..20) {
                let at = rng.random_range(0..b.len());
                b[at] = rng.random();
            }
        }
        std::fs::write(&path, &b).unwrap();
        match read_file(&f, &path, 0) {
            Ok(r) => assert!(accounted(&r), "case {case}"),
            Err(e) => {
                errors += 1;
                assert!(e.to_string().contains("A7.xlsx"), "case {case}: {e}");
            }
        }
    }
    assert!(errors > 20, "{errors} of 60 damaged workbooks refused");
}
