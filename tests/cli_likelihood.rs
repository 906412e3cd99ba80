//! The likelihood of the correlated fits through the binary (`[model]
//! likelihood` and `neighbours`, docs/model.md "Which likelihood"):
//! `potclim simulate` generates the 150-pot truth study with a driver effect
//! and a correlated residual (tests/scenarios/truth_both.toml), `potclim run`
//! fits it with the exact likelihood and with the nearest-neighbour one at
//! `m = n - 1` (every earlier pot a neighbour: the Vecchia factorisation is
//! then exact), and the two grids must agree; `potclim check` refuses bad
//! values of the keys with the study file's line.

use std::path::Path;
use std::process::{Command, Output};

fn potclim(args: &[&str], dir: &Path) -> Output {
    Command::new(env!("CARGO_BIN_EXE_potclim")).args(args).current_dir(dir).output().unwrap()
}

fn ok(args: &[&str], dir: &Path) {
    let out = potclim(args, dir);
    assert!(
        out.status.success(),
        "potclim {args:?} failed:\n{}\n{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
}

/// The study folder with `keys` added at the top of `[model]`.
fn with_model_keys(from: &Path, to: &Path, keys: &str) {
    let status = Command::new("cp").arg("-r").arg(from).arg(to).status().unwrap();
    assert!(status.success());
    let _ = std::fs::remove_dir_all(to.join("output"));
    let toml = std::fs::read_to_string(to.join("study.toml")).unwrap();
    assert!(toml.contains("\n[model]\n"), "{toml}");
    std::fs::write(to.join("study.toml"), toml.replacen("\n[model]\n", &format!("\n[model]\n{keys}\n"), 1))
        .unwrap();
}

/// `(model, loglik)` of every row of `comparison.csv`, and its header.
fn grid(out: &Path) -> (Vec<String>, Vec<(String, f64)>) {
    let csv = std::fs::read_to_string(out.join("comparison.csv")).unwrap();
    let mut lines = csv.lines();
    let header: Vec<String> = lines.next().unwrap().split(',').map(str::to_string).collect();
    let ll = header.iter().position(|h| h == "loglik").unwrap();
    let rows = lines
        .map(|l| {
            let cells: Vec<&str> = l.split(',').collect();
            (cells[0].to_string(), cells[ll].parse().unwrap())
        })
        .collect();
    (header, rows)
}

#[test]
fn neighbours_with_every_earlier_pot_reproduce_the_exact_run() {
    let dir = tempfile::tempdir().unwrap();
    let scenario = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/scenarios/truth_both.toml");
    ok(&["simulate", scenario.to_str().unwrap(), "--out", "exact", "--seed", "3"], dir.path());
    let exact = dir.path().join("exact");
    // no bootstrap, two draws: the comparison is of the grid and the verdict
    let mut toml = std::fs::read_to_string(exact.join("study.toml")).unwrap();
    toml.push_str("\n[verdict]\nbootstrap = 0\ndraws = 2\n");
    std::fs::write(exact.join("study.toml"), toml).unwrap();
    let n = std::fs::read_to_string(exact.join("pots.csv")).unwrap().lines().count() - 1;
    assert_eq!(n, 150);
    let near = dir.path().join("near");
    with_model_keys(&exact, &near, &format!("likelihood = \"neighbours\"\nneighbours = {}", n - 1));
    ok(&["run", "study.toml"], &exact);
    ok(&["run", "study.toml"], &near);

    let (h_exact, g_exact) = grid(&exact.join("output"));
    let (h_near, g_near) = grid(&near.join("output"));
    // the exact run keeps its columns; the approximated one appends two
    assert!(!h_exact.iter().any(|h| h == "likelihood"), "{h_exact:?}");
    assert_eq!(h_near[..h_exact.len()], h_exact[..]);
    assert_eq!(h_near[h_exact.len()..], ["likelihood", "neighbours"]);
    assert_eq!(g_exact.len(), g_near.len());
    for (name, ll) in &g_exact {
        let other = g_near.iter().find(|(m, _)| m == name).unwrap_or_else(|| panic!("{name} missing")).1;
        assert!((ll - other).abs() <= 1e-6 * ll.abs(), "{name}: exact {ll}, neighbours {other}");
    }
    let summary = |d: &Path| -> serde_json::Value {
        serde_json::from_str(&std::fs::read_to_string(d.join("output/summary.json")).unwrap()).unwrap()
    };
    let (se, sn) = (summary(&exact), summary(&near));
    assert_eq!(se["verdict"], sn["verdict"]);
    assert_eq!(se["best_model"], sn["best_model"]);
    assert!(se.get("likelihood").is_none());
    assert_eq!(sn["likelihood"]["likelihood"], "neighbours");
    assert_eq!(sn["likelihood"]["neighbours"], n - 1);
    assert_eq!(sn["likelihood"]["setting"], "neighbours");
    let correlated = sn["models"].as_array().unwrap().iter().filter(|m| m["correlation"] != "none");
    let mut latent = 0;
    for m in correlated {
        // a positive nugget share in the exponential or Matérn family: the latent form
        let family = potclim::spatial::correlation::Family::parse(m["correlation"].as_str().unwrap());
        let eta = m["nugget_share"].as_f64().unwrap_or(0.0);
        let expected = match family {
            Ok(family)
                if potclim::model::likelihood_path::latent_form(
                    &potclim::spatial::likelihood::CovParams { family, range: 1.0, eta },
                ) =>
            {
                "neighbours_latent"
            }
            _ => "neighbours",
        };
        latent += usize::from(expected == "neighbours_latent");
        assert_eq!((m["likelihood"].as_str(), m["neighbours"].as_u64()), (Some(expected), Some(149)), "{m}");
    }
    assert!(latent > 0, "no fit used the latent form");
    // the report says which likelihood was used
    let html = std::fs::read_to_string(near.join("output/report.html")).unwrap();
    assert!(html.contains("nearest-neighbour (Vecchia) likelihood with 149 neighbours"));
    let html = std::fs::read_to_string(exact.join("output/report.html")).unwrap();
    assert!(!html.contains("nearest-neighbour (Vecchia) likelihood"));

    // bad values of the keys, refused by `potclim check` with the key named
    for (keys, want) in [
        (
            "likelihood = \"nearest\"",
            "likelihood must be \"exact\", \"neighbours\" or \"auto\", got \"nearest\"",
        ),
        ("neighbours = 0", "neighbours must be a whole number of at least 1, got 0"),
        ("likelihood = \"neighbours\"\nneighbours = 150", "below the number of analysed pots (150)"),
        ("neighbours = \"many\"", "invalid type: string \"many\""),
    ] {
        let bad = dir.path().join("bad");
        let _ = std::fs::remove_dir_all(&bad);
        with_model_keys(&exact, &bad, keys);
        let out = potclim(&["check", "study.toml"], &bad);
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(!out.status.success(), "{keys}: accepted");
        assert!(err.contains(want) && err.contains("study.toml"), "{keys}: {err}");
    }
}
