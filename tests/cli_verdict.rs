//! `potclim verdict` through the binary: outputs and bad input, on a small
//! invented bench (the numbers are checked in the unit tests of
//! src/model/verdict.rs and src/model/compare.rs).

use std::path::Path;
use std::process::Command;

/// 48 pots on a 8 x 6 bench; the trait falls with `cold` (a gradient along x
/// with a small pseudo-random wiggle) plus deterministic noise.
fn pots_csv(extra: impl Fn(usize) -> String, extra_name: &str) -> String {
    let mut s = format!("pot,x,y,accession,regime,cold,{extra_name}height\n");
    for i in 0..48 {
        let (col, row) = (i % 8, i / 8);
        let x = col as f64 * 0.4;
        let y = row as f64 * 0.5;
        let acc = ["k1", "k2", "k3"][i % 3];
        let reg = ["shade", "full"][(i / 3) % 2];
        let cold = 2.0 + 0.9 * col as f64 + ((i * 7) % 5) as f64 * 0.1;
        let noise = (((i * 37 + 11) % 17) as f64 - 8.0) * 0.15;
        let h = 25.0 + [0.0, 1.2, -0.8][i % 3] + [0.0, 2.0][(i / 3) % 2] - 1.1 * cold + noise;
        s.push_str(&format!("P{i:02},{x},{y},{acc},{reg},{cold:.3},{}{h:.3}\n", extra(i)));
    }
    s
}

fn study(dir: &Path, drivers: &str, pots: &str) -> std::path::PathBuf {
    std::fs::write(dir.join("pots.csv"), pots).unwrap();
    let s = format!(
        "[study]\ntitle = \"bench test\"\ntimezone = \"UTC\"\noutput = \"out\"\nseed = 5\n\n[pots]\nfile = \"pots.csv\"\nid = \"pot\"\nx = \"x\"\ny = \"y\"\n\n[model]\ntrait = \"height\"\nfactors = [\"accession\", \"regime\"]\ndrivers = {drivers}\ncorrelations = [\"exponential\"]\nnugget = true\n\n[verdict]\ntie_delta = 2\n"
    );
    let p = dir.join("study.toml");
    std::fs::write(&p, s).unwrap();
    p
}

fn run(study: &Path) -> (bool, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_potclim")).arg("verdict").arg(study).output().unwrap();
    (
        out.status.success(),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

#[test]
fn verdict_writes_summary_and_tables() {
    let dir = tempfile::tempdir().unwrap();
    let p = study(dir.path(), "[\"cold\"]", &pots_csv(|_| String::new(), ""));
    let (ok, stdout, stderr) = run(&p);
    assert!(ok, "{stderr}");
    assert!(stdout.contains("verdict: covariate"), "{stdout}");
    let out = dir.path().join("out");
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    assert_eq!(summary["verdict"], "covariate");
    assert_eq!(summary["best_model"], "base+cold");
    assert!(summary["reason"].as_str().unwrap().contains("cold"));
    let models = summary["models"].as_array().unwrap();
    // 2 driver sets x (independent, exponential, exponential+nugget)
    assert_eq!(models.len(), 6);
    for m in models {
        for key in ["name", "drivers", "correlation", "nugget", "loglik", "aic", "bic", "n_params"] {
            assert!(m.get(key).is_some(), "models[] lacks {key}");
        }
    }
    let d = &summary["drivers"][0];
    for key in ["name", "estimate", "se", "se_with_mapping_uncertainty", "p_value", "delta_aic"] {
        assert!(d.get(key).is_some(), "drivers[] lacks {key}");
    }
    // The small-sample columns name the REML refit they come from: the
    // chosen model, or a correlated refit of its drivers (docs/verdict.md, step 7).
    let from = d["small_sample_model"].as_str().unwrap();
    assert!(from == "base+cold" || from.starts_with("base+cold | "), "{from}");
    // The true slope is -1.1 per unit.
    let est = d["estimate"].as_f64().unwrap();
    assert!((est + 1.1).abs() < 0.2, "{est}");
    let comparison = std::fs::read_to_string(out.join("comparison.csv")).unwrap();
    assert_eq!(comparison.lines().count(), 7);
    assert!(comparison.starts_with("model,drivers,correlation,nugget,loglik,aic,bic,n_params,delta_aic"));
    let drivers = std::fs::read_to_string(out.join("drivers.csv")).unwrap();
    assert_eq!(drivers.lines().count(), 2);
    let means = std::fs::read_to_string(out.join("adjusted_means.csv")).unwrap();
    // 3 accessions + 2 regimes
    assert_eq!(means.lines().count(), 1 + 5, "{means}");
}

#[test]
fn unknown_driver_lists_the_available_names() {
    let dir = tempfile::tempdir().unwrap();
    let p = study(dir.path(), "[\"night_cold\"]", &pots_csv(|_| String::new(), ""));
    let (ok, _, stderr) = run(&p);
    assert!(!ok);
    assert!(stderr.contains("night_cold") && stderr.contains("available drivers"), "{stderr}");
    assert!(stderr.contains("cold"), "{stderr}");
    assert!(!dir.path().join("out/summary.json").exists());
}

#[test]
fn constant_driver_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let p = study(dir.path(), "[\"cold\", \"flat\"]", &pots_csv(|_| "3.5,".into(), "flat,"));
    let (ok, _, stderr) = run(&p);
    assert!(!ok);
    assert!(stderr.contains("`flat` is constant"), "{stderr}");
}

#[test]
fn collinear_drivers_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let pots = pots_csv(|_| String::new(), "");
    // a second driver that is exactly 2 * cold + 1
    let mut lines = pots.lines();
    let mut s = format!("{},cold2\n", lines.next().unwrap());
    for l in lines {
        let cold: f64 = l.split(',').nth(5).unwrap().parse().unwrap();
        s.push_str(&format!("{l},{}\n", 2.0 * cold + 1.0));
    }
    let p = study(dir.path(), "[\"cold\", \"cold2\"]", &s);
    let (ok, _, stderr) = run(&p);
    assert!(!ok);
    assert!(stderr.contains("aliased") && stderr.contains("cold2"), "{stderr}");
}

#[test]
fn unknown_verdict_key_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let p = study(dir.path(), "[\"cold\"]", &pots_csv(|_| String::new(), ""));
    let text = std::fs::read_to_string(&p).unwrap().replace("tie_delta = 2", "tie_margin = 2");
    std::fs::write(&p, text).unwrap();
    let (ok, _, stderr) = run(&p);
    assert!(!ok);
    assert!(stderr.contains("tie_margin"), "{stderr}");
}

/// A mapped climate driver from `<output>/pot_covariates.csv` with its
/// sensor-level values in `<output>/sensor_indicators.csv`: the chosen model
/// is refitted on conditional simulations and the inflated SE is reported
/// next to the plug-in SE.
#[test]
fn mapped_driver_gets_an_inflated_se() {
    let dir = tempfile::tempdir().unwrap();
    // pot table without `cold`; `cold` comes from the mapping stage's file.
    let full = pots_csv(|_| String::new(), "");
    let mut pots = String::new();
    let mut cov = String::from("pot,cold,cold_se\n");
    for (k, l) in full.lines().enumerate() {
        let f: Vec<&str> = l.split(',').collect();
        let kept: Vec<&str> = f.iter().enumerate().filter(|(j, _)| *j != 5).map(|(_, v)| *v).collect();
        pots.push_str(&kept.join(","));
        pots.push('\n');
        if k > 0 {
            cov.push_str(&format!("{},{},0.2\n", f[0], f[5]));
        }
    }
    let p = study(dir.path(), "[\"cold\"]", &pots);
    let mut text = std::fs::read_to_string(&p).unwrap();
    text = text.replace(
        "[model]",
        "[sensors]\nfile = \"sensors.csv\"\nid = \"sensor\"\nx = \"x\"\ny = \"y\"\n\n[model]",
    );
    text = text.replace("tie_delta = 2", "tie_delta = 2\ndraws = 8");
    std::fs::write(&p, text).unwrap();
    let mut sensors = String::from("sensor,x,y\n");
    let mut ind = String::from("sensor,cold,cold_days\n");
    for k in 0..8 {
        let (x, y) = ((k % 4) as f64 * 0.9 + 0.1, (k / 4) as f64 * 2.0 + 0.4);
        sensors.push_str(&format!("S{k},{x},{y}\n"));
        // the test's cold gradient at the sensor (0.9 per 0.4 m along x)
        ind.push_str(&format!("S{k},{},28\n", 2.0 + 0.9 * x / 0.4 + 0.2 * (k % 3) as f64));
    }
    std::fs::write(dir.path().join("sensors.csv"), sensors).unwrap();
    std::fs::create_dir_all(dir.path().join("out")).unwrap();
    std::fs::write(dir.path().join("out/pot_covariates.csv"), cov).unwrap();
    std::fs::write(dir.path().join("out/sensor_indicators.csv"), ind).unwrap();
    let (ok, stdout, stderr) = run(&p);
    assert!(ok, "{stderr}");
    assert!(stdout.contains("imputations of the mapped driver"), "{stdout}");
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("out/summary.json")).unwrap()).unwrap();
    let d = &summary["drivers"][0];
    let (se, inflated) = (d["se"].as_f64().unwrap(), d["se_with_mapping_uncertainty"].as_f64());
    let inflated = inflated.unwrap_or_else(|| panic!("no inflated SE: {summary}"));
    assert!(inflated > 0.0 && inflated.is_finite() && se > 0.0, "{se} {inflated}");
}

/// Every `[[openings]]` entry becomes a candidate driver `distance_<name>`
/// without being listed: the door runs along x = 0 from y = 0 to y = 3, so
/// every pot's distance is its x (0 to 2.8 m). The trait follows `cold`
/// (which rises along x with a wiggle the distance does not have), so the
/// report can tell measured climate from plain distance.
#[test]
fn openings_are_candidate_drivers() {
    let dir = tempfile::tempdir().unwrap();
    let p = study(dir.path(), "[\"cold\"]", &pots_csv(|_| String::new(), ""));
    let mut text = std::fs::read_to_string(&p).unwrap();
    text.push_str("\n[[openings]]\nname = \"door\"\nfrom = [0.0, 0.0]\nto = [0.0, 3.0]\n");
    std::fs::write(&p, text).unwrap();
    let (ok, _, stderr) = run(&p);
    assert!(ok, "{stderr}");
    let out = dir.path().join("out");
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    let names: Vec<&str> =
        summary["drivers"].as_array().unwrap().iter().map(|d| d["name"].as_str().unwrap()).collect();
    assert_eq!(names, ["cold", "distance_door"]);
    let o = &summary["openings"];
    assert_eq!(o["best_climate"], "cold");
    assert_eq!(o["best_distance"], "distance_door");
    assert!(o["aic_difference"].as_f64().unwrap() > 0.0, "climate explains better: {o}");
    let notes = summary["notes"].as_array().unwrap();
    assert!(notes.iter().any(|n| n.as_str().unwrap().contains("`distance_door` added")), "{notes:?}");
    // Three driver sets (base, +cold, +distance_door; a distance is never
    // combined with the climate drivers) x three error models.
    let models = summary["models"].as_array().unwrap();
    assert_eq!(models.len(), 3 * 3, "base, base+cold, base+distance_door");
    assert!(models.iter().all(|m| m["name"].as_str().unwrap().matches('+').count() <= 2), "{models:?}");
}

#[test]
fn pots_without_a_trait_value_are_named_in_output_summary_and_notes() {
    let dir = tempfile::tempdir().unwrap();
    // P05 (line 7) and P17 (line 19) lose their height.
    let pots: String = pots_csv(|_| String::new(), "")
        .lines()
        .map(|l| {
            if l.starts_with("P05,") || l.starts_with("P17,") {
                let cut = l.rfind(',').unwrap();
                format!("{},NA\n", &l[..cut])
            } else {
                format!("{l}\n")
            }
        })
        .collect();
    let p = study(dir.path(), "[\"cold\"]", &pots);
    let (ok, stdout, stderr) = run(&p);
    assert!(ok, "{stderr}");
    assert!(stdout.contains("46 pots"), "{stdout}");
    assert!(
        stdout.contains("note: 2 pot(s) left out because `height` is missing: P05 (line 7), P17 (line 19)"),
        "{stdout}"
    );
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("out/summary.json")).unwrap()).unwrap();
    assert_eq!(summary["n_pots"], 46);
    let left: Vec<(String, u64, String)> = summary["left_out"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| {
            (
                p["pot"].as_str().unwrap().into(),
                p["line"].as_u64().unwrap(),
                p["reason"].as_str().unwrap().into(),
            )
        })
        .collect();
    assert_eq!(
        left,
        [
            ("P05".to_string(), 7, "`height` is missing".to_string()),
            ("P17".into(), 19, "`height` is missing".into())
        ]
    );
}
