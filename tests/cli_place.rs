//! `potclim place` through the binary: on a small simulated study (the
//! golden scenario, 60 pots and 6 loggers) with the variogram fitted from its
//! logs, and on a scenario with a stated variogram. The placement algebra
//! itself is checked against fresh kriging solves, an exhaustive search and
//! numpy in `src/spatial/placement/tests.rs`; here the files, their
//! consistency with each other, and the errors.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn potclim(args: &[&str], dir: &Path) -> Output {
    Command::new(env!("CARGO_BIN_EXE_potclim")).args(args).current_dir(dir).output().unwrap()
}

fn ok(out: Output) -> String {
    assert!(
        out.status.success(),
        "failed:\n{}\n{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout).unwrap()
}

fn scenario() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/golden/scenario.toml")
}

fn rows(path: &Path) -> Vec<Vec<String>> {
    let text = std::fs::read_to_string(path).unwrap();
    text.lines().map(|l| l.split(',').map(str::to_string).collect()).collect()
}

fn num(s: &str) -> f64 {
    s.parse().unwrap_or_else(|_| panic!("not a number: `{s}`"))
}

/// The study's own fitted map: `plan.csv` has the `now` row, one `add` row per
/// new logger with falling mean SE, one `remove` row per logger with exactly
/// one least-cost flag on the smallest rise; `plan_pots.csv` averages to the
/// `now` and last `add` rows; the page is well-formed.
#[test]
fn places_loggers_in_a_simulated_study() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    ok(potclim(&["simulate", scenario().to_str().unwrap(), "--out", "study", "--seed", "7"], d));
    std::fs::write(
        d.join("study/plan.toml"),
        "[placement]\nstudy = \"study.toml\"\nindicator = \"night_cool_hours\"\nadd = 2\nspacing = 0.5\n",
    )
    .unwrap();
    let stdout = ok(potclim(&["place", "study/plan.toml"], d));
    assert!(stdout.contains("add 2:"), "{stdout}");
    let out = d.join("study/plan-output");
    let plan = rows(&out.join("plan.csv"));
    assert_eq!(
        plan[0],
        [
            "action",
            "order",
            "logger",
            "x_m",
            "y_m",
            "mean_se",
            "max_se",
            "change_mean_se",
            "change_max_se",
            "least_cost"
        ]
    );
    assert_eq!(plan[1][0], "now");
    let adds: Vec<&Vec<String>> = plan.iter().filter(|r| r[0] == "add").collect();
    let removes: Vec<&Vec<String>> = plan.iter().filter(|r| r[0] == "remove").collect();
    assert_eq!(adds.len(), 2);
    assert_eq!(removes.len(), 6);
    let mut prev = num(&plan[1][5]);
    for a in &adds {
        let m = num(&a[5]);
        assert!(m < prev, "each added logger lowers the mean SE: {a:?}");
        assert!((num(&a[7]) - (m - prev)).abs() < 1e-9 * prev);
        prev = m;
    }
    let least: Vec<&&Vec<String>> = removes.iter().filter(|r| r[9] == "true").collect();
    assert_eq!(least.len(), 1);
    let min_rise = removes.iter().map(|r| num(&r[7])).fold(f64::INFINITY, f64::min);
    assert_eq!(num(&least[0][7]), min_rise);
    assert!(removes.iter().all(|r| num(&r[7]) >= 0.0), "taking a logger away never lowers the SE");
    let pots = rows(&out.join("plan_pots.csv"));
    assert_eq!(pots[0], ["pot", "x_m", "y_m", "se_now", "se_after"]);
    assert_eq!(pots.len(), 61);
    let mean = |c: usize| pots[1..].iter().map(|r| num(&r[c])).sum::<f64>() / 60.0;
    assert!((mean(3) - num(&plan[1][5])).abs() < 1e-9 * mean(3));
    assert!((mean(4) - num(&adds[1][5])).abs() < 1e-9 * mean(4));
    let html = std::fs::read_to_string(out.join("plan.html")).unwrap();
    potclim::report::xml::check_well_formed(&html).unwrap();
    assert!(html.contains("fig-se-now") && html.contains("fig-se-after"));

    // The placement's SE is the map's own window SE (docs/planning.md): with
    // the current loggers it equals the SE of `pot_covariates.csv`.
    assert!(html.contains("window SE"), "the page says which SE it lowers");
    for cmd in ["ingest", "climate", "map"] {
        ok(potclim(&[cmd, "study/study.toml"], d));
    }
    let cov = rows(&d.join("study/output/pot_covariates.csv"));
    let c = cov[0].iter().position(|h| h == "night_cool_hours_se").unwrap();
    for k in 1..cov.len() {
        assert_eq!(cov[k][0], pots[k][0]);
        let (plan_se, map_se) = (num(&pots[k][3]), num(&cov[k][c]));
        assert!(
            (plan_se - map_se).abs() <= 1e-6 * map_se.max(1e-9),
            "{}: {plan_se} against {map_se}",
            cov[k][0]
        );
    }

    // `basis = "study_period"`: the kriging SE of the loggers' study-period
    // values, another quantity (its ranks hardly agree with the window SE's).
    std::fs::write(
        d.join("study/plan2.toml"),
        "[placement]\nstudy = \"study.toml\"\nindicator = \"night_cool_hours\"\nadd = 2\nbasis = \"study_period\"\noutput = \"plan2\"\n",
    )
    .unwrap();
    ok(potclim(&["place", "study/plan2.toml"], d));
    let other = rows(&d.join("study/plan2/plan_pots.csv"));
    assert_eq!(other.len(), 61);
    assert!((1..61).any(|k| (num(&other[k][3]) - num(&pots[k][3])).abs() > 1e-3 * num(&pots[k][3])));
    let html = std::fs::read_to_string(d.join("study/plan2/plan.html")).unwrap();
    assert!(html.contains("kriging SE") && html.contains("study-period values"));
    std::fs::write(
        d.join("study/plan3.toml"),
        "[placement]\nstudy = \"study.toml\"\nindicator = \"night_cool_hours\"\nbasis = \"kriged\"\n",
    )
    .unwrap();
    let e = String::from_utf8_lossy(&potclim(&["place", "study/plan3.toml"], d).stderr).to_string();
    assert!(e.contains("placement.basis") && e.contains("kriged") && e.contains("study_period"), "{e}");
}

/// A layout on paper: the scenario's pots and loggers with a stated
/// variogram, a candidates table, the largest SE as objective; and the
/// errors of a bad plan name the file, the key and the value.
#[test]
fn scenario_with_stated_variogram_and_candidates() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    std::fs::write(d.join("spots.csv"), "id,x,y\nA,1.5,2.0\nB,3.5,2.0\nC,5.5,2.0\nD,6.5,3.5\n").unwrap();
    let plan = format!(
        "[placement]\nscenario = \"{}\"\nindicator = \"night_cool_hours\"\nunit = \"h\"\nadd = 2\nobjective = \"max\"\ncandidates = \"spots.csv\"\noutput = \"out\"\n\n[placement.variogram]\nfamily = \"exponential\"\nnugget = 1.0\npartial_sill = 9.0\nrange = 1.5\n",
        scenario().display()
    );
    std::fs::write(d.join("plan.toml"), &plan).unwrap();
    ok(potclim(&["place", "plan.toml"], d));
    let p = rows(&d.join("out/plan.csv"));
    let adds: Vec<&Vec<String>> = p.iter().filter(|r| r[0] == "add").collect();
    assert_eq!(adds.len(), 2);
    assert!(adds.iter().all(|r| ["A", "B", "C", "D"].contains(&r[2].as_str())));
    assert!(num(&adds[1][6]) <= num(&adds[0][6]), "the largest SE does not rise");

    std::fs::write(d.join("bad.toml"), plan.replace("objective = \"max\"", "objective = \"median\""))
        .unwrap();
    let e = String::from_utf8(potclim(&["place", "bad.toml"], d).stderr).unwrap();
    assert!(e.contains("bad.toml") && e.contains("placement.objective") && e.contains("median"), "{e}");
    std::fs::write(d.join("spots.csv"), "id,x,y\nA,1.5,2.0\nB,abc,2.0\n").unwrap();
    let e = String::from_utf8(potclim(&["place", "plan.toml"], d).stderr).unwrap();
    assert!(e.contains("spots.csv") && e.contains(":3") && e.contains("abc"), "{e}");
    std::fs::write(d.join("typo.toml"), plan.replace("add = 2", "ad = 2")).unwrap();
    let e = String::from_utf8(potclim(&["place", "typo.toml"], d).stderr).unwrap();
    assert!(e.contains("typo.toml") && e.contains("ad"), "{e}");
}
