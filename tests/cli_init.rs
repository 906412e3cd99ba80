//! `potclim init` through the binary.

use std::process::Command;

fn run(args: &[&str]) -> (i32, String, String) {
    let o = Command::new(env!("CARGO_BIN_EXE_potclim")).args(args).output().unwrap();
    (
        o.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&o.stdout).into_owned(),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

#[test]
fn init_writes_a_template_that_parses_and_never_overwrites() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path().join("new_study");
    let (code, out, err) = run(&["init", dir.to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    let p = dir.join("study.toml");
    let text = std::fs::read_to_string(&p).unwrap();
    assert!(text.contains("[[logs]]") && text.contains("# "));
    potclim::io::study::Study::load(&p).unwrap();
    // A second init refuses to overwrite; --force does.
    std::fs::write(&p, "# mine\n").unwrap();
    let (code, _, err) = run(&["init", dir.to_str().unwrap()]);
    assert_eq!(code, 1);
    assert!(err.contains("already exists") && err.contains("--force"), "{err}");
    assert_eq!(std::fs::read_to_string(&p).unwrap(), "# mine\n");
    let (code, _, _) = run(&["init", "--force", dir.to_str().unwrap()]);
    assert_eq!(code, 0);
    assert_eq!(std::fs::read_to_string(&p).unwrap(), text);
    // The template names files that do not exist yet: check says which.
    let (code, _, err) = run(&["check", p.to_str().unwrap()]);
    assert_eq!(code, 1);
    assert!(err.contains("pots.csv"), "{err}");
}

/// The example files the template describes (and README.md's first study
/// shows): 24 pots of two accessions under two regimes on a 4 m x 2 m bench,
/// four loggers in two exports of seven days at 10 minutes, with a little
/// seeded noise so that no reading looks stuck. The height rises from west
/// to east as the night cold hours fall (the eastern loggers read 0.8 °C
/// warmer), and nothing else in it is spatial: a height that also fell with
/// y (an earlier version, `- 0.5 y`) is a smooth pattern the cold hours do
/// not follow, and the verdict rightly gives it to a correlated residual
/// (docs/verdict.md, step 8).
fn write_template_example(dir: &std::path::Path) {
    let mut state: u64 = 12345;
    let mut rnd = move || {
        state = (state * 1_103_515_245 + 12_345) % (1 << 31);
        state as f64 / (1u64 << 31) as f64
    };
    let mut pots = String::from("pot,x,y,accession,regime,height_cm\n");
    for k in 0..24 {
        let (x, y) = (0.25 + 0.5 * (k % 8) as f64, 0.4 + 0.6 * (k / 8) as f64);
        let acc = ["A1", "A2"][k % 2];
        let reg = ["wet", "dry"][(k / 2) % 2];
        pots.push_str(&format!("P{:02},{x},{y},{acc},{reg},{:.1}\n", k + 1, 30.0 + x + rnd()));
    }
    std::fs::write(dir.join("pots.csv"), pots).unwrap();
    std::fs::write(dir.join("sensors.csv"), "sensor,x,y\nL1,0.2,0.2\nL2,3.8,0.2\nL3,0.2,1.8\nL4,3.8,1.8\n")
        .unwrap();
    std::fs::create_dir_all(dir.join("logs")).unwrap();
    for (file, loggers) in [("house4_east.csv", ["L1", "L2"]), ("house4_west.csv", ["L3", "L4"])] {
        let mut t = String::from("Timestamp,Logger,Temp,RH,PAR\n");
        for (j, l) in loggers.iter().enumerate() {
            for s in 0..(7 * 144) {
                let h = (s % 144) as f64 / 6.0;
                let temp =
                    15.0 + 6.0 * ((h - 9.0) / 24.0 * std::f64::consts::TAU).sin() + 0.8 * j as f64 + rnd();
                let rh = 60.0 + 10.0 * rnd();
                let par = if (6.0..20.0).contains(&h) {
                    400.0 * ((h - 6.0) / 14.0 * std::f64::consts::PI).sin() + 20.0 * rnd()
                } else {
                    0.0
                };
                t.push_str(&format!(
                    "2026-03-{:02} {:02}:{:02}:00,{l},{temp:.1},{rh:.0},{par:.0}\n",
                    1 + s / 144,
                    (s % 144) / 6,
                    (s % 6) * 10
                ));
            }
        }
        std::fs::write(dir.join("logs").join(file), t).unwrap();
    }
}

#[test]
fn init_then_check_passes_on_the_templates_own_example_files() {
    let d = tempfile::tempdir().unwrap();
    let (code, out, err) = run(&["init", d.path().to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("potclim run"), "the closing advice names run: {out}");
    let text = std::fs::read_to_string(d.path().join("study.toml")).unwrap();
    assert!(text.contains("\n[[indicator]]\n") && text.contains("\n# [[logs]]\n"), "{text}");
    assert!(text.contains("potclim run study.toml"), "{text}");
    write_template_example(d.path());
    let study = d.path().join("study.toml");
    let (code, out, err) = run(&["check", study.to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("ok: every input is readable"), "{out}");
    assert!(out.contains("pots: 24") && out.contains("4 in the sensor table, 4 with readings"), "{out}");
    assert!(out.contains("drivers: night_cold_hours (indicator)"), "{out}");
    assert!(out.contains("reference levels") && out.contains("accession = A1"), "{out}");
    // ... and `run` then goes through to the report (a second or so).
    let (code, out, err) = run(&["run", study.to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("\nverdict: ") && out.contains("chosen model: "), "{out}");
    assert!(d.path().join("results").join("report.html").is_file(), "{out}");
    first_screen_agrees_with_summary(&d.path().join("results"));
    // A fifth logger that never logged and a door: the maps grey the one and
    // draw the other, and each logger carries its own value.
    std::fs::write(
        d.path().join("sensors.csv"),
        "sensor,x,y\nL1,0.2,0.2\nL2,3.8,0.2\nL3,0.2,1.8\nL4,3.8,1.8\nL5,2.0,1.0\n",
    )
    .unwrap();
    let mut text = std::fs::read_to_string(&study).unwrap();
    text.push_str("\n[[openings]]\nname = \"door\"\nfrom = [0.0, 0.5]\nto = [0.0, 1.5]\n");
    std::fs::write(&study, text).unwrap();
    let (code, out, err) = run(&["run", study.to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    maps_draw_openings_and_loggers(&d.path().join("results"));
}

/// The report's first screen on the four-logger example: the plain lines
/// carry summary.json's numbers, the answer box warns (four loggers cannot
/// map the cold hours well enough), no backtick reaches the page as text,
/// and "what next" names the pot with the largest kriging SE.
fn first_screen_agrees_with_summary(results: &std::path::Path) {
    let html = std::fs::read_to_string(results.join("report.html")).unwrap();
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(results.join("summary.json")).unwrap()).unwrap();
    let h = &summary["headline"];
    let e = &h["effect"];
    let num = |v: &serde_json::Value| v.as_f64().unwrap();
    let answer =
        &html[html.find("<div class=\"answer\">").unwrap()..html.find("<dl class=\"words\">").unwrap()];
    // One format per quantity: three significant digits of the driver's
    // spread for its values, of the interval's width for the effect.
    let decimals = |r: f64| (2 - r.abs().log10().floor() as i32).clamp(0, 6) as usize;
    let (spread, width) = (num(&e["high"]) - num(&e["low"]), num(&e["ci_high"]) - num(&e["ci_low"]));
    let (dx, dy) = (decimals(spread), decimals(width));
    for (v, d) in [(spread, dx), (num(&e["low"]), dx), (num(&e["high"]), dx), (num(&e["effect"]).abs(), dy)] {
        let s = format!("{v:.d$}");
        assert!(answer.contains(&s), "{s} not in {answer}");
    }
    // The quote says whether it carries the map's uncertainty: on four
    // loggers the imputation chain can collapse (map SE above the driver's
    // spread), its pooled values are then left empty and the plug-in
    // interval is quoted as such.
    let carries = if e["includes_mapping"].as_bool().unwrap() {
        "which includes the uncertainty"
    } else {
        "treating the driver's values as exact"
    };
    let quote = format!(
        "a change of {:.dy$} cm (95 % interval {:.dy$} to {:.dy$} cm), {carries}",
        num(&e["effect"]),
        num(&e["ci_low"]),
        num(&e["ci_high"])
    );
    assert!(answer.contains(&quote), "{quote} not in {answer}");
    let c = &h["certainty"];
    assert!(
        answer.contains(&format!("carry {:.0} % of the Akaike weight", 100.0 * num(&c["kind_weight"]))),
        "{answer}"
    );
    // Akaike weights from comparison.csv: the kind's weights sum as stated.
    let csv = std::fs::read_to_string(results.join("comparison.csv")).unwrap();
    let w: f64 = csv
        .lines()
        .skip(1)
        .map(|l| l.split(',').collect::<Vec<_>>())
        .filter(|f| f[1] == "night_cold_hours" && f[2] == "none")
        .map(|f| f[9].parse::<f64>().unwrap())
        .sum();
    assert!((w - num(&c["kind_weight"])).abs() < 1e-12, "{w} {c}");
    assert!((num(&c["evidence_ratio"]) - (num(&c["other_delta"]) / 2.0).exp()).abs() < 1e-9, "{c}");
    // Four loggers: the map's SE is about as large as the driver's spread.
    assert!(num(&e["map_se"]) >= potclim::model::verdict::WEAK_MAP_RATIO * num(&e["driver_sd"]), "{e}");
    assert!(answer.contains("Less sure than it looks") && answer.contains("is uncertain"), "{answer}");
    assert!(!answer.contains('`'), "backticks printed as text: {answer}");
    let pot = h["next_logger"]["pot"].as_str().unwrap();
    // ... the pot with the largest kriging SE in the mapping stage's own table.
    let cov = std::fs::read_to_string(results.join("pot_covariates.csv")).unwrap();
    let head: Vec<&str> = cov.lines().next().unwrap().split(',').collect();
    let j = head.iter().position(|c| *c == "night_cold_hours_se").unwrap();
    let largest = cov
        .lines()
        .skip(1)
        .map(|l| l.split(',').collect::<Vec<_>>())
        .max_by(|a, b| a[j].parse::<f64>().unwrap().total_cmp(&b[j].parse::<f64>().unwrap()))
        .unwrap();
    assert_eq!(largest[0], pot);
    assert!(html.contains(&format!("An extra logger would cut the map's error most at pot {pot}")), "{html}");
    assert!(!html.contains(">-0.0<") && !html.contains(" -0.00 "), "negative zero on the page");
}

/// Every indicator map draws the door and each logger with its own value
/// (sensor_indicators.csv); the silent logger is greyed out and named.
fn maps_draw_openings_and_loggers(results: &std::path::Path) {
    use potclim::report::html::sig;
    let html = std::fs::read_to_string(results.join("report.html")).unwrap();
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(results.join("summary.json")).unwrap()).unwrap();
    assert!(summary["headline"]["blocking"].as_str().unwrap().contains("distance to the door"), "{summary}");
    let figure = |id: &str| {
        let i = html.find(&format!("id=\"{id}\"")).unwrap_or_else(|| panic!("no figure {id}"));
        html[i..i + html[i..].find("</svg>").unwrap()].to_string()
    };
    let svg = figure("fig-indicator-night-cold-hours");
    for s in [&svg, &figure("fig-indicator-night-cold-hours-se")] {
        assert!(s.contains("\ndoor\n"), "no door on the map");
        assert!(s.contains("\nL5 (no readings)\n"), "silent logger not named on the map");
    }
    let ind = std::fs::read_to_string(results.join("sensor_indicators.csv")).unwrap();
    for l in ind.lines().skip(1) {
        let f: Vec<&str> = l.split(',').collect();
        let label = format!("\n{} {}\n", f[0], sig(f[1].parse::<f64>().unwrap(), 3));
        assert!(svg.contains(&label), "{label} not on the map");
    }
}

/// A lamp-lit growth room, as a new user meets it: the lamps hold 400 µmol
/// m⁻² s⁻¹ from 06:00 to 18:00 and the exports are read by `init --logs`.
/// The constant light is a lamp period, not a stuck sensor, so `check` says
/// ok and `run` reaches a verdict; with `[qc] stuck_skip_lamps = false` the
/// light is flagged, and `check` names the cause of the night indicator's
/// refusal (day and night unknown) with the clock rule as the hint, instead
/// of a coverage threshold.
#[test]
fn lamp_lit_room_from_exports_to_verdict() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    write_template_example(dir);
    for (file, loggers) in [("house4_east.csv", ["L1", "L2"]), ("house4_west.csv", ["L3", "L4"])] {
        let mut t = String::from("Timestamp,Logger,Temp,RH,PAR\n");
        for s in 0..(7 * 144) {
            for (j, l) in loggers.iter().enumerate() {
                let h = (s % 144) as f64 / 6.0;
                let lamps = (6.0..18.0).contains(&h);
                let wobble = ((s * 7 + j * 3) % 11) as f64 / 20.0;
                let temp = if lamps { 21.0 } else { 13.0 - 2.0 * j as f64 } + wobble;
                let par = if lamps { 400 } else { 0 };
                t.push_str(&format!(
                    "2026-03-{:02} {:02}:{:02}:00,{l},{temp:.1},{:.0},{par}\n",
                    1 + s / 144,
                    (s % 144) / 6,
                    (s % 6) * 10,
                    60.0 + 10.0 * wobble
                ));
            }
        }
        std::fs::write(dir.join("logs").join(file), t).unwrap();
    }
    let glob = format!("{}/logs/*.csv", dir.display());
    let (code, out, err) = run(&["init", dir.to_str().unwrap(), "--logs", &glob]);
    assert_eq!(code, 0, "{out}{err}");
    let study = dir.join("study.toml");
    let (code, out, err) = run(&["check", study.to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("ok: every input is readable"), "{out}");
    let (code, out, err) = run(&["run", study.to_str().unwrap()]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("\nverdict: "), "{out}");
    let summary = std::fs::read_to_string(dir.join("results/qc_summary.csv")).unwrap();
    assert!(summary.lines().skip(1).all(|l| l.split(',').nth(3) == Some("0")), "nothing flagged: {summary}");
    // The same files with the lamp rule off.
    let text = std::fs::read_to_string(&study).unwrap();
    std::fs::write(&study, format!("{text}\n[qc]\nstuck_skip_lamps = false\n")).unwrap();
    let (code, out, err) = run(&["check", study.to_str().unwrap()]);
    assert_eq!(code, 1, "{out}{err}");
    assert!(
        err.contains("day and night are unknown at 50 %") && err.contains("day_rule = \"clock\""),
        "{err}"
    );
    assert!(!out.contains("ok: every input"), "{out}");
}
