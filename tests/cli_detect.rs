//! Detection through the binary on a corpus of exports written here
//! (invented greenhouse scenarios, one per layout or variant): `potclim init
//! DIR --logs ...` writes the blocks, and the study built from them ingests
//! to exactly the readings of a hand-written block on the same files. What
//! detection cannot decide is a commented choice that the test then makes,
//! as a user would.

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

fn write(dir: &Path, name: &str, bytes: &[u8]) -> PathBuf {
    let p = dir.join(name);
    std::fs::create_dir_all(p.parent().unwrap()).unwrap();
    std::fs::write(&p, bytes).unwrap();
    p
}

/// A study with the sensors `ids` and the given `[[logs]]` text.
fn study(dir: &Path, name: &str, ids: &[String], logs: &str) -> PathBuf {
    write(dir, "pots.csv", b"pot,x,y\np1,0,0\np2,1,0\n");
    let mut s = String::from("id,x,y\n");
    for (i, id) in ids.iter().enumerate() {
        s.push_str(&format!("{id},{i},0\n"));
    }
    write(dir, "sensors.csv", s.as_bytes());
    let text = format!(
        "[study]\ntitle = \"t\"\ntimezone = \"Europe/Amsterdam\"\noutput = \"out_{name}\"\n\n[pots]\nfile = \"pots.csv\"\nid = \"pot\"\nx = \"x\"\ny = \"y\"\n\n[sensors]\nfile = \"sensors.csv\"\nid = \"id\"\nx = \"x\"\ny = \"y\"\n\n{logs}"
    );
    write(dir, &format!("{name}.toml"), text.as_bytes())
}

type Reading = (String, i64, Option<f64>, Option<f64>, Option<f64>);

/// Every reading of `readings.parquet`: sensor, UTC ms, °C, % RH, PPFD.
fn readings(path: &Path) -> Vec<Reading> {
    let df = potclim::io::ingest::read_readings(path).unwrap();
    let s = df.column("sensor").unwrap().str().unwrap().clone();
    let t = df.column("time").unwrap().to_physical_repr().i64().unwrap().clone();
    let f = |c: &str| df.column(c).unwrap().f64().unwrap().clone();
    let (a, b, c) = (f("temperature_c"), f("rh_pct"), f("ppfd_umol_m2_s"));
    (0..df.height())
        .map(|i| (s.get(i).unwrap().to_string(), t.get(i).unwrap(), a.get(i), b.get(i), c.get(i)))
        .collect()
}

/// One export scenario of the corpus.
struct Case {
    name: &'static str,
    /// Files under `logs/<name>/`: (file name, bytes).
    files: Vec<(String, Vec<u8>)>,
    /// The hand-written block (`files` relative to the study folder).
    hand: String,
    /// Sensor ids.
    ids: Vec<String>,
    /// Data rows over all files.
    rows: usize,
    /// Text the detected blocks must contain.
    expect: Vec<&'static str>,
    /// Choices to make in the detected text: (commented line, chosen line).
    choose: Vec<(&'static str, &'static str)>,
    /// Number of blocks detected.
    blocks: usize,
}

fn ampm(h: usize) -> (usize, &'static str) {
    (if h.is_multiple_of(12) { 12 } else { h % 12 }, if h < 12 { "AM" } else { "PM" })
}

/// Ten-minute steps from a start day: (day of month, hour, minute).
fn steps(n: usize, first_day: usize) -> impl Iterator<Item = (usize, usize, usize, usize)> {
    (0..n).map(move |i| {
        let m = i * 10;
        (i, first_day + m / 1440, m % 1440 / 60, m % 60)
    })
}

fn corpus() -> Vec<Case> {
    let mut cases = Vec::new();
    let n = 300; // ten-minute rows per file: a little over two days.
    // 1. Plain CSV, ISO stamps, an id column, two files of one format.
    {
        let mut files = Vec::new();
        for (f, bench) in [("north.csv", "B1"), ("south.csv", "B2")] {
            let mut t = String::from("timestamp,bench_id,temp_c,rh_pct,par_umol\n");
            for (i, d, h, m) in steps(n, 3) {
                t.push_str(&format!(
                    "2026-03-{d:02} {h:02}:{m:02}:00,{bench},{:.2},{:.1},{}\n",
                    17.0 + (i % 40) as f64 * 0.05,
                    62.0 + (i % 9) as f64,
                    (i * 7) % 900
                ));
            }
            files.push((f.to_string(), t.into_bytes()));
        }
        cases.push(Case {
            name: "plain",
            files,
            hand: "[[logs]]\nfiles = [\"logs/plain/*.csv\"]\ntime = \"timestamp\"\ntime_format = \"%Y-%m-%d %H:%M:%S\"\nsensor = \"bench_id\"\n[logs.columns]\ntemperature = { column = \"temp_c\", unit = \"degC\" }\nhumidity = { column = \"rh_pct\", unit = \"percent\" }\nlight = { column = \"par_umol\", unit = \"umol_m2_s\" }\n".into(),
            ids: vec!["B1".into(), "B2".into()],
            rows: 2 * n,
            expect: vec!["logs/plain/*.csv\"]", "sensor = \"bench_id\"", "unit = \"umol_m2_s\""],
            choose: vec![],
            blocks: 1,
        });
    }
    // 2. Semicolons, decimal commas, a preamble with a blank line, day-first
    //    dates with days above 12, the sensor id from the file name.
    {
        let mut t = String::from("Logger: cold frame 2\nInterval: 10 min\n\nDatum/Zeit;T [°C];RH [%]\n");
        for (i, d, h, m) in steps(n, 14) {
            t.push_str(&format!("{d:02}.04.2026 {h:02}:{m:02};{},{};{},5\n", 8 + i % 6, i % 10, 70 + i % 10));
        }
        cases.push(Case {
            name: "semicolon",
            files: vec![("frame2.txt".into(), t.into_bytes())],
            hand: "[[logs]]\nfiles = [\"logs/semicolon/frame2.txt\"]\ndelimiter = \";\"\ndecimal = \",\"\nskip_lines = 3\ntime = \"Datum/Zeit\"\ntime_format = \"%d.%m.%Y %H:%M\"\nsensor_from = \"file_stem\"\n[logs.columns]\ntemperature = { column = \"T [°C]\", unit = \"degC\" }\nhumidity = { column = \"RH [%]\", unit = \"percent\" }\n".into(),
            ids: vec!["frame2".into()],
            rows: n,
            expect: vec!["delimiter = \";\"", "decimal = \",\"", "skip_lines = 3", "sensor_from = \"file_stem\""],
            choose: vec![],
            blocks: 1,
        });
    }
    // 3. Tab-separated, date and time of day apart, day-first, °F, a probe column.
    {
        let mut t = String::from("Date\tTime\tProbe\tAir °F\tRH %\n");
        for (i, d, h, m) in steps(n, 20) {
            t.push_str(&format!(
                "{d:02}/05/2026\t{h:02}:{m:02}:00\tP-{}\t{:.1}\t{}\n",
                1 + i % 2,
                60.0 + (i % 30) as f64 * 0.1,
                50 + i % 10
            ));
        }
        cases.push(Case {
            name: "tabs",
            files: vec![("probes.tsv".into(), t.into_bytes())],
            hand: "[[logs]]\nfiles = [\"logs/tabs/probes.tsv\"]\ndelimiter = \"tab\"\ntime = [\"Date\", \"Time\"]\ntime_format = \"%d/%m/%Y %H:%M:%S\"\nsensor = \"Probe\"\n[logs.columns]\ntemperature = { column = \"Air °F\", unit = \"degF\" }\nhumidity = { column = \"RH %\", unit = \"percent\" }\n".into(),
            ids: vec!["P-1".into(), "P-2".into()],
            rows: n,
            expect: vec!["delimiter = \"tab\"", "time = [\"Date\", \"Time\"]", "%d/%m/%Y %H:%M:%S", "unit = \"degF\""],
            choose: vec![],
            blocks: 1,
        });
    }
    // 4. A 12-hour clock, month-first dates, the offset in the time header.
    {
        let mut t = String::from("Time (UTC-05:00),Temp (°C),Humidity (%)\n");
        for (i, d, h, m) in steps(n, 11) {
            let (h12, p) = ampm(h);
            t.push_str(&format!(
                "06/{d:02}/2026 {h12:02}:{m:02}:00 {p},{:.1},{}\n",
                24.0 + (i % 11) as f64 * 0.15,
                40 + i % 10
            ));
        }
        cases.push(Case {
            name: "twelve",
            files: vec![("shade-house.csv".into(), t.into_bytes())],
            hand: "[[logs]]\nfiles = [\"logs/twelve/*.csv\"]\ntime = \"Time\"\ntime_format = \"%m/%d/%Y %I:%M:%S %p\"\ntimezone = \"UTC-05:00\"\nsensor_from = \"file_stem\"\n[logs.columns]\ntemperature = { column = \"Temp (°C)\", unit = \"degC\" }\nhumidity = { column = \"Humidity (%)\", unit = \"percent\" }\n".into(),
            ids: vec!["shade-house".into()],
            rows: n,
            expect: vec!["timezone = \"in_header\"", "%m/%d/%Y %I:%M:%S %p"],
            choose: vec![],
            blocks: 1,
        });
    }
    // 5. Four header lines (station, names, units, codes), two stations.
    {
        let mut files = Vec::new();
        for st in ["bay_east", "bay_west"] {
            let mut t = format!(
                "\"FMT4\",\"{st}\",\"ctrl-9\",\"77\",\"os 2\",\"prog.b\",\"1\",\"tbl10\"\n\"TIMESTAMP\",\"RECORD\",\"BattV_Min\",\"AirT_Avg\",\"RH\",\"PAR_Avg\"\n\"TS\",\"RN\",\"Volts\",\"Deg C\",\"%\",\"umol/s/m^2\"\n\"\",\"\",\"Min\",\"Avg\",\"Smp\",\"Avg\"\n"
            );
            for (i, d, h, m) in steps(n, 2) {
                t.push_str(&format!(
                    "\"2026-09-{d:02} {h:02}:{m:02}:00\",{i},12.7,{:.2},{:.1},{}\n",
                    19.0 + (i % 13) as f64 * 0.2,
                    55.5 + (i % 5) as f64,
                    (i * 11) % 1200
                ));
            }
            files.push((format!("{st}.dat"), t.into_bytes()));
        }
        cases.push(Case {
            name: "fourline",
            files,
            hand: "[[logs]]\nfiles = [\"logs/fourline/bay_east.dat\"]\nskip_lines = 1\nlines_after_header = 2\ntime = \"TIMESTAMP\"\ntime_format = \"%Y-%m-%d %H:%M:%S\"\nsensor_from = \"file_stem\"\n[logs.columns]\ntemperature = { column = \"AirT_Avg\", unit = \"degC\" }\nhumidity = { column = \"RH\", unit = \"percent\" }\nlight = { column = \"PAR_Avg\", unit = \"umol_m2_s\" }\n\n[[logs]]\nfiles = [\"logs/fourline/bay_west.dat\"]\nskip_lines = 1\nlines_after_header = 2\ntime = \"TIMESTAMP\"\ntime_format = \"%Y-%m-%d %H:%M:%S\"\nsensor_from = \"file_stem\"\n[logs.columns]\ntemperature = { column = \"AirT_Avg\", unit = \"degC\" }\nhumidity = { column = \"RH\", unit = \"percent\" }\nlight = { column = \"PAR_Avg\", unit = \"umol_m2_s\" }\n".into(),
            ids: vec!["bay_east".into(), "bay_west".into()],
            rows: 2 * n,
            expect: vec!["layout = \"four-line-header\"", "logs/fourline/*.dat\"]"],
            choose: vec![],
            blocks: 1,
        });
    }
    // 6. A title line, a row-number column, the offset in the time header,
    //    serial numbers in the channel headers, month-first two-digit years.
    {
        let mut t = String::from(
            "\"Plot Title: potting shed\"\n\"#\",\"Date Time, GMT+01:00\",\"Temp, °C (S/N: 5512093)\",\"RH, % (S/N: 5512093)\",\"Host Connected (S/N: 5512093)\"\n",
        );
        for (i, d, h, m) in steps(n, 12) {
            let (h12, p) = ampm(h);
            t.push_str(&format!(
                "{},10/{d:02}/26 {h12:02}:{m:02}:00 {p},{:.3},{:.2}\n",
                i + 1,
                15.0 + (i % 17) as f64 * 0.125,
                80.0 - (i % 21) as f64 * 0.5
            ));
        }
        cases.push(Case {
            name: "titled",
            files: vec![("5512093.csv".into(), t.into_bytes())],
            hand: "[[logs]]\nfiles = [\"logs/titled/5512093.csv\"]\nskip_lines = 1\ntime = \"Date Time\"\ntime_format = \"%m/%d/%y %I:%M:%S %p\"\ntimezone = \"UTC+01:00\"\nsensor_from = \"file_stem\"\n[logs.columns]\ntemperature = { column = \"Temp, °C (S/N: 5512093)\", unit = \"degC\" }\nhumidity = { column = \"RH, % (S/N: 5512093)\", unit = \"percent\" }\n".into(),
            ids: vec!["5512093".into()],
            rows: n,
            expect: vec!["layout = \"titled-with-offset\""],
            choose: vec![],
            blocks: 1,
        });
    }
    // 7. The sensor name in the first header cell, the serial number in the
    //    first row only.
    {
        let mut t = String::from("loft-3,Time,Celsius(°C),Humidity(%rh),Dew Point(°C),Serial Number\n");
        for (i, d, h, m) in steps(n, 7) {
            t.push_str(&format!(
                "{},2026-07-{d:02} {h:02}:{m:02}:00,{:.1},{:.1},12.0",
                i + 1,
                26.0 + (i % 8) as f64 * 0.25,
                45.0 + (i % 12) as f64
            ));
            if i == 0 {
                t.push_str(",SN-4410");
            }
            t.push('\n');
        }
        cases.push(Case {
            name: "firstcell",
            files: vec![("loft-3.csv".into(), t.into_bytes())],
            hand: "[[logs]]\nfiles = [\"logs/firstcell/*.csv\"]\ntime = \"Time\"\ntime_format = \"%Y-%m-%d %H:%M:%S\"\nsensor_from = \"file_stem\"\n[logs.columns]\ntemperature = { column = \"Celsius(°C)\", unit = \"degC\" }\nhumidity = { column = \"Humidity(%rh)\", unit = \"percent\" }\n".into(),
            ids: vec!["loft-3".into()],
            rows: n,
            expect: vec!["layout = \"name-in-first-cell\""],
            choose: vec![],
            blocks: 1,
        });
    }
    // 8. RFC 3339 stamps with offsets; a units line (kelvin, fraction).
    {
        let mut t = String::from("time,air_temperature,relative_humidity,station\n,K,1,\n");
        for (i, d, h, m) in steps(n, 28) {
            let (d, mo) = if d > 31 { (d - 31, 4) } else { (d, 3) };
            t.push_str(&format!(
                "2026-{mo:02}-{d:02}T{h:02}:{m:02}:00+02:00,{:.2},{:.3},roof\n",
                290.15 + (i % 10) as f64 * 0.1,
                0.5 + (i % 10) as f64 * 0.01
            ));
        }
        cases.push(Case {
            name: "rfc",
            files: vec![("roof.csv".into(), t.into_bytes())],
            hand: "[[logs]]\nfiles = [\"logs/rfc/roof.csv\"]\nlines_after_header = 1\ntime = \"time\"\ntime_format = \"rfc3339\"\nsensor = \"station\"\n[logs.columns]\ntemperature = { column = \"air_temperature\", unit = \"K\" }\nhumidity = { column = \"relative_humidity\", unit = \"fraction\" }\n".into(),
            ids: vec!["roof".into()],
            rows: n,
            expect: vec!["time_format = \"rfc3339\"", "lines_after_header = 1", "unit = \"K\"", "unit = \"fraction\""],
            choose: vec![],
            blocks: 1,
        });
    }
    // 9. Unix seconds, words without units, light in lux (source to choose).
    {
        let mut t = String::from("epoch,t_air,rh,lux\n");
        for i in 0..n {
            t.push_str(&format!(
                "{},{:.1},{:.1},{}\n",
                1_780_000_200 + 600 * i,
                21.0 + (i % 9) as f64 * 0.2,
                58.0 + (i % 10) as f64,
                (i * 131) % 40_000
            ));
        }
        cases.push(Case {
            name: "unix",
            files: vec![("lamp_row.csv".into(), t.into_bytes())],
            hand: "[[logs]]\nfiles = [\"logs/unix/lamp_row.csv\"]\ntime = \"epoch\"\ntime_format = \"unix\"\nsensor_from = \"file_stem\"\n[logs.columns]\ntemperature = { column = \"t_air\", unit = \"degC\" }\nhumidity = { column = \"rh\", unit = \"percent\" }\nlight = { column = \"lux\", unit = \"lux_hps\" }\n".into(),
            ids: vec!["lamp_row".into()],
            rows: n,
            expect: vec!["time_format = \"unix\"", "# UNDECIDED (light)"],
            choose: vec![("# light = { column = \"lux\", unit = \"lux_hps\" }", "light = { column = \"lux\", unit = \"lux_hps\" }")],
            blocks: 1,
        });
    }
    // 10. Pipes, slashes in ISO-order dates, a node column, bare `T` and `RH`.
    {
        let mut t = String::from("Timestamp|Node|T|RH|PPFD\n");
        for (i, d, h, m) in steps(n, 15) {
            t.push_str(&format!(
                "2026/04/{d:02} {h:02}:{m:02}|n{}|{:.1}|{:.0}|{}\n",
                i % 3,
                14.0 + (i % 20) as f64 * 0.1,
                65.0 + (i % 10) as f64,
                (i * 3) % 500
            ));
        }
        cases.push(Case {
            name: "pipes",
            files: vec![("nodes.txt".into(), t.into_bytes())],
            hand: "[[logs]]\nfiles = [\"logs/pipes/nodes.txt\"]\ndelimiter = \"|\"\ntime = \"Timestamp\"\ntime_format = \"%Y/%m/%d %H:%M\"\nsensor = \"Node\"\n[logs.columns]\ntemperature = { column = \"T\", unit = \"degC\" }\nhumidity = { column = \"RH\", unit = \"percent\" }\nlight = { column = \"PPFD\", unit = \"umol_m2_s\" }\n".into(),
            ids: vec!["n0".into(), "n1".into(), "n2".into()],
            rows: n,
            expect: vec!["delimiter = \"|\"", "sensor = \"Node\""],
            choose: vec![],
            blocks: 1,
        });
    }
    // 11. Day-first or month-first cannot be told (no day above 12); the
    //     zone named in the preamble.
    {
        let mut t = String::from("Device: propagation tent\nTime zone: UTC+10:00\nDate,Temperature °C,RH%\n");
        for (i, d, h, m) in steps(n, 3) {
            t.push_str(&format!(
                "{d:02}/08/2026 {h:02}:{m:02},{:.1},{}\n",
                23.0 + (i % 5) as f64 * 0.2,
                85 - i % 10
            ));
        }
        cases.push(Case {
            name: "dayorder",
            files: vec![("tent.csv".into(), t.into_bytes())],
            hand: "[[logs]]\nfiles = [\"logs/dayorder/tent.csv\"]\nskip_lines = 2\ntime = \"Date\"\ntime_format = \"%d/%m/%Y %H:%M\"\ntimezone = \"UTC+10:00\"\nsensor_from = \"file_stem\"\n[logs.columns]\ntemperature = { column = \"Temperature °C\", unit = \"degC\" }\nhumidity = { column = \"RH%\", unit = \"percent\" }\n".into(),
            ids: vec!["tent".into()],
            rows: n,
            expect: vec!["# UNDECIDED (time_format)", "timezone = \"UTC+10:00\""],
            choose: vec![("# time_format = \"%d/%m/%Y %H:%M\"", "time_format = \"%d/%m/%Y %H:%M\"")],
            blocks: 1,
        });
    }
    // 12. Latin-1 header bytes, CRLF line ends, a delimiter at every line's
    //     end, solar radiation in W/m².
    {
        let mut t: Vec<u8> = b"Date Time,Temp (\xB0C),RH (%),Solar Radiation (W/m\xB2),\r\n".to_vec();
        for (i, d, h, m) in steps(n, 21) {
            t.extend_from_slice(
                format!(
                    "2026-06-{d:02} {h:02}:{m:02}:00,{:.2},{:.1},{:.1},\r\n",
                    18.5 + (i % 16) as f64 * 0.1,
                    60.0 + (i % 8) as f64,
                    (i % 70) as f64 * 9.5
                )
                .as_bytes(),
            );
        }
        cases.push(Case {
            name: "latin1",
            files: vec![("weather mast.csv".into(), t)],
            hand: "[[logs]]\nfiles = [\"logs/latin1/*.csv\"]\ntime = \"Date Time\"\ntime_format = \"%Y-%m-%d %H:%M:%S\"\nsensor_from = \"file_stem\"\n[logs.columns]\ntemperature = { column = \"Temp (°C)\", unit = \"degC\" }\nhumidity = { column = \"RH (%)\", unit = \"percent\" }\nlight = { column = \"Solar Radiation (W/m²)\", unit = \"w_m2_shortwave\" }\n".into(),
            ids: vec!["weather mast".into()],
            rows: n,
            expect: vec!["unit = \"w_m2_shortwave\""],
            choose: vec![],
            blocks: 1,
        });
    }
    cases
}

/// Every corpus export: detected by `init --logs`, the expected keys
/// written, and the detected blocks ingest to the readings of the
/// hand-written block (every row kept).
#[test]
fn every_corpus_export_is_detected_and_reads_like_its_hand_written_block() {
    let cases = corpus();
    assert!(cases.len() >= 12);
    for c in cases {
        let d = tempfile::tempdir().unwrap();
        let dir = d.path();
        for (f, bytes) in &c.files {
            write(dir, &format!("logs/{}/{f}", c.name), bytes);
        }
        let glob = format!("{}/logs/{}/*", dir.display(), c.name);
        let made = dir.join("gen");
        let (code, out, err) = run(&["init", made.to_str().unwrap(), "--logs", &glob]);
        assert_eq!(code, 0, "{}: {out}{err}", c.name);
        assert!(out.contains(&format!("detected {} block(s)", c.blocks)), "{}: {out}", c.name);
        let mut text = std::fs::read_to_string(made.join("study.toml")).unwrap();
        for e in &c.expect {
            assert!(text.contains(e), "{}: no `{e}` in\n{text}", c.name);
        }
        for (from, to) in &c.choose {
            assert!(text.contains(from), "{}: no choice `{from}` in\n{text}", c.name);
            assert!(out.contains("to decide:"), "{}: the choice is not listed on the screen: {out}", c.name);
            text = text.replacen(from, to, 1);
        }
        // The detected [[logs]] blocks, moved next to the hand-written study.
        let doc: toml::Table = toml::from_str(&text).unwrap_or_else(|e| panic!("{}: {e}\n{text}", c.name));
        let mut logs = toml::Table::new();
        let mut blocks = doc["logs"].as_array().unwrap().clone();
        for b in &mut blocks {
            let files = b["files"].as_array().unwrap();
            let moved: Vec<toml::Value> = files
                .iter()
                .map(|f| toml::Value::String(f.as_str().unwrap().trim_start_matches("../").to_string()))
                .collect();
            b.as_table_mut().unwrap().insert("files".into(), toml::Value::Array(moved));
        }
        logs.insert("logs".into(), toml::Value::Array(blocks));
        let detected = study(dir, "detected", &c.ids, &toml::to_string(&logs).unwrap());
        let hand = study(dir, "hand", &c.ids, &c.hand);
        for st in [&detected, &hand] {
            let (code, out, err) = run(&["ingest", st.to_str().unwrap()]);
            assert_eq!(code, 0, "{}: {}\n{out}{err}", c.name, std::fs::read_to_string(st).unwrap());
            assert!(
                out.contains(&format!("{} rows read: {} kept as is", c.rows, c.rows)),
                "{}: {out}",
                c.name
            );
        }
        let a = readings(&dir.join("out_detected/readings.parquet"));
        let b = readings(&dir.join("out_hand/readings.parquet"));
        assert_eq!(a.len(), c.rows, "{}", c.name);
        assert_eq!(a, b, "{}", c.name);
    }
}

/// `check --suggest` prints the blocks for the files of an existing study's
/// globs; a file that matches nothing is named with the lines read.
#[test]
fn check_suggest_prints_blocks_and_names_what_it_cannot_read() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    let mut t = String::from("when,T (°C)\n");
    for i in 0..50 {
        t.push_str(&format!("2026-02-{:02} 10:00,{}.5\n", 1 + i % 28, 10 + i % 7));
    }
    write(dir, "logs/a1.csv", t.as_bytes());
    write(dir, "logs/notes.csv", b"Greenhouse notes\nwatered on Monday\n");
    let st = study(
        dir,
        "s",
        &["a1".into()],
        "[[logs]]\nfiles = [\"logs/*.csv\"]\ntime = \"x\"\ntime_format = \"%Y-%m-%d %H:%M\"\nsensor_from = \"file_stem\"\n[logs.columns]\ntemperature = { column = \"x\", unit = \"degC\" }\n",
    );
    let (code, out, _) = run(&["check", st.to_str().unwrap(), "--suggest"]);
    assert_eq!(code, 1, "{out}");
    assert!(out.contains("time = \"when\"") && out.contains("files = [\"logs/a1.csv\"]"), "{out}");
    assert!(
        out.contains("not recognised")
            && out.contains("notes.csv")
            && out.contains("line 1: Greenhouse notes"),
        "{out}"
    );
}
