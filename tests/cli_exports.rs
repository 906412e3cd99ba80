//! Logger exports as they come, through the binary: rows whose trailing
//! columns are left empty by the logger, files whose rows mostly fail (a
//! warning in `check` with cause and fix), separate date and time columns,
//! 12-hour clocks, offsets written in the time column's header.

use std::path::{Path, PathBuf};
use std::process::Command;

fn run(args: &[&str]) -> (i32, String, String) {
    let o = Command::new(env!("CARGO_BIN_EXE_potclim")).args(args).output().unwrap();
    (
        o.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&o.stdout).into_owned(),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

fn write(dir: &Path, name: &str, text: &[u8]) -> PathBuf {
    let p = dir.join(name);
    std::fs::create_dir_all(p.parent().unwrap()).unwrap();
    std::fs::write(&p, text).unwrap();
    p
}

/// A study with two pots, the sensors `ids` and one `[[logs]]` block.
fn study(dir: &Path, ids: &[&str], zone: &str, block: &str) -> PathBuf {
    write(dir, "pots.csv", b"pot,x,y,genotype,height\np1,0,0,A,10.5\np2,1,0,B,11.0\n");
    let mut sensors = String::from("id,x,y\n");
    for (i, id) in ids.iter().enumerate() {
        sensors.push_str(&format!("{id},{i},0\n"));
    }
    write(dir, "sensors.csv", sensors.as_bytes());
    let text = format!(
        "[study]\ntitle = \"t\"\ntimezone = \"{zone}\"\noutput = \"out\"\n\n[pots]\nfile = \"pots.csv\"\nid = \"pot\"\nx = \"x\"\ny = \"y\"\n\n[sensors]\nfile = \"sensors.csv\"\nid = \"id\"\nx = \"x\"\ny = \"y\"\n\n[[indicator]]\nname = \"mean_t\"\nvariable = \"temperature\"\nstatistic = \"mean\"\n\n[model]\ntrait = \"height\"\n\n{block}"
    );
    write(dir, "study.toml", text.as_bytes())
}

/// Every reading of `readings.parquet`: (sensor, UTC ms, temperature °C).
fn readings(dir: &Path) -> Vec<(String, i64, Option<f64>)> {
    let df = potclim::io::ingest::read_readings(&dir.join("out/readings.parquet")).unwrap();
    let s = df.column("sensor").unwrap().str().unwrap().clone();
    let t = df.column("time").unwrap().to_physical_repr().i64().unwrap().clone();
    let c = df.column("temperature_c").unwrap().f64().unwrap().clone();
    (0..df.height()).map(|i| (s.get(i).unwrap().to_string(), t.get(i).unwrap(), c.get(i))).collect()
}

/// A USB logger export: 960 ten-minute readings, the serial number written
/// in the first data row only (the later rows end after the humidity cell).
fn usb_export() -> String {
    let mut t = String::from("No.,Time,Temperature(°C),Humidity(%RH),Serial No.\n");
    for i in 0..960 {
        let (d, m) = (1 + i / 144, i % 144 * 10);
        let stamp = format!("2026-04-{d:02} {:02}:{:02}:00", m / 60, m % 60);
        let temp = 18.0 + (i % 50) as f64 * 0.1;
        t.push_str(&format!("{},{stamp},{temp:.1},{:.1}", i + 1, 55.0 + (i % 7) as f64));
        if i == 0 {
            t.push_str(",SN70021");
        }
        t.push('\n');
    }
    t
}

const USB_BLOCK: &str = "[[logs]]\nfiles = [\"logs/*.csv\"]\ntime = \"Time\"\ntime_format = \"%Y-%m-%d %H:%M:%S\"\ntimezone = \"UTC\"\nsensor_from = \"file_stem\"\n[logs.columns]\ntemperature = { column = \"Temperature(°C)\", unit = \"degC\" }\nhumidity = { column = \"Humidity(%RH)\", unit = \"percent\" }\n";

#[test]
fn rows_without_the_unused_trailing_serial_cell_are_all_kept() {
    let d = tempfile::tempdir().unwrap();
    let st = study(d.path(), &["bench3"], "Europe/Amsterdam", USB_BLOCK);
    write(d.path(), "logs/bench3.csv", usb_export().as_bytes());
    let (code, out, err) = run(&["check", st.to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("960 rows") && !out.contains("would be flagged"), "{out}");
    assert!(out.contains("ok: every input is readable"), "{out}");
    let (code, out, err) = run(&["ingest", st.to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("960 rows read: 960 kept as is, 0 with flags"), "{out}");
    let r = readings(d.path());
    assert_eq!(r.len(), 960);
    // Line 961 of the file (the last reading, i = 959): day 1 + 959 div 144 = 7,
    // minute 10 · (959 mod 144) = 950 = 15:50 UTC; 18 + 0.1 · (959 mod 50) = 18.9 °C.
    let last = chrono::DateTime::parse_from_rfc3339("2026-04-07T15:50:00Z").unwrap().timestamp_millis();
    assert_eq!(r[959].1, last);
    approx::assert_abs_diff_eq!(r[959].2.unwrap(), 18.9, epsilon = 1e-12);
}

#[test]
fn a_row_lacking_a_used_cell_is_still_malformed_and_named() {
    let d = tempfile::tempdir().unwrap();
    let st = study(d.path(), &["bench3"], "UTC", USB_BLOCK);
    let text = "No.,Time,Temperature(°C),Humidity(%RH),Serial No.\n1,2026-04-01 00:00:00,20.5,50,SN1\n2,2026-04-01 00:10:00,20.6\n3,2026-04-01 00:20:00,20.7,51\n4,2026-04-01 00:30:00,20.8,51,,\n";
    write(d.path(), "logs/bench3.csv", text.as_bytes());
    let (code, out, err) = run(&["ingest", st.to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("4 rows read: 3 kept as is, 1 with flags"), "{out}");
    let flags = std::fs::read_to_string(d.path().join("out/qc_flags.csv")).unwrap();
    assert!(
        flags.contains("malformed_row") && flags.contains("no cell for column `Humidity(%RH)`"),
        "{flags}"
    );
}

#[test]
fn check_warns_with_cause_and_fix_when_most_rows_fail() {
    let d = tempfile::tempdir().unwrap();
    let st = study(d.path(), &["bench3"], "UTC", USB_BLOCK);
    // Semicolons inside the rows but commas in the header: every row is one
    // field short of the humidity column.
    let mut text = String::from("No.,Time,Temperature(°C),Humidity(%RH),Serial No.\n");
    for i in 0..400 {
        text.push_str(&format!("{},2026-04-01 {:02}:{:02}:00,20.5;50\n", i + 1, i / 60 % 24, i % 60));
    }
    write(d.path(), "logs/bench3.csv", text.as_bytes());
    let (code, out, err) = run(&["check", st.to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(!out.contains("ok: every input is readable"), "{out}");
    assert!(out.contains("warning: 400 of 400 sampled rows of logs/bench3.csv would be flagged"), "{out}");
    assert!(
        out.contains("cause: 400 row(s) do not split into the header's columns (first at logs/bench3.csv:2"),
        "{out}"
    );
    assert!(out.contains("fix: check `delimiter`"), "{out}");
}

/// `n` readings every `step` minutes from the UTC instant `start`, as the
/// wall clock of `tz` shows them (IANA rules through chrono-tz), with their
/// UTC milliseconds: what a logger keeping local time writes.
fn local_series(tz: chrono_tz::Tz, start: &str, n: usize, step: i64) -> Vec<(chrono::NaiveDateTime, i64)> {
    let t0 = chrono::DateTime::parse_from_rfc3339(start).unwrap().timestamp_millis();
    (0..n as i64)
        .map(|i| {
            let ms = t0 + i * step * 60_000;
            let utc = chrono::DateTime::from_timestamp_millis(ms).unwrap();
            (utc.with_timezone(&tz).naive_local(), ms)
        })
        .collect()
}

fn ingest_ok(st: &Path) -> String {
    let (code, out, err) = run(&["ingest", st.to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    out
}

/// Separate date and time columns, a 12-hour clock, month-first dates, in
/// America/Chicago across both 2026 changes (spring forward 03-08 02:00 →
/// 03:00; fall back 11-01 02:00 → 01:00, so 01:00–01:59 shows twice).
#[test]
fn date_and_time_columns_with_a_12_hour_clock_across_northern_changes() {
    let d = tempfile::tempdir().unwrap();
    let tz = chrono_tz::America::Chicago;
    let block = "[[logs]]\nfiles = [\"logs/*.csv\"]\ntime = [\"Date\", \"Time\"]\ntime_format = \"%m/%d/%Y %I:%M:%S %p\"\ntimezone = \"America/Chicago\"\nsensor_from = \"file_stem\"\n[logs.columns]\ntemperature = { column = \"Temp (F)\", unit = \"degF\" }\n";
    let st = study(d.path(), &["north1"], "Europe/Amsterdam", block);
    let mut series = local_series(tz, "2026-03-08T05:00:00Z", 16, 30);
    series.extend(local_series(tz, "2026-11-01T04:30:00Z", 16, 30));
    let mut text = String::from("Date,Time,Temp (F)\n");
    for (i, (local, _)) in series.iter().enumerate() {
        text.push_str(&format!("{},{},{}\n", local.format("%m/%d/%Y"), local.format("%I:%M:%S %p"), 50 + i));
    }
    assert!(text.contains("11/01/2026,01:30:00 AM") && text.contains("03/08/2026,03:00:00 AM"), "{text}");
    write(d.path(), "logs/north1.csv", text.as_bytes());
    let out = ingest_ok(&st);
    assert!(out.contains("32 rows read: 32 kept as is, 0 with flags"), "{out}");
    let r = readings(d.path());
    let got: Vec<i64> = r.iter().map(|x| x.1).collect();
    let want: Vec<i64> = series.iter().map(|x| x.1).collect();
    assert_eq!(got, want);
    // 50 °F = 10 °C (the first row).
    approx::assert_abs_diff_eq!(r[0].2.unwrap(), 10.0, epsilon = 1e-12);
}

/// Day-first dates in a date column and a 24-hour time column, in
/// Australia/Sydney across both 2026 changes of the southern hemisphere
/// (daylight saving ends 04-05 03:00 → 02:00, begins 10-04 02:00 → 03:00).
#[test]
fn day_first_date_and_time_columns_across_southern_changes() {
    let d = tempfile::tempdir().unwrap();
    let tz = chrono_tz::Australia::Sydney;
    let block = "[[logs]]\nfiles = [\"logs/*.txt\"]\ndelimiter = \";\"\ndecimal = \",\"\ntime = [\"Datum\", \"Zeit\"]\ntime_format = \"%d.%m.%Y %H:%M\"\ntimezone = \"Australia/Sydney\"\nsensor = \"Fühler\"\n[logs.columns]\ntemperature = { column = \"T\", unit = \"degC\" }\n";
    let st = study(d.path(), &["S1"], "UTC", block);
    let mut series = local_series(tz, "2026-04-04T14:00:00Z", 12, 20);
    series.extend(local_series(tz, "2026-10-03T14:40:00Z", 12, 20));
    let mut text = String::from("Fühler;Datum;Zeit;T\n");
    for (i, (local, _)) in series.iter().enumerate() {
        text.push_str(&format!("S1;{};{};{},5\n", local.format("%d.%m.%Y"), local.format("%H:%M"), 20 + i));
    }
    assert!(text.contains("05.04.2026;02:20") && text.contains("04.10.2026;03:00"), "{text}");
    write(d.path(), "logs/room.txt", text.as_bytes());
    let out = ingest_ok(&st);
    assert!(out.contains("24 rows read: 24 kept as is, 0 with flags"), "{out}");
    let r = readings(d.path());
    assert_eq!(r.iter().map(|x| x.1).collect::<Vec<_>>(), series.iter().map(|x| x.1).collect::<Vec<_>>());
    approx::assert_abs_diff_eq!(r[3].2.unwrap(), 23.5, epsilon = 1e-12);
}

/// A titled, quoted export whose time column's header names the offset
/// (`Date Time, GMT+01:00`): the header's offset holds all year, so the
/// study zone's spring-forward gap does not apply; `in_header` without an
/// offset in the header is an error naming the header.
#[test]
fn offset_in_the_time_header_is_the_zone() {
    let d = tempfile::tempdir().unwrap();
    let block = "[[logs]]\nfiles = [\"logs/*.csv\"]\nskip_lines = 1\ntime = \"Date Time\"\ntime_format = \"%m/%d/%y %I:%M:%S %p\"\nsensor_from = \"file_stem\"\n[logs.columns]\ntemperature = { column = \"Temp, °C (S/N: 20871)\", unit = \"degC\" }\n";
    let st = study(d.path(), &["roof"], "Europe/Amsterdam", block);
    let mut text =
        String::from("\"Export of roof\"\n\"#\",\"Date Time, GMT+01:00\",\"Temp, °C (S/N: 20871)\"\n");
    let mut want = Vec::new();
    let t0 = chrono::NaiveDateTime::parse_from_str("2026-03-29 01:00", "%Y-%m-%d %H:%M").unwrap();
    for i in 0..8 {
        let local = t0 + chrono::Duration::minutes(30 * i);
        text.push_str(&format!("{},{},{}.25\n", i + 1, local.format("%m/%d/%y %I:%M:%S %p"), 10 + i));
        want.push(local.and_utc().timestamp_millis() - 3_600_000);
    }
    write(d.path(), "logs/roof.csv", text.as_bytes());
    let out = ingest_ok(&st);
    assert!(out.contains("8 rows read: 8 kept as is, 0 with flags"), "{out}");
    let r = readings(d.path());
    assert_eq!(r.iter().map(|x| x.1).collect::<Vec<_>>(), want);
    // A fixed offset given by the block overrides the header's.
    std::fs::write(
        &st,
        std::fs::read_to_string(&st)
            .unwrap()
            .replace("skip_lines = 1\n", "skip_lines = 1\ntimezone = \"UTC-05:00\"\n"),
    )
    .unwrap();
    ingest_ok(&st);
    let r = readings(d.path());
    assert_eq!(r[0].1, want[0] + 6 * 3_600_000);
    // `in_header` with no offset in the header.
    std::fs::write(d.path().join("logs/roof.csv"), text.replace(", GMT+01:00", "")).unwrap();
    std::fs::write(&st, std::fs::read_to_string(&st).unwrap().replace("UTC-05:00", "in_header")).unwrap();
    let (code, _, err) = run(&["ingest", st.to_str().unwrap()]);
    assert_eq!(code, 1);
    assert!(err.contains("logs/roof.csv") && err.contains("line 2") && err.contains("`Date Time`"), "{err}");
}

/// Readings from a study whose only block is `block`, on the files `files`.
fn ingest_files(
    block: &str,
    ids: &[&str],
    files: &[(&str, &str)],
) -> (Vec<(String, i64, Option<f64>)>, String) {
    let d = tempfile::tempdir().unwrap();
    let st = study(d.path(), ids, "UTC", block);
    for (name, text) in files {
        write(d.path(), name, text.as_bytes());
    }
    let out = ingest_ok(&st);
    (readings(d.path()), out)
}

fn ms(s: &str) -> i64 {
    chrono::NaiveDateTime::parse_from_str(s, "%Y-%m-%d %H:%M:%S").unwrap().and_utc().timestamp_millis()
}

/// The four-header-line datalogger table: a station line, field names,
/// units (`TS`, `RN`, `Deg C`, `%`), processing codes; quoted. A block of
/// three lines reads it: the station name is the sensor id, the channels
/// come from names and units (battery voltage is not a channel).
#[test]
fn four_line_header_layout_in_three_lines() {
    let mut text = String::from(
        "\"FMT4\",\"glasshouse2\",\"logger-x\",\"1234\",\"os 1\",\"prog.x\",\"5678\",\"ten_min\"\n\"TIMESTAMP\",\"RECORD\",\"BattV_Min\",\"AirT_Avg\",\"RH\",\"PAR_Avg\"\n\"TS\",\"RN\",\"Volts\",\"Deg C\",\"%\",\"umol/s/m^2\"\n\"\",\"\",\"Min\",\"Avg\",\"Smp\",\"Avg\"\n",
    );
    let mut want = Vec::new();
    for i in 0..30 {
        let t = format!("2026-05-01 {:02}:{:02}:00", i / 6, i % 6 * 10);
        text.push_str(&format!("\"{t}\",{i},12.6,{}.5,{},{}\n", 15 + i % 4, 60 + i % 9, i * 3));
        want.push(("glasshouse2".to_string(), ms(&t), Some(15.5 + (i % 4) as f64)));
    }
    let block = "[[logs]]\nfiles = [\"logs/*.dat\"]\nlayout = \"four-line-header\"\n";
    let (got, out) = ingest_files(block, &["glasshouse2"], &[("logs/gh2_table.dat", &text)]);
    assert!(out.contains("30 rows read: 30 kept as is"), "{out}");
    assert_eq!(got, want);
}

/// A titled export with a row-number column, the offset in the time
/// column's header and unit and serial number in the channel headers: the
/// three-line block reads the same readings as the hand-written one.
#[test]
fn titled_layout_reads_like_the_hand_written_block() {
    let mut text = String::from(
        "\"Export of bench 4\"\n\"#\",\"Date Time, GMT+02:00\",\"Temp, °C (S/N: 990112)\",\"RH, % (S/N: 990112)\",\"Coupler Attached (S/N: 990112)\"\n",
    );
    for i in 0..40 {
        let h = i / 4;
        let (h12, ampm) = (if h % 12 == 0 { 12 } else { h % 12 }, if h < 12 { "AM" } else { "PM" });
        text.push_str(&format!(
            "{},06/14/26 {h12:02}:{:02}:00 {ampm},{}.{},{}\n",
            i + 1,
            i % 4 * 15,
            20 + i % 5,
            i % 10,
            50 + i
        ));
    }
    text.push_str("41,06/14/26 10:00:00 AM,,,Logged\n");
    let layout = "[[logs]]\nfiles = [\"logs/*.csv\"]\nlayout = \"titled-with-offset\"\n";
    let hand = "[[logs]]\nfiles = [\"logs/*.csv\"]\nskip_lines = 1\ntime = \"Date Time, GMT+02:00\"\ntime_format = \"%m/%d/%y %I:%M:%S %p\"\ntimezone = \"UTC+02:00\"\nsensor_from = \"file_stem\"\n[logs.columns]\ntemperature = { column = \"Temp, °C (S/N: 990112)\", unit = \"degC\" }\nhumidity = { column = \"RH, % (S/N: 990112)\", unit = \"percent\" }\n";
    let files = [("logs/990112.csv", text.as_str())];
    let (a, out) = ingest_files(layout, &["990112"], &files);
    let (b, _) = ingest_files(hand, &["990112"], &files);
    assert!(out.contains("41 rows read: 41 kept as is"), "{out}");
    assert_eq!(a.len(), 41);
    assert_eq!(a, b);
    // 06/14/26 12:00:00 AM at UTC+02:00 is 2026-06-13 22:00 UTC.
    assert_eq!(a[0].1, ms("2026-06-13 22:00:00"));
}

/// A USB logger export with the sensor name in the first header cell and
/// the serial number in the first row only: the three-line block takes the
/// name as the sensor id and keeps every row.
#[test]
fn name_in_first_cell_layout_reads_like_the_hand_written_block() {
    let mut text = String::from("attic-07,Time,Celsius(°C),Humidity(%rh),Dew Point(°C),Serial Number\n");
    for i in 0..50 {
        text.push_str(&format!(
            "{},2026-07-02 {:02}:{:02}:00,{}.0,{}.5,11.0",
            i + 1,
            i / 4,
            i % 4 * 15,
            24 + i % 3,
            40 + i % 7
        ));
        if i == 0 {
            text.push_str(",SN0091");
        }
        text.push('\n');
    }
    let layout = "[[logs]]\nfiles = [\"logs/*.csv\"]\nlayout = \"name-in-first-cell\"\n";
    let hand = "[[logs]]\nfiles = [\"logs/*.csv\"]\ntime = \"Time\"\ntime_format = \"%Y-%m-%d %H:%M:%S\"\nsensor_from = \"file_stem\"\n[logs.columns]\ntemperature = { column = \"Celsius(°C)\", unit = \"degC\" }\nhumidity = { column = \"Humidity(%rh)\", unit = \"percent\" }\n";
    let (a, out) = ingest_files(layout, &["attic-07"], &[("logs/export.csv", &text)]);
    let (b, _) = ingest_files(hand, &["attic-07"], &[("logs/attic-07.csv", &text)]);
    assert!(out.contains("50 rows read: 50 kept as is"), "{out}");
    assert_eq!(a, b);
    assert_eq!(a[0], ("attic-07".to_string(), ms("2026-07-02 00:00:00"), Some(24.0)));
}

/// A file that does not fit its layout: the message shows the lines read
/// and says what was not recognised.
#[test]
fn a_file_that_fits_no_layout_shows_the_lines_read() {
    let d = tempfile::tempdir().unwrap();
    let st = study(
        d.path(),
        &["x"],
        "UTC",
        "[[logs]]\nfiles = [\"logs/*.csv\"]\nlayout = \"name-in-first-cell\"\n",
    );
    write(d.path(), "logs/x.csv", b"x,Stamp,Value\n1,2026-07-02 00:00:00,3\n");
    let (code, _, err) = run(&["ingest", st.to_str().unwrap()]);
    assert_eq!(code, 1);
    assert!(
        err.contains("logs/x.csv")
            && err.contains("name-in-first-cell")
            && err.contains("no time column `Time`")
            && err.contains("line 1: x | Stamp | Value"),
        "{err}"
    );
    write(d.path(), "logs/x.csv", b"x,Time,Value\n1,2026-07-02 00:00:00,3\n");
    let (code, _, err) = run(&["ingest", st.to_str().unwrap()]);
    assert_eq!(code, 1);
    assert!(
        err.contains("no temperature, humidity or light column recognised") && err.contains("x, Time, Value"),
        "{err}"
    );
}

/// Two files of one block with different headers: the message names both.
#[test]
fn two_files_of_one_block_with_different_headers_are_both_named() {
    let d = tempfile::tempdir().unwrap();
    let st = study(d.path(), &["a", "b"], "UTC", USB_BLOCK);
    let good = "No.,Time,Temperature(°C),Humidity(%RH)\n1,2026-04-01 00:00:00,20.5,50\n";
    write(d.path(), "logs/a.csv", good.as_bytes());
    write(d.path(), "logs/b.csv", good.replace("Temperature(°C)", "Temperature(°F)").as_bytes());
    let (code, _, err) = run(&["ingest", st.to_str().unwrap()]);
    assert_eq!(code, 1);
    assert!(
        err.contains("logs/b.csv")
            && err.contains("logs/a.csv")
            && err.contains("no column `Temperature(°C)`")
            && err.contains("different headers"),
        "{err}"
    );
}
