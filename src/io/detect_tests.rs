//! Tests of [`super`]: delimiters, decimal marks and preambles, the day order left
//! undecided until a day exceeds 12, units offered as choices, unrecognised and
//! damaged exports, and the paths written into the blocks.

use super::time::twin;
use super::*;

fn guess(text: &str) -> FileGuess {
    let lines = lines_of(text);
    detect_lines(Path::new("logs/t7.csv"), &lines, &[]).unwrap()
}

fn key<'a>(g: &'a FileGuess, k: &str) -> Option<&'a Entry> {
    g.keys.iter().chain(&g.columns).find(|e| e.key == k)
}

#[test]
fn semicolons_decimal_commas_and_a_preamble() {
    let mut t = String::from("Logger: bench 3\nSerial: 4471\n\nDate/Time;T [°C];RH [%]\n");
    for i in 0..40 {
        t.push_str(&format!(
            "{:02}.03.2026 {:02}:{:02};{},{};{},5\n",
            1 + i / 24,
            i % 24,
            0,
            18 + i % 5,
            i % 10,
            60 + i % 9
        ));
    }
    let g = guess(&t);
    assert_eq!(key(&g, "delimiter").unwrap().value.as_deref(), Some("\";\""));
    assert_eq!(key(&g, "decimal").unwrap().value.as_deref(), Some("\",\""));
    assert_eq!(key(&g, "skip_lines").unwrap().value.as_deref(), Some("3"));
    assert_eq!(key(&g, "time").unwrap().value.as_deref(), Some("\"Date/Time\""));
    // Days 1 and 2 only: day-first or month-first cannot be told.
    let tf = key(&g, "time_format").unwrap();
    assert!(
        tf.value.is_none() && tf.choices == ["\"%d.%m.%Y %H:%M\"", "\"%m.%d.%Y %H:%M\""]
            || tf.value.as_deref() == Some("\"%d.%m.%Y %H:%M\""),
        "{tf:?}"
    );
    assert!(key(&g, "temperature").unwrap().value.as_deref().unwrap().contains("degC"));
    assert!(key(&g, "humidity").unwrap().value.as_deref().unwrap().contains("percent"));
    assert_eq!(key(&g, "sensor_from").unwrap().value.as_deref(), Some("\"file_stem\""));
    assert!(key(&g, "timezone").unwrap().value.is_none(), "no zone anywhere is undecided");
}

#[test]
fn day_order_undecided_until_a_day_exceeds_12() {
    let rows = |days: std::ops::Range<u32>| {
        let mut t = String::from("time,temp_c\n");
        for d in days {
            t.push_str(&format!("{d:02}/04/2026 10:00,21.5\n"));
        }
        t
    };
    let g = guess(&rows(1..12));
    let tf = key(&g, "time_format").unwrap();
    assert!(tf.value.is_none(), "{tf:?}");
    assert_eq!(tf.choices, ["\"%d/%m/%Y %H:%M\"", "\"%m/%d/%Y %H:%M\""]);
    assert!(g.undecided.iter().any(|u| u.contains("day-first")));
    let g = guess(&rows(5..20));
    assert_eq!(key(&g, "time_format").unwrap().value.as_deref(), Some("\"%d/%m/%Y %H:%M\""));
}

#[test]
fn unit_without_header_word_and_ambiguous_range_is_a_choice() {
    let mut t = String::from("stamp,ch1,ch2\n");
    for i in 0..30 {
        t.push_str(&format!("2026-05-01 {:02}:00:00,{}.5,{}\n", i % 24, 40 + i % 7, 20 + i % 3));
    }
    let g = guess(&t);
    let ch: Vec<&Entry> = g.columns.iter().filter(|e| e.choices.iter().any(|c| c.contains("ch1"))).collect();
    assert!(ch.len() >= 2 && ch.iter().all(|e| e.value.is_none()), "{:?}", g.columns);
    assert!(g.undecided.iter().any(|u| u.contains("ch1")));
}

#[test]
fn text_without_rows_is_unrecognised_with_the_lines_read() {
    let e = detect_lines(
        Path::new("notes.txt"),
        &lines_of("Some notes\nabout the greenhouse\nno data here\n"),
        &[],
    )
    .unwrap_err()
    .to_string();
    assert!(e.contains("notes.txt") && e.contains("line 1: Some notes") && e.contains("no delimiter"), "{e}");
}

/// Seeded mutations of exports of several formats (truncated lines,
/// stray quotes, byte-order marks, lone carriage returns, emptied
/// cells, non-UTF-8 bytes, blank rows): detection never panics; it
/// gives a block or an error that names the file and shows the lines
/// read.
#[test]
fn mutated_exports_give_a_guess_or_a_located_error() {
    use rand::{RngExt, SeedableRng};
    let mut bases: Vec<String> = Vec::new();
    let mut a = String::from("timestamp;logger;T [°C];RH [%]\n");
    let mut b = String::from("\"Title\"\n\"#\",\"Date Time, GMT+02:00\",\"Temp, °C (S/N: 9)\"\n");
    let mut c = String::from(
        "\"F\",\"st1\"\n\"TIMESTAMP\",\"RECORD\",\"AirT_Avg\"\n\"TS\",\"RN\",\"Deg C\"\n\"\",\"\",\"Avg\"\n",
    );
    let mut d = String::from("Date\tTime\tt_air\tlux\n");
    for i in 0..40 {
        a.push_str(&format!(
            "2026-05-{:02} 10:{:02};L{};{},5;{}\n",
            1 + i / 6,
            i % 6 * 10,
            i % 2,
            15 + i % 4,
            60 + i % 9
        ));
        b.push_str(&format!(
            "{},06/{:02}/26 0{}:{:02}:00 AM,{}.5\n",
            i + 1,
            10 + i / 8,
            1 + i % 8,
            i % 4 * 15,
            20 + i % 5
        ));
        c.push_str(&format!("\"2026-05-01 {:02}:{:02}:00\",{i},{}.5\n", i / 6, i % 6 * 10, 15 + i % 4));
        d.push_str(&format!("{:02}/07/2026\t{:02}:00\t{}.1\t{}\n", 1 + i / 24, i % 24, 20 + i % 3, i * 100));
    }
    bases.extend([a, b, c, d]);
    let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(1717);
    let (mut ok, mut err) = (0, 0);
    for case in 0..2000 {
        let mut bytes = bases[case % bases.len()].clone().into_bytes();
        for _ in 0..rng.random_range(1..6) {
            let at = rng.random_range(0..=bytes.len());
            match rng.random_range(0..7) {
                0 => bytes.truncate(at),
                1 => bytes.insert(at, b'"'),
                2 => bytes.splice(0..0, *b"\xEF\xBB\xBF").for_each(drop),
                3 => bytes.insert(at, b'\r'),
                4 => bytes.insert(at, 0xB0),
                5 => {
                    let end = (at + rng.random_range(0..8)).min(bytes.len());
                    bytes.drain(at..end);
                }
                _ => bytes.splice(at..at, *b"\r\n,,\n").for_each(drop),
            }
        }
        let lines = lines_of(&decode(&bytes));
        match detect_lines(Path::new("m.csv"), &lines, &[]) {
            Ok(g) => {
                ok += 1;
                assert!(g.keys.iter().any(|e| e.key == "time" || e.key == "layout"), "case {case}: {g:?}");
            }
            Err(e) => {
                err += 1;
                let m = e.to_string();
                assert!(m.contains("m.csv") && m.contains("line 1:"), "case {case}: {m}");
            }
        }
    }
    assert!(ok > 1000 && err > 10, "{ok} guessed, {err} errors");
}

#[test]
fn twins_swap_day_and_month() {
    assert_eq!(twin("%d/%m/%Y").as_deref(), Some("%m/%d/%Y"));
    assert_eq!(twin("%m-%d-%y").as_deref(), Some("%d-%m-%y"));
    assert_eq!(twin("%Y-%m-%d"), None);
}

#[test]
fn relative_paths_climb_when_needed() {
    assert_eq!(relative(Path::new("/a/b/logs/x.csv"), Path::new("/a/b")), "logs/x.csv");
    assert_eq!(relative(Path::new("/a/logs/x.csv"), Path::new("/a/b")), "../logs/x.csv");
}
