//! `potclim check` through the binary: inventory and bad input. Every
//! refusal of a study section is also tried with `potclim run`, which must
//! refuse it the same way before any work (no output folder is made).

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
        &format!(
            "[study]\ntitle = \"check test\"\ntimezone = \"Europe/Amsterdam\"\noutput = \"out\"\n\n[pots]\nfile = \"pots.csv\"\nid = \"pot\"\nx = \"x\"\ny = \"y\"\n\n[sensors]\nfile = \"sensors.csv\"\nid = \"id\"\nx = \"x\"\ny = \"y\"\n\n[[logs]]\nfiles = [\"logs/*.csv\"]\ntime = \"time\"\ntime_format = \"%Y-%m-%d %H:%M\"\nsensor = \"id\"\n[logs.columns]\ntemperature = {{ column = \"temp\", unit = \"degC\" }}\n{SECTIONS}"
        ),
    );
}

/// The sections `potclim run` needs besides the inputs.
const SECTIONS: &str = "\n[[indicator]]\nname = \"cold\"\nvariable = \"temperature\"\nstatistic = \"hours_below\"\nthreshold = 12.0\n\n[model]\ntrait = \"height\"\nfactors = [\"genotype\", \"treatment\"]\ndrivers = [\"cold\"]\n\n[verdict]\ntie_delta = 2\n";

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
    assert!(out.contains("sensors: 2 in the sensor table, 1 with readings"), "{out}");
    // B is in the sensor table but no export has a row of it.
    assert!(
        out.contains("warning: no readings from 1 sensor(s) of the sensor table (no row in any export): B;"),
        "{out}"
    );
    // Reference levels: those of the first pot of the file (p1: G1, dry).
    assert!(out.contains("reference levels (first appearance among the analysed pots: pot p1, line 2): genotype = G1, treatment = dry"), "{out}");
    assert!(out.contains("drivers: cold (indicator)"), "{out}");
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
    // The system's reason is said once, not once per link of the chain.
    std::fs::remove_file(d.path().join("pots.csv")).unwrap();
    let (code, _, err) = run(&["check", d.path().join("study.toml").to_str().unwrap()]);
    assert_eq!(code, 1);
    assert!(err.contains("pots.csv: cannot read"), "{err}");
    // (Linux wording: the tests run there.)
    assert_eq!(err.matches("No such file").count(), 1, "{err}");
}

#[test]
fn help_explains_what_is_checked() {
    let (code, out, _) = run(&["check", "--help"]);
    assert_eq!(code, 0);
    assert!(out.contains("count table") && out.contains("first and last 200 rows"), "{out}");
}

/// Write the standard study with `edit` applied to its text, then return the
/// study path.
fn edited(dir: &Path, edit: impl Fn(String) -> String) -> std::path::PathBuf {
    let mut log = String::from("id,time,temp\n");
    for i in 0..48 {
        log.push_str(&format!("A,2026-03-01 {:02}:{:02},{}\n", i / 2, (i % 2) * 30, 10 + i % 5));
        log.push_str(&format!("B,2026-03-01 {:02}:{:02},{}\n", i / 2, (i % 2) * 30, 11 + i % 4));
    }
    setup(dir, &log);
    let p = dir.join("study.toml");
    let text = std::fs::read_to_string(&p).unwrap();
    let new = edit(text.clone());
    assert_ne!(new, text, "the edit changed nothing");
    std::fs::write(&p, new).unwrap();
    p
}

/// `check` and `run` both refuse the study with a message holding every one
/// of `expect`; `run` refuses it before ingest (no output folder).
fn refused_by_check_and_run(dir: &Path, study: &Path, expect: &[&str]) {
    let (code, out, err) = run(&["check", study.to_str().unwrap()]);
    assert_eq!(code, 1, "check accepted it: {out}");
    for e in expect {
        assert!(err.contains(e), "check: `{e}` not in: {err}");
    }
    assert!(!err.contains("panicked"), "{err}");
    let (code, out, run_err) = run(&["run", "--quiet", study.to_str().unwrap()]);
    assert_eq!(code, 1, "run accepted it: {out}");
    for e in expect {
        assert!(run_err.contains(e), "run: `{e}` not in: {run_err}");
    }
    assert!(!dir.join("out").exists(), "run started work before refusing: {run_err}");
}

#[test]
fn the_standard_study_passes_check() {
    let d = tempfile::tempdir().unwrap();
    let p = edited(d.path(), |t| t.replace("tie_delta = 2", "tie_delta = 3"));
    let (code, out, err) = run(&["check", p.to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("sensors: 2 in the sensor table, 2 with readings"), "{out}");
    assert!(!out.contains("no readings"), "{out}");
    assert!(out.contains("ready for `potclim run`"), "{out}");
}

#[test]
fn no_indicator_is_refused() {
    let d = tempfile::tempdir().unwrap();
    let p = edited(d.path(), |t| {
        t.replace("[[indicator]]\nname = \"cold\"\nvariable = \"temperature\"\nstatistic = \"hours_below\"\nthreshold = 12.0\n", "")
            .replace("drivers = [\"cold\"]\n", "")
    });
    refused_by_check_and_run(d.path(), &p, &["study.toml", "`indicator`", "no [[indicator]] is declared"]);
}

#[test]
fn misspelt_statistic_is_refused_at_its_line() {
    let d = tempfile::tempdir().unwrap();
    let p = edited(d.path(), |t| t.replace("\"hours_below\"", "\"hours_under\""));
    let line =
        std::fs::read_to_string(&p).unwrap().lines().position(|l| l.contains("hours_under")).unwrap() + 1;
    refused_by_check_and_run(d.path(), &p, &[&format!("study.toml:{line}:"), "hours_under", "hours_below"]);
}

#[test]
fn missing_trait_column_is_refused_at_its_line() {
    let d = tempfile::tempdir().unwrap();
    let p = edited(d.path(), |t| t.replace("trait = \"height\"", "trait = \"hieght\""));
    let line = std::fs::read_to_string(&p).unwrap().lines().position(|l| l.contains("hieght")).unwrap() + 1;
    refused_by_check_and_run(
        d.path(),
        &p,
        &[
            &format!("study.toml:{line}:9:"),
            "`model.trait`",
            "`hieght` is not a column of",
            "did you mean `height`?",
        ],
    );
}

#[test]
fn driver_naming_no_indicator_or_opening_is_refused_at_its_line() {
    let d = tempfile::tempdir().unwrap();
    let p = edited(d.path(), |t| t.replace("drivers = [\"cold\"]", "drivers = [\"colds\"]"));
    let line = std::fs::read_to_string(&p).unwrap().lines().position(|l| l.contains("colds")).unwrap() + 1;
    refused_by_check_and_run(
        d.path(),
        &p,
        &[
            &format!("study.toml:{line}:12:"),
            "driver `colds` names no indicator, no opening",
            "did you mean `cold`?",
        ],
    );
}

#[test]
fn typo_in_verdict_section_is_refused_at_its_line() {
    let d = tempfile::tempdir().unwrap();
    let p = edited(d.path(), |t| t.replace("tie_delta = 2", "tie_detla = 2"));
    let line =
        std::fs::read_to_string(&p).unwrap().lines().position(|l| l.contains("tie_detla")).unwrap() + 1;
    refused_by_check_and_run(d.path(), &p, &[&format!("study.toml:{line}:1:"), "tie_detla"]);
}

/// An indicator that no sensor has on any valid day (every day below
/// `min_coverage`: the loggers recorded only from 06:00 to 18:00) passes the
/// sampled rows, so `check` computes the indicators in memory and refuses it
/// at its line; `run` refuses it at the climate stage, before any map or
/// verdict file is written.
#[test]
fn indicator_without_a_value_at_any_sensor_is_refused() {
    let d = tempfile::tempdir().unwrap();
    let mut log = String::from("id,time,temp\n");
    for day in 1..=3 {
        for i in 12..36 {
            for (s, base) in [("A", 10), ("B", 11)] {
                log.push_str(&format!(
                    "{s},2026-03-0{day} {:02}:{:02},{}\n",
                    i / 2,
                    (i % 2) * 30,
                    base + i % 5
                ));
            }
        }
    }
    setup(d.path(), &log);
    let p = d.path().join("study.toml");
    let text = std::fs::read_to_string(&p).unwrap().replace(
        "\n[[indicator]]",
        "\n[climate]\nstart = \"2026-03-01 00:00\"\nend = \"2026-03-04 00:00\"\n\n[[indicator]]",
    );
    std::fs::write(&p, &text).unwrap();
    let line = text.lines().position(|l| l.contains("variable = \"temperature\"")).unwrap() + 1;
    let (code, out, err) = run(&["check", p.to_str().unwrap()]);
    assert_eq!(code, 1, "check accepted it: {out}");
    for e in [
        &format!("study.toml:{line}:") as &str,
        "`cold` cannot be mapped",
        "below [climate].min_coverage = 90 %",
    ] {
        assert!(err.contains(e), "check: `{e}` not in: {err}");
    }
    assert!(!out.contains("ok: every input"), "{out}");
    assert!(!d.path().join("out").exists(), "check wrote output");
    let (code, _, run_err) = run(&["run", "--quiet", p.to_str().unwrap()]);
    assert_eq!(code, 1);
    assert!(
        run_err.contains("in the climate stage") && run_err.contains("`cold` cannot be mapped"),
        "{run_err}"
    );
    assert!(!d.path().join("out/pot_covariates.csv").exists(), "run mapped before refusing");
    assert!(!d.path().join("out/sensor_indicators.csv").exists(), "run published the climate stage");
}

/// The standard study prints how many sensors have a value of each indicator.
#[test]
fn check_counts_sensors_with_a_value_of_each_indicator() {
    let d = tempfile::tempdir().unwrap();
    let p = edited(d.path(), |t| t.replace("tie_delta = 2", "tie_delta = 3"));
    let (code, out, err) = run(&["check", p.to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("indicator cold: a value at 2 of 2 sensor(s) with readings"), "{out}");
}
