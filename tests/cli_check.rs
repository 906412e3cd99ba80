//! `potclim check` through the binary: inventory and bad input.

use std::path::Path;
use std::process::Command;

fn run(args: &[&str]) -> (i32, String, String) {
    let o = Command::new(env!("CARGO_BIN_EXE_potclim")).args(args).output().unwrap();
    (
        o.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&o.stdout).into_owned(),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

fn write(dir: &Path, name: &str, text: &str) {
    let p = dir.join(name);
    std::fs::create_dir_all(p.parent().unwrap()).unwrap();
    std::fs::write(p, text).unwrap();
}

fn setup(dir: &Path, log: &str) {
    let mut pots = String::from("pot,x,y,genotype,treatment,height\n");
    let mut k = 0;
    for g in ["G1", "G2", "G3"] {
        for t in ["dry", "wet"] {
            for _ in 0..(if g == "G3" && t == "dry" { 1 } else { 2 }) {
                k += 1;
                pots.push_str(&format!("p{k},{k},0,{g},{t},{}.5\n", 10 + k));
            }
        }
    }
    write(dir, "pots.csv", &pots);
    write(dir, "sensors.csv", "id,x,y\nA,0,0\nB,1,1\n");
    write(dir, "logs/a.csv", log);
    write(
        dir,
        "study.toml",
        "[study]\ntitle = \"check test\"\ntimezone = \"Europe/Amsterdam\"\noutput = \"out\"\n\n[pots]\nfile = \"pots.csv\"\nid = \"pot\"\nx = \"x\"\ny = \"y\"\n\n[sensors]\nfile = \"sensors.csv\"\nid = \"id\"\nx = \"x\"\ny = \"y\"\n\n[[logs]]\nfiles = [\"logs/*.csv\"]\ntime = \"time\"\ntime_format = \"%Y-%m-%d %H:%M\"\nsensor = \"id\"\n[logs.columns]\ntemperature = { column = \"temp\", unit = \"degC\" }\n",
    );
}

#[test]
fn inventory_counts_pots_sensors_files_span_and_factor_table() {
    let d = tempfile::tempdir().unwrap();
    let mut log = String::from("id,time,temp\n");
    for i in 0..500 {
        log.push_str(&format!("A,2026-03-{:02} {:02}:{:02},20\n", 1 + i / 144, (i % 144) / 6, (i % 6) * 10));
    }
    log.push_str("C,2026-03-05 00:00,20\n");
    setup(d.path(), &log);
    let (code, out, err) = run(&["check", d.path().join("study.toml").to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("pots: 11"), "{out}");
    assert!(out.contains("sensors: 2"), "{out}");
    assert!(out.contains("logs/a.csv: 501 rows"), "{out}");
    // 2026-03-01 00:00 CET = 2026-02-28 23:00Z; the tail holds 2026-03-05 00:00 CET.
    assert!(out.contains("2026-02-28 23:00Z .. 2026-03-04 23:00Z"), "{out}");
    assert!(out.contains("not in the sensor table: C"), "{out}");
    assert!(out.contains("factor genotype: 3 levels: G1 (4), G2 (4), G3 (3)"), "{out}");
    assert!(out.contains("pots by genotype x treatment:"), "{out}");
    let g3 = out.lines().find(|l| l.trim_start().starts_with("G3 ")).unwrap();
    let counts: Vec<&str> = g3.split_whitespace().collect();
    assert_eq!(counts, vec!["G3", "1", "2"]);
    assert!(!out.contains("factor height"), "numeric columns are not factors: {out}");
}

#[test]
fn check_reports_bad_input_with_file_and_line() {
    let d = tempfile::tempdir().unwrap();
    setup(d.path(), "id,time,Temp\nA,2026-03-01 00:00,20\n");
    let (code, _, err) = run(&["check", d.path().join("study.toml").to_str().unwrap()]);
    assert_eq!(code, 1);
    assert!(err.contains("logs/a.csv:1") && err.contains("did you mean `Temp`"), "{err}");
    let (code, _, err) = run(&["check", d.path().join("nope.toml").to_str().unwrap()]);
    assert_eq!(code, 1);
    assert!(err.contains("nope.toml") && err.contains("cannot read"), "{err}");
}

#[test]
fn help_explains_what_is_checked() {
    let (code, out, _) = run(&["check", "--help"]);
    assert_eq!(code, 0);
    assert!(out.contains("count table") && out.contains("first and last 200 rows"), "{out}");
}
