//! `potclim ingest` through the binary, on small messy exports written by the
//! tests: °F with decimal commas and semicolons behind a preamble, local time
//! across spring-forward and fall-back in Europe/Amsterdam and
//! America/Toronto (expected instants from the IANA tz database through
//! chrono-tz, and a few by hand), a stuck channel, a spike, a duplicate row,
//! unreadable cells; and every bad-input case of the issue.

use chrono::{NaiveDateTime, TimeZone};
use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::process::Command;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_potclim"))
}

fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::create_dir_all(p.parent().unwrap()).unwrap();
    std::fs::write(&p, text).unwrap();
    p
}

fn run(args: &[&str]) -> (i32, String, String) {
    let o = bin().args(args).output().unwrap();
    (
        o.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&o.stdout).into_owned(),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

const POTS: &str = "pot,x,y,genotype\np1,0,0,A\np2,1,0,B\n";

fn study_text(sensors: &str, logs: &str, extra: &str) -> String {
    format!(
        "[study]\ntitle = \"t\"\ntimezone = \"Europe/Amsterdam\"\noutput = \"out\"\n\n[pots]\nfile = \"pots.csv\"\nid = \"pot\"\nx = \"x\"\ny = \"y\"\n\n[sensors]\nfile = \"sensors.csv\"\nid = \"id\"\nx = \"x\"\ny = \"y\"\n{sensors}\n{logs}\n{extra}"
    )
}

/// Local wall-clock text → UTC ms in `tz`, the earlier instant if ambiguous.
fn utc_in(tz: chrono_tz::Tz, local: &str, later: bool) -> i64 {
    let n = NaiveDateTime::parse_from_str(local, "%Y-%m-%d %H:%M").unwrap();
    match tz.from_local_datetime(&n) {
        chrono::LocalResult::Single(t) => t.timestamp_millis(),
        chrono::LocalResult::Ambiguous(a, b) => if later { b } else { a }.timestamp_millis(),
        chrono::LocalResult::None => panic!("{local} does not exist in {tz}"),
    }
}

fn csv_rows(path: &Path) -> Vec<HashMap<String, String>> {
    let mut r = csv::Reader::from_path(path).unwrap();
    let h: Vec<String> = r.headers().unwrap().iter().map(str::to_string).collect();
    r.records().map(|rec| h.iter().cloned().zip(rec.unwrap().iter().map(str::to_string)).collect()).collect()
}

struct Messy {
    dir: tempfile::TempDir,
    /// (sensor, expected UTC ms) of every row that must survive as a reading.
    expected: Vec<(String, i64)>,
}

/// A multi-format set:
/// * logs/house_*.csv: comma, decimal point, °C, RH fraction, PPFD; sensor
///   column; Europe/Amsterdam local time across 2026-03-29 (spring forward,
///   02:00→03:00) and 2026-10-25 (fall back, 02:00–02:59 twice); 20-min steps.
///   G1 has a spike and a duplicate row, G2 a stuck RH channel (5 h).
/// * handheld/T7.txt: three preamble lines, semicolons, decimal commas, °F,
///   lux (HPS); sensor id from the file name; America/Toronto across
///   2026-03-08 and 2026-11-01, with a row inside the spring gap and an
///   unreadable number and an unreadable time.
fn messy() -> Messy {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write(d, "pots.csv", POTS);
    write(d, "sensors.csv", "id,x,y\nG1,0,0\nG2,1,0\nT7,0.5,1\n");
    let ams = chrono_tz::Europe::Amsterdam;
    let tor = chrono_tz::America::Toronto;
    let mut expected = Vec::new();

    // Amsterdam local clock times, as a logger writing local time produces them.
    let mut ams_times: Vec<(String, i64)> = Vec::new();
    for (day, hours) in [("2026-03-29", 0..6), ("2026-10-25", 0..10)] {
        for h in hours {
            for m in [0, 20, 40] {
                let local = format!("{day} {h:02}:{m:02}");
                if day == "2026-03-29" && h == 2 {
                    continue; // the skipped hour: the logger's clock never shows it
                }
                if day == "2026-10-25" && h == 2 {
                    ams_times.push((local.clone(), utc_in(ams, &local, false)));
                    continue;
                }
                if day == "2026-10-25" && h == 3 && m == 0 {
                    // second pass of 02:00–02:40 before 03:00
                    for mm in [0, 20, 40] {
                        let l2 = format!("{day} 02:{mm:02}");
                        ams_times.push((l2.clone(), utc_in(ams, &l2, true)));
                    }
                }
                ams_times.push((local.clone(), utc_in(ams, &local, false)));
            }
        }
    }
    let mut g = String::from("Logger,Timestamp,Temp,RH,PAR\n");
    for (i, (local, utc)) in ams_times.iter().enumerate() {
        let fi = i as f64;
        let temp = if i == 10 { 39.0 } else { 18.0 + 0.1 * (fi * 0.7).sin() };
        g.push_str(&format!(
            "G1,{local}:00,{temp:.3},{:.3},{:.1}\n",
            0.6 + 0.01 * (fi * 0.3).sin(),
            100.0 + fi
        ));
        expected.push(("G1".to_string(), *utc));
        if i == 20 {
            g.push_str(&format!("G1,{local}:00,{temp:.3},0.6,{:.1}\n", 100.0 + fi)); // duplicate row
        }
    }
    for (i, (local, utc)) in ams_times.iter().enumerate() {
        let fi = i as f64;
        let rh = if (30..46).contains(&i) { 0.55 } else { 0.6 + 0.02 * (fi * 0.5).cos() };
        g.push_str(&format!("G2,{local}:00,{:.3},{rh},{:.1}\n", 17.0 + 0.2 * (fi * 0.4).cos(), 90.0 + fi));
        expected.push(("G2".to_string(), *utc));
    }
    write(d, "logs/house_a.csv", &g);

    // Toronto handheld: °F, decimal comma, preamble, lux.
    let mut t = String::from("Model X-200 data export\nSerial;0042\nUnits;F;lux\nDate/Time;T (F);Lux\n");
    for (day, hours) in [("2026-03-08", 0..5), ("2026-11-01", 0..4)] {
        for h in hours {
            for m in [0, 30] {
                let local = format!("{day} {h:02}:{m:02}");
                let (y, mo, dd) = (&day[0..4], &day[5..7], &day[8..10]);
                let text = format!("{dd}.{mo}.{y} {h:02}:{m:02}");
                if day == "2026-03-08" && h == 2 {
                    if m == 30 {
                        t.push_str(&format!("{text};64,4;1000\n")); // inside the gap: flagged
                    }
                    continue;
                }
                if day == "2026-11-01" && h == 1 {
                    // 01:00–01:59 twice: EDT then EST
                    t.push_str(&format!("{text};64,4;1000\n"));
                    expected.push(("T7".into(), utc_in(tor, &local, false)));
                    continue;
                }
                if day == "2026-11-01" && h == 2 && m == 0 {
                    for mm in [0, 30] {
                        let l2 = format!("{day} 01:{mm:02}");
                        t.push_str(&format!("{dd}.{mo}.{y} 01:{mm:02};64,4;1000\n"));
                        expected.push(("T7".into(), utc_in(tor, &l2, true)));
                    }
                }
                let f = 60.0 + f64::from(h) + f64::from(m) / 60.0;
                let lux = 2000 + 10 * h + m;
                t.push_str(&format!("{text};{};{lux}\n", format!("{f:.2}").replace('.', ",")));
                expected.push(("T7".into(), utc_in(tor, &local, false)));
            }
        }
    }
    t.push_str("01.11.2026 04:00;sixty;2000\n"); // unreadable number: row kept, value null
    expected.push(("T7".into(), utc_in(tor, "2026-11-01 04:00", false)));
    t.push_str("01.11.2026 4h30;61,0;2000\n"); // unreadable time: row dropped
    write(d, "handheld/T7.txt", &t);

    let logs = r#"
[[logs]]
files = ["logs/house_*.csv"]
time = "Timestamp"
time_format = "%Y-%m-%d %H:%M:%S"
sensor = "Logger"
[logs.columns]
temperature = { column = "Temp", unit = "degC" }
humidity = { column = "RH", unit = "fraction" }
light = { column = "PAR", unit = "umol_m2_s" }

[[logs]]
files = ["handheld/*.txt"]
delimiter = ";"
decimal = ","
time = "Date/Time"
time_format = "%d.%m.%Y %H:%M"
timezone = "America/Toronto"
sensor_from = "file_stem"
skip_lines = 3
[logs.columns]
temperature = { column = "T (F)", unit = "degF" }
light = { column = "Lux", unit = "lux_hps" }
"#;
    write(d, "study.toml", &study_text("", logs, ""));
    Messy { dir, expected }
}

#[test]
fn messy_multi_format_set_gives_one_clean_utc_table() {
    let m = messy();
    let d = m.dir.path();
    let study = d.join("study.toml");
    let (code, out, err) = run(&["ingest", study.to_str().unwrap()]);
    assert_eq!(code, 0, "{out}\n{err}");
    let out_dir = d.join("out");
    for f in ["readings.parquet", "qc_flags.csv", "qc_summary.csv", "gaps.csv"] {
        assert!(out_dir.join(f).exists(), "{f}");
    }
    let df = potclim::io::ingest::read_readings(&out_dir.join("readings.parquet")).unwrap();
    let sensors: Vec<String> =
        df.column("sensor").unwrap().str().unwrap().iter().map(|s| s.unwrap().to_string()).collect();
    let times: Vec<i64> =
        df.column("time").unwrap().to_physical_repr().i64().unwrap().into_no_null_iter().collect();
    let mut want = m.expected.clone();
    want.sort();
    let got: Vec<(String, i64)> = sensors.into_iter().zip(times).collect();
    assert_eq!(
        got, want,
        "every surviving row, at the instant the IANA rules give, sorted by sensor and time"
    );

    // Hand-checked instants: Amsterdam 2026-10-25 02:20 second pass is CET
    // (UTC+1) = 01:20Z; Toronto 2026-11-01 01:30 second pass is EST (UTC−5) = 06:30Z.
    let hand = |s: &str| chrono::DateTime::parse_from_rfc3339(s).unwrap().timestamp_millis();
    assert!(got.contains(&("G1".into(), hand("2026-10-25T01:20:00Z"))));
    assert!(got.contains(&("G1".into(), hand("2026-10-25T00:20:00Z"))));
    assert!(got.contains(&("T7".into(), hand("2026-11-01T06:30:00Z"))));
    assert!(got.contains(&("T7".into(), hand("2026-11-01T05:30:00Z"))));

    // °F with decimal comma: 61,50 °F at Toronto 2026-03-08 01:30 → (61.5−32)·5/9 °C.
    let t_c = df.column("temperature_c").unwrap().f64().unwrap();
    let i = got
        .iter()
        .position(|g| *g == ("T7".into(), utc_in(chrono_tz::America::Toronto, "2026-03-08 01:30", false)))
        .unwrap();
    approx::assert_abs_diff_eq!(t_c.get(i).unwrap(), (61.5 - 32.0) * 5.0 / 9.0, epsilon = 1e-9);
    // lux (HPS) × 0.0122 (Thimijan & Heins 1983): 2040 lux at 01:30.
    let ppfd = df.column("ppfd_umol_m2_s").unwrap().f64().unwrap();
    approx::assert_abs_diff_eq!(ppfd.get(i).unwrap(), 2040.0 * 0.0122, epsilon = 1e-9);
    // The handheld has no humidity channel: null.
    assert!(df.column("rh_pct").unwrap().f64().unwrap().get(i).is_none());

    let flags = csv_rows(&out_dir.join("qc_flags.csv"));
    let has = |reason: &str, file: &str, variable: &str| {
        flags.iter().any(|f| f["reason"] == reason && f["file"] == file && f["variable"] == variable)
    };
    assert!(has("spike", "logs/house_a.csv", "temperature_c"), "{flags:?}");
    assert!(has("duplicate", "logs/house_a.csv", "row"));
    assert!(has("stuck", "logs/house_a.csv", "rh_pct"));
    assert!(has("nonexistent_time", "handheld/T7.txt", "time"));
    assert!(has("unparsable_value", "handheld/T7.txt", "temperature_c"));
    assert!(has("unparsable_time", "handheld/T7.txt", "time"));
    // The spike is G1's 11th data row (line 12) and reads 39.
    let spike = flags.iter().find(|f| f["reason"] == "spike").unwrap();
    assert_eq!(
        (spike["line"].as_str(), spike["sensor"].as_str(), spike["value"].as_str()),
        ("12", "G1", "39")
    );
    // The nonexistent time is the fifth data row under a header on line 4:
    // line 9 of the handheld file (preamble counted).
    let gap_row = flags.iter().find(|f| f["reason"] == "nonexistent_time").unwrap();
    assert_eq!(gap_row["line"], "9");
    assert_eq!(gap_row["value"], "08.03.2026 02:30");
    // Stuck: 16 readings of 0.55 (5 h at 20 min) while temperature moves.
    assert_eq!(flags.iter().filter(|f| f["reason"] == "stuck").count(), 16);

    // Accounting identity per file, and rows_read equals the data rows written.
    let summary = csv_rows(&out_dir.join("qc_summary.csv"));
    assert_eq!(summary.len(), 2);
    let num = |r: &HashMap<String, String>, k: &str| r[k].parse::<usize>().unwrap();
    for r in &summary {
        assert_eq!(num(r, "rows_read"), num(r, "rows_kept") + num(r, "rows_flagged"), "{r:?}");
    }
    let house = summary.iter().find(|r| r["file"] == "logs/house_a.csv").unwrap();
    let house_lines = std::fs::read_to_string(d.join("logs/house_a.csv")).unwrap().lines().count() - 1;
    assert_eq!(num(house, "rows_read"), house_lines);
    let hand_rows = summary.iter().find(|r| r["file"] == "handheld/T7.txt").unwrap();
    let hand_lines = std::fs::read_to_string(d.join("handheld/T7.txt")).unwrap().lines().count() - 4;
    assert_eq!(num(hand_rows, "rows_read"), hand_lines);
    assert_eq!(num(hand_rows, "nonexistent_time"), 1);
    assert_eq!(num(house, "duplicate"), 1);
    // Every dropped row is listed: readings = rows read − rows dropped whole.
    let dropped = flags
        .iter()
        .filter(|f| {
            [
                "duplicate",
                "nonexistent_time",
                "unparsable_time",
                "ambiguous_time",
                "outside_period",
                "unknown_sensor",
                "malformed_row",
            ]
            .contains(&f["reason"].as_str())
        })
        .count();
    assert_eq!(df.height(), house_lines + hand_lines - dropped);

    // Gaps: Amsterdam night of 2026-03-29 to 2026-10-25 is one long gap per channel.
    let gaps = csv_rows(&out_dir.join("gaps.csv"));
    assert!(gaps.iter().any(|g| g["sensor"] == "G1" && g["variable"] == "temperature_c"));
    assert!(!gaps.iter().any(|g| g["sensor"] == "T7" && g["variable"] == "rh_pct"));
    // No staging folder left behind.
    assert!(
        std::fs::read_dir(&out_dir).unwrap().all(|e| !e
            .unwrap()
            .file_name()
            .to_string_lossy()
            .starts_with('.'))
    );
}

#[test]
fn study_period_flags_readings_outside_it() {
    let m = messy();
    let d = m.dir.path();
    let text = std::fs::read_to_string(d.join("study.toml")).unwrap();
    std::fs::write(
        d.join("study.toml"),
        format!(
            "{text}\n[climate]\nstart = \"2026-10-01 00:00\"\nend = \"2026-12-01 00:00\"\nstep = \"10min\"\n"
        ),
    )
    .unwrap();
    let (code, out, err) = run(&["ingest", d.join("study.toml").to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    let flags = csv_rows(&d.join("out/qc_flags.csv"));
    let outside = flags.iter().filter(|f| f["reason"] == "outside_period").count();
    // March rows: Amsterdam 2026-03-29 00:00–05:40 without 02:xx = 15 per sensor; Toronto 03-08: 8.
    assert_eq!(outside, 15 * 2 + 8);
    let df = potclim::io::ingest::read_readings(&d.join("out/readings.parquet")).unwrap();
    let start = utc_in(chrono_tz::Europe::Amsterdam, "2026-10-01 00:00", false);
    assert!(
        df.column("time").unwrap().to_physical_repr().i64().unwrap().into_no_null_iter().all(|t| t >= start)
    );
}

fn simple_set(log_block: &str, file: &str, content: &str) -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write(d, "pots.csv", POTS);
    write(d, "sensors.csv", "id,x,y\nA,0,0\n");
    if !file.is_empty() {
        write(d, file, content);
    }
    write(d, "study.toml", &study_text("", log_block, ""));
    dir
}

const BLOCK: &str = "[[logs]]\nfiles = [\"logs/*.csv\"]\ntime = \"time\"\ntime_format = \"%Y-%m-%d %H:%M\"\nsensor = \"id\"\n[logs.columns]\ntemperature = { column = \"temp\", unit = \"degC\" }\n";

fn ingest_err(dir: &tempfile::TempDir) -> String {
    let (code, out, err) = run(&["ingest", dir.path().join("study.toml").to_str().unwrap()]);
    assert_eq!(code, 1, "{out}{err}");
    assert!(!dir.path().join("out/readings.parquet").exists(), "no partial output");
    err
}

#[test]
fn unknown_sensors_stop_the_run_with_a_list_unless_dropped() {
    let dir = simple_set(
        BLOCK,
        "logs/a.csv",
        "id,time,temp\nA,2026-03-01 00:00,20\nZ9,2026-03-01 00:00,20\nQ1,2026-03-01 00:10,20\n",
    );
    let err = ingest_err(&dir);
    assert!(
        err.contains("`Z9` (first at logs/a.csv:3)") && err.contains("`Q1` (first at logs/a.csv:4)"),
        "{err}"
    );
    assert!(err.contains("drop_unknown_sensors"), "{err}");
    let (code, out, err) =
        run(&["ingest", "--drop-unknown-sensors", dir.path().join("study.toml").to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    let flags = csv_rows(&dir.path().join("out/qc_flags.csv"));
    assert_eq!(flags.iter().filter(|f| f["reason"] == "unknown_sensor").count(), 2);
    let summary = csv_rows(&dir.path().join("out/qc_summary.csv"));
    assert_eq!(
        (
            summary[0]["rows_read"].as_str(),
            summary[0]["rows_kept"].as_str(),
            summary[0]["rows_flagged"].as_str()
        ),
        ("3", "1", "2")
    );
}

#[test]
fn missing_column_suggests_the_closest_name() {
    let dir = simple_set(BLOCK, "logs/a.csv", "id,time,tmp\nA,2026-03-01 00:00,20\n");
    let err = ingest_err(&dir);
    assert!(
        err.contains("logs/a.csv:1")
            && err.contains("no column `temp`")
            && err.contains("did you mean `tmp`"),
        "{err}"
    );
}

#[test]
fn time_pattern_failing_on_most_rows_shows_value_and_pattern() {
    let dir = simple_set(
        BLOCK,
        "logs/a.csv",
        "id,time,temp\nA,03/01/2026 00:00,20\nA,03/01/2026 00:10,20\nA,2026-03-01 00:20,20\n",
    );
    let err = ingest_err(&dir);
    assert!(
        err.contains("logs/a.csv:2")
            && err.contains("`time`")
            && err.contains("03/01/2026 00:00")
            && err.contains("%Y-%m-%d %H:%M"),
        "{err}"
    );
}

#[test]
fn unknown_unit_names_study_line_and_column() {
    let dir =
        simple_set(&BLOCK.replace("degC", "celsius"), "logs/a.csv", "id,time,temp\nA,2026-03-01 00:00,20\n");
    let err = ingest_err(&dir);
    let text = std::fs::read_to_string(dir.path().join("study.toml")).unwrap();
    let line = text.lines().position(|l| l.contains("celsius")).unwrap() + 1;
    assert!(
        err.contains(&format!("study.toml:{line}:"))
            && err.contains("unknown unit `celsius`")
            && err.contains("degC"),
        "{err}"
    );
}

#[test]
fn empty_file_and_glob_matching_nothing() {
    let dir = simple_set(BLOCK, "logs/a.csv", "");
    let err = ingest_err(&dir);
    assert!(err.contains("logs/a.csv") && err.contains("no data rows"), "{err}");
    let dir = simple_set(BLOCK, "", "");
    let err = ingest_err(&dir);
    assert!(err.contains("logs[1].files") && err.contains("matches no file"), "{err}");
}

#[test]
fn toml_error_and_unknown_key_have_line_and_column() {
    let dir = simple_set(BLOCK, "logs/a.csv", "id,time,temp\nA,2026-03-01 00:00,20\n");
    let p = dir.path().join("study.toml");
    let text = std::fs::read_to_string(&p).unwrap();
    std::fs::write(&p, text.replace("sensor = \"id\"", "sensr = \"id\"")).unwrap();
    let err = ingest_err(&dir);
    let line = std::fs::read_to_string(&p).unwrap().lines().position(|l| l.starts_with("sensr")).unwrap() + 1;
    assert!(err.contains(&format!("study.toml:{line}:1")) && err.contains("sensr"), "{err}");
    std::fs::write(&p, text.replace("title = \"t\"", "title = \"t")).unwrap();
    let err = ingest_err(&dir);
    assert!(err.contains("study.toml:2:"), "{err}");
    std::fs::write(&p, format!("{text}\n[qc]\nstuck_hour = 2\n")).unwrap();
    let err = ingest_err(&dir);
    assert!(err.contains("stuck_hour") && err.contains("study.toml:"), "{err}");
}

#[test]
fn help_teaches_outputs_and_reasons() {
    let (code, out, _) = run(&["ingest", "--help"]);
    assert_eq!(code, 0);
    for w in [
        "readings.parquet",
        "qc_flags.csv",
        "rows_read = rows_kept + rows_flagged",
        "gaps.csv",
        "stuck",
        "--drop-unknown-sensors",
    ] {
        assert!(out.contains(w), "{w}: {out}");
    }
}
