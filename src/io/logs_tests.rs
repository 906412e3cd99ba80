//! Tests of [`super`]: delimiters, decimal marks, units and preambles, bad cells
//! and misconfigured columns, the fall-back hour, and the two splitters agreeing
//! on the same content.

use super::*;

fn fmt(
    delim: u8,
    comma: bool,
    pattern: &str,
    tz: chrono_tz::Tz,
    sensor: SensorSource,
    skip: usize,
) -> LogFormat {
    LogFormat {
        block: 1,
        delimiter: delim,
        decimal_comma: comma,
        time_column: "time".into(),
        clock_column: None,
        time_format: TimeFormat::compile(pattern).unwrap(),
        zone: LogZone::Iana(tz),
        zone_given: true,
        sensor,
        skip_lines: skip,
        after_header: 0,
        layout: None,
        sheet: None,
        channels: [
            Some(("temp".into(), Conversion::of(Channel::Temperature, "degF").unwrap())),
            Some(("rh".into(), Conversion::of(Channel::Humidity, "percent").unwrap())),
            None,
        ],
        files: vec![],
    }
}

fn utc(s: &str) -> i64 {
    chrono::NaiveDateTime::parse_from_str(s, "%Y-%m-%d %H:%M").unwrap().and_utc().timestamp_millis()
}

#[test]
fn semicolons_decimal_commas_fahrenheit_and_preamble() {
    let f = fmt(b';', true, "%d.%m.%Y %H:%M", chrono_tz::UTC, SensorSource::FileStem, 2);
    let text =
        "Logger export v2\nSerial: 123\ntime;temp;rh\n01.03.2026 00:00;68,0;55,5\n\n01.03.2026 00:05;50;NA\n";
    let r = read_bytes(&f, Path::new("dir/S01.csv"), 0, text.as_bytes()).unwrap();
    assert_eq!(r.sensors, vec!["S01"]);
    assert_eq!(r.rows_read, 2);
    assert_eq!(r.rows[0].line, 4);
    assert_eq!(r.rows[1].line, 6);
    approx::assert_abs_diff_eq!(r.rows[0].values[0], 20.0, epsilon = 1e-12);
    approx::assert_abs_diff_eq!(r.rows[0].values[1], 55.5, epsilon = 1e-12);
    approx::assert_abs_diff_eq!(r.rows[1].values[0], 10.0, epsilon = 1e-12);
    assert!(r.rows[1].values[1].is_nan());
    assert_eq!(r.rows[1].time, utc("2026-03-01 00:05"));
}

#[test]
fn offsets_in_header_cells() {
    assert_eq!(header_offset("Date Time, GMT+01:00"), Some(("Date Time", 3600)));
    assert_eq!(header_offset("Time (UTC-05:00)"), Some(("Time", -18000)));
    assert_eq!(header_offset("Time (UTC)"), Some(("Time", 0)));
    assert_eq!(header_offset("Timestamp"), None);
    assert_eq!(header_offset("GMT offset note"), None);
}

#[test]
fn single_bad_cells_are_flagged_with_line() {
    let f = fmt(b',', false, "%Y-%m-%d %H:%M", chrono_tz::UTC, SensorSource::Column("id".into()), 0);
    let text = "id,time,temp,rh\nA,2026-03-01 00:00,60,50\nA,2026-03-01 00:05,6O,50\nA,yesterday,60,50\nA,2026-03-01 00:15,61\n,2026-03-01 00:20,60,50\nB,2026-03-01 00:20,60,50\n";
    let r = read_bytes(&f, Path::new("x.csv"), 3, text.as_bytes()).unwrap();
    assert_eq!(r.rows_read, 6);
    let got: Vec<(u32, Reason, &str)> =
        r.flags.iter().map(|f| (f.line, f.reason, f.variable.name())).collect();
    assert_eq!(
        got,
        vec![
            (3, Reason::UnparsableValue, "temperature_c"),
            (4, Reason::UnparsableTime, "time"),
            (5, Reason::MalformedRow, "row"),
            (6, Reason::MalformedRow, "sensor"),
        ]
    );
    assert_eq!(r.flags[0].value, "6O");
    assert_eq!(r.sensors, vec!["A", "B"]);
    assert_eq!(r.rows.len(), 3);
    assert!(r.rows[1].flagged && r.rows[1].values[0].is_nan() && r.rows[1].values[1] == 50.0);
}

#[test]
fn pattern_failing_on_most_rows_is_an_error_with_value_and_pattern() {
    let f = fmt(b',', false, "%Y-%m-%d %H:%M", chrono_tz::UTC, SensorSource::FileStem, 0);
    let text = "time,temp,rh\n01/03/2026 00:00,60,50\n01/03/2026 00:05,60,50\n";
    let e = read_bytes(&f, Path::new("x.csv"), 0, text.as_bytes()).unwrap_err().to_string();
    assert!(e.contains("x.csv:2") && e.contains("01/03/2026 00:00") && e.contains("%Y-%m-%d %H:%M"), "{e}");
}

#[test]
fn decimal_comma_mismatch_and_missing_column_and_wrong_delimiter() {
    let f = fmt(b';', false, "%Y-%m-%d %H:%M", chrono_tz::UTC, SensorSource::FileStem, 0);
    let text = "time;temp;rh\n2026-03-01 00:00;60,5;50,1\n";
    let e = read_bytes(&f, Path::new("x.csv"), 0, text.as_bytes()).unwrap_err().to_string();
    assert!(e.contains("x.csv:2") && e.contains("60,5") && e.contains("decimal"), "{e}");
    let e = read_bytes(&f, Path::new("x.csv"), 0, b"time;tmp;rh\n2026-03-01 00:00;1;2\n")
        .unwrap_err()
        .to_string();
    assert!(e.contains("x.csv:1") && e.contains("did you mean `tmp`"), "{e}");
    let e = read_bytes(&f, Path::new("x.csv"), 0, b"time,temp,rh\n2026-03-01 00:00,1,2\n")
        .unwrap_err()
        .to_string();
    assert!(e.contains("delimiter"), "{e}");
    assert!(matches!(read_bytes(&f, Path::new("x.csv"), 0, b""), Err(IoError::Empty { .. })));
    assert!(matches!(read_bytes(&f, Path::new("x.csv"), 0, b"time;temp;rh\n"), Err(IoError::Empty { .. })));
}

#[test]
fn latin1_header_and_bom_are_decoded() {
    let mut f = fmt(b';', false, "%Y-%m-%d %H:%M", chrono_tz::UTC, SensorSource::FileStem, 0);
    f.channels[0] = Some(("Temp (°C)".into(), Conversion::of(Channel::Temperature, "degC").unwrap()));
    // A UTF-8 byte-order mark before a header whose degree sign is Latin-1:
    // each cell is decoded on its own.
    let text = b"\xEF\xBB\xBFtime;Temp (\xB0C);rh\n2026-03-01 00:00;21.5;50\n";
    let r = read_bytes(&f, Path::new("x.csv"), 0, text).unwrap();
    assert_eq!(r.rows[0].values[0], 21.5);
    let text = "time;Temp (°C);rh\n2026-03-01 00:00;21.5;50\n";
    let r = read_bytes(&f, Path::new("x.csv"), 0, text.as_bytes()).unwrap();
    assert_eq!(r.rows[0].values[0], 21.5);
}

/// Fall-back in Europe/Amsterdam on 2026-10-25: 02:00–02:59 local happens
/// twice (CEST, UTC+2, then CET, UTC+1; IANA tz database via chrono-tz).
/// A 20-minute logger writes 01:40, 02:00, 02:20, 02:40, 02:00, 02:20,
/// 02:40, 03:00; order resolves every row.
#[test]
fn fall_back_hour_resolved_by_order() {
    let f = fmt(b',', false, "%Y-%m-%d %H:%M", chrono_tz::Europe::Amsterdam, SensorSource::FileStem, 0);
    let mut text = String::from("time,temp,rh\n");
    for t in ["01:40", "02:00", "02:20", "02:40", "02:00", "02:20", "02:40", "03:00"] {
        text.push_str(&format!("2026-10-25 {t},60,50\n"));
    }
    let r = read_bytes(&f, Path::new("x.csv"), 0, text.as_bytes()).unwrap();
    assert!(r.flags.is_empty(), "{:?}", r.flags);
    let got: Vec<i64> = r.rows.iter().map(|x| x.time).collect();
    let want: Vec<i64> = ["23:40", "00:00", "00:20", "00:40", "01:00", "01:20", "01:40", "02:00"]
        .iter()
        .enumerate()
        .map(|(i, t)| utc(&format!("2026-10-{} {t}", if i == 0 { 24 } else { 25 })))
        .collect();
    assert_eq!(got, want);
}

#[test]
fn ambiguous_first_row_and_spring_gap_are_flagged() {
    let f = fmt(b',', false, "%Y-%m-%d %H:%M", chrono_tz::America::Toronto, SensorSource::FileStem, 0);
    let text = "time,temp,rh\n2026-11-01 01:30,60,50\n2026-03-08 02:30,60,50\n2026-03-08 03:00,60,50\n";
    let r = read_bytes(&f, Path::new("x.csv"), 0, text.as_bytes()).unwrap();
    let reasons: Vec<Reason> = r.flags.iter().map(|f| f.reason).collect();
    assert_eq!(reasons, vec![Reason::AmbiguousTime, Reason::NonexistentTime]);
    assert_eq!(r.rows.len(), 1);
    assert_eq!(r.rows[0].time, utc("2026-03-08 07:00"));
}

/// Everything a read gives, as text (NaN prints as NaN, so missing values
/// compare equal), or the error message.
fn outcome(r: Result<FileRead>) -> String {
    match r {
        Ok(r) => format!(
            "read {} sensors {:?} first {:?}\nrows {:?}\nflags {:?}",
            r.rows_read, r.sensors, r.first_line, r.rows, r.flags
        ),
        Err(e) => format!("error: {e}"),
    }
}

fn both(f: &LogFormat, name: &str, text: &[u8]) -> (String, String) {
    let p = Path::new(name);
    (
        outcome(read_bytes_with(f, p, 2, text, Splitter::Plain)),
        outcome(read_bytes_with(f, p, 2, text, Splitter::Csv)),
    )
}

/// The plain splitter and the csv crate give the same rows, flags and
/// lines on the same content: CRLF, blank and whitespace-only lines, a
/// preamble, a byte-order mark, a last line without `\n`, a file ending
/// in a partial row, decimal commas with semicolons, bad cells.
#[test]
fn plain_splitter_agrees_with_csv_crate() {
    let comma = fmt(b',', false, "%Y-%m-%d %H:%M", chrono_tz::UTC, SensorSource::Column("id".into()), 0);
    let semi = fmt(b';', true, "%d.%m.%Y %H:%M", chrono_tz::UTC, SensorSource::FileStem, 2);
    let cases: Vec<(&LogFormat, &[u8])> = vec![
            (&comma, b"id,time,temp,rh\r\nA,2026-03-01 00:00,60,50\r\n\r\nA,2026-03-01 00:05,61,51\r\n"),
            (&comma, b"\n\nid,time,temp,rh\n  \n,,,\nA,2026-03-01 00:00,60,50\nA,2026-03-01 00:05,6O,\nB,2026-03-01 00:05"),
            (&comma, b"id,time,temp,rh\nA,2026-03-01 00:00,60,50\nA,2026-03-01 00:05,61,51"),
            (&comma, b"id,time,temp,rh\nA,2026-03-01 00:00,60,50\nA,2026-03-01 00:05,61,"),
            (&comma, b"id,time,temp,rh\nA,2026-03-01 00:00,60,50\nA,2026-03-01 00:05,61,51,\n"),
            (&comma, b"\xEF\xBB\xBFid,time,temp,rh\nA , 2026-03-01 00:00 , 60 ,NA\n"),
            (&comma, b"\xEF\xBB\xBF\nid,time,temp,rh\nA,2026-03-01 00:00,60,50\n"),
            (&comma, b"id,time,temp,rh\n"),
            (&comma, b""),
            (&comma, b"id;time;temp;rh\nA;2026-03-01 00:00;60;50\n"),
            (&comma, b"id,time,tmp,rh\nA,2026-03-01 00:00,60,50\n"),
            (&comma, b"id,time,temp,rh\nA,01/03/2026,60,50\nA,02/03/2026,60,50\n"),
            (&semi, b"Logger export v2\r\nSerial: 123\r\ntime;temp;rh\r\n01.03.2026 00:00;68,0;55,5\r\n\r\n01.03.2026 00:05;50;NA\r\n01.03.2026 00:10;5,0"),
            (&semi, b"Logger \"v2\"\nSerial\ntime;temp;rh\n01.03.2026 00:00;68,0;55,5\n"),
            (&semi, b"only one line"),
            (&semi, b"a\nb\ntime;Temp (\xB0C);rh\n01.03.2026 00:00;68,0;55,5\n"),
        ];
    for (f, text) in cases {
        let (plain, csv) = both(f, "dir/S01.csv", text);
        assert_eq!(plain, csv, "{}", String::from_utf8_lossy(text));
    }
}

/// The fall-back hour is resolved the same way by both splitters.
#[test]
fn plain_splitter_agrees_on_the_fall_back_hour() {
    let f = fmt(
        b',',
        false,
        "%Y-%m-%d %H:%M",
        chrono_tz::Europe::Amsterdam,
        SensorSource::Column("id".into()),
        0,
    );
    let mut text = String::from("id,time,temp,rh\r\n");
    for (id, t) in [
        ("A", "01:40"),
        ("A", "02:00"),
        ("B", "02:20"),
        ("A", "02:40"),
        ("A", "02:00"),
        ("B", "03:00"),
        ("A", "03:00"),
    ] {
        text.push_str(&format!("{id},2026-10-25 {t},60,50\r\n"));
    }
    let (plain, csv) = both(&f, "x.csv", text.as_bytes());
    assert_eq!(plain, csv);
    assert!(plain.contains("AmbiguousTime"), "{plain}");
}

/// A quoted export reads like the same content without quotes: same rows,
/// flags and lines (the quoted one goes through the csv crate).
#[test]
fn quoted_and_unquoted_exports_read_alike() {
    let f = fmt(b';', true, "%d.%m.%Y %H:%M", chrono_tz::UTC, SensorSource::Column("id".into()), 1);
    let plain = "Export\nid;time;temp;rh\nS1;01.03.2026 00:00;68,0;55,5\n\nS1;01.03.2026 00:05;x;50\nS2;01.03.2026 00:05;50\n";
    let quoted = "Export \"A\"\n\"id\";\"time\";\"temp\";\"rh\"\n\"S1\";\"01.03.2026 00:00\";\"68,0\";\"55,5\"\n\n\"S1\";\"01.03.2026 00:05\";\"x\";50\n\"S2\";01.03.2026 00:05;\"50\"\n";
    assert!(plain_text(plain.as_bytes()) && !plain_text(&quoted.as_bytes()[12..]));
    let p = Path::new("x.csv");
    let a = outcome(read_bytes(&f, p, 0, plain.as_bytes()));
    let b = outcome(read_bytes(&f, p, 0, quoted.as_bytes()));
    assert_eq!(a, b);
    assert!(a.contains("UnparsableValue") && a.contains("MalformedRow"), "{a}");
    // A lone carriage return is a line end for the csv crate: such text
    // is not plain, and goes to the csv crate.
    assert!(!plain_text(b"a,b\rc,d\n") && plain_text(b"a,b\r\nc,d\n"));
}

/// Generated messy exports (seeded): both splitters agree on every one.
#[test]
fn plain_splitter_agrees_with_csv_crate_on_generated_files() {
    use rand::{RngExt, SeedableRng};
    let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(20261025);
    let times = [
        "2026-10-25 01:40",
        "2026-10-25 02:00",
        "2026-10-25 02:20",
        "2026-10-25 02:40",
        "2026-10-25 03:00",
        "2026-03-29 02:30",
        "2026-03-29 03:00",
    ];
    let cells =
        ["21.5", "-3", "1e2", "", "NA", " 7.25 ", "x", "0.000001", "+4", ".5", "5.", "123456789012345678"];
    let ids = ["A", "B", " A", "", "Ä"];
    let mut read_ok = 0;
    for case in 0..300 {
        let delim = [b',', b';', b'\t'][rng.random_range(0..3)];
        let comma = delim != b',' && rng.random_bool(0.5);
        let skip = rng.random_range(0..3);
        let by_column = rng.random_bool(0.7);
        let sensor = if by_column { SensorSource::Column("id".into()) } else { SensorSource::FileStem };
        let f = fmt(delim, comma, "%Y-%m-%d %H:%M", chrono_tz::Europe::Amsterdam, sensor, skip);
        let d = delim as char;
        let eol = |rng: &mut rand_chacha::ChaCha20Rng| if rng.random_bool(0.3) { "\r\n" } else { "\n" };
        let mut text = String::new();
        for i in 0..skip {
            text.push_str(&format!("preamble {i}{}", eol(&mut rng)));
        }
        if rng.random_bool(0.2) {
            text.push_str(eol(&mut rng));
        }
        text.push_str(&format!("id{d}time{d}temp{d}rh{}", eol(&mut rng)));
        let n = rng.random_range(0..40);
        for _ in 0..n {
            match rng.random_range(0..20) {
                0 => text.push_str(eol(&mut rng)),
                1 => text.push_str(&format!("  {}", eol(&mut rng))),
                2 => text.push_str(&format!("{d}{d}{d}{}", eol(&mut rng))),
                _ => {
                    let mut fields = vec![
                        ids[rng.random_range(0..ids.len())].to_string(),
                        times[rng.random_range(0..times.len())].to_string(),
                    ];
                    for _ in 0..2 {
                        let mut c = cells[rng.random_range(0..cells.len())].to_string();
                        if comma {
                            c = c.replace('.', ",");
                        }
                        fields.push(c);
                    }
                    let keep = match rng.random_range(0..12) {
                        0 => rng.random_range(1..4),
                        1 => 5,
                        _ => 4,
                    };
                    fields.resize(keep, "9".into());
                    text.push_str(&fields.join(&d.to_string()));
                    text.push_str(eol(&mut rng));
                }
            }
        }
        if rng.random_bool(0.3) {
            // A last line without its line end, possibly cut short.
            let row = format!("A{d}2026-10-25 03:20{d}1");
            text.push_str(&row[..rng.random_range(0..row.len())]);
        }
        assert!(plain_text(text.as_bytes()), "case {case}");
        let (plain, csv) = both(&f, "dir/S9.csv", text.as_bytes());
        assert_eq!(plain, csv, "case {case}:\n{text}");
        read_ok += usize::from(!plain.starts_with("error"));
    }
    // Most cases read (a few stop on a column that fails on most rows).
    assert!(read_ok > 200, "{read_ok} of 300 generated files read");
}

/// The fast path of `parse_number` gives the bits of Rust's own
/// correctly rounded `str::parse::<f64>` (the general-purpose parser).
#[test]
fn number_fast_path_matches_std_parse() {
    use rand::{RngExt, SeedableRng};
    let reference = |s: &str, comma: bool| -> Option<f64> {
        let s = if comma { s.replace(',', ".") } else { s.to_string() };
        s.parse::<f64>().ok().filter(|x| x.is_finite())
    };
    let bits = |x: Option<f64>| x.map(f64::to_bits);
    let fixed = [
        "0",
        "-0",
        "+5",
        ".5",
        "5.",
        "-.5",
        "-5.",
        ".",
        "-",
        "+",
        "",
        "1e3",
        "0001.5000",
        "1.2.3",
        "1,5",
        "-0.0",
        "999999999999999",
        "9999999999999999",
        "0.000000000000001",
        "12345678901234.5",
        "123456789012345.6",
        "inf",
        "NaN",
        "0x10",
        "1 5",
        "1_0",
        "٣",
    ];
    for s in fixed {
        for comma in [false, true] {
            assert_eq!(bits(parse_number(s.as_bytes(), comma)), bits(reference(s, comma)), "{s:?} {comma}");
        }
    }
    let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(7);
    for _ in 0..200_000 {
        let int_digits = rng.random_range(0..10);
        let frac_digits = rng.random_range(0..10);
        let mut s = String::new();
        match rng.random_range(0..4) {
            0 => s.push('-'),
            1 => s.push('+'),
            _ => {}
        }
        for _ in 0..int_digits {
            s.push(char::from(b'0' + rng.random_range(0..10u8)));
        }
        let comma = rng.random_bool(0.3);
        if frac_digits > 0 || rng.random_bool(0.1) {
            s.push(if comma { ',' } else { '.' });
        }
        for _ in 0..frac_digits {
            s.push(char::from(b'0' + rng.random_range(0..10u8)));
        }
        assert_eq!(bits(parse_number(s.as_bytes(), comma)), bits(reference(&s, comma)), "{s:?}");
    }
}
