//! `potclim fit` through the binary: outputs and bad input. The numbers
//! themselves are checked against outside references in the unit tests of
//! src/model and src/spatial/likelihood.rs; here the data are a small
//! invented bench layout.

use std::path::Path;
use std::process::Command;

fn pots_csv(dup: bool, trait_cell: impl Fn(usize) -> String) -> String {
    let mut s = String::from("pot,x,y,accession,regime,substrate_temp,height\n");
    for i in 0..48 {
        let (col, row) = (i % 8, i / 8);
        let x = if dup && i == 1 { 0.0 } else { col as f64 * 0.4 };
        let y = row as f64 * 0.5;
        let acc = ["k1", "k2", "k3"][i % 3];
        let reg = ["shade", "full"][(i / 3) % 2];
        let temp = 18.0 + 0.3 * col as f64 + ((i * 7) % 5) as f64 * 0.1;
        let _ = (x, y);
        s.push_str(&format!("P{i:02},{x},{y},{acc},{reg},{temp},{}\n", trait_cell(i)));
    }
    s
}

fn height(i: usize) -> String {
    let col = (i % 8) as f64;
    let noise = (((i * 37 + 11) % 17) as f64 - 8.0) * 0.15;
    let acc = [0.0, 1.2, -0.8][i % 3];
    let reg = [0.0, 2.0][(i / 3) % 2];
    format!("{:.3}", 25.0 + acc + reg + 0.6 * (col / 2.0).sin() + noise)
}

fn study(dir: &Path, model: &str, pots: &str) -> std::path::PathBuf {
    std::fs::write(dir.join("pots.csv"), pots).unwrap();
    let s = format!(
        "[study]\ntitle = \"bench test\"\ntimezone = \"UTC\"\noutput = \"out\"\n\n[pots]\nfile = \"pots.csv\"\nid = \"pot\"\nx = \"x\"\ny = \"y\"\n\n[model]\n{model}\n"
    );
    let p = dir.join("study.toml");
    std::fs::write(&p, s).unwrap();
    p
}

fn run(study: &Path) -> (bool, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_potclim")).arg("fit").arg(study).output().unwrap();
    (
        out.status.success(),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

const MODEL: &str = "trait = \"height\"\nfactors = [\"accession\", \"regime\"]\ninteractions = [[\"accession\", \"regime\"]]\ndrivers = [\"substrate_temp\"]\ncorrelations = [\"exponential\", \"spherical\"]\nnugget = true";

#[test]
fn fit_writes_every_table() {
    let dir = tempfile::tempdir().unwrap();
    let p = study(dir.path(), MODEL, &pots_csv(false, height));
    let (ok, stdout, stderr) = run(&p);
    assert!(ok, "{stderr}");
    assert!(
        stdout
            .contains("analysis of variance: each term after all the others, sum-to-zero coding (type III)"),
        "{stdout}"
    );
    // The screen's own wording: column labels, the remainder row, the summary lines, the reference levels.
    assert!(stdout.contains("pots per combination: accession down, regime across"), "{stdout}");
    let head = stdout.lines().find(|l| l.starts_with("source ")).expect("anova header");
    let labels: Vec<&str> = head.split("  ").map(str::trim).filter(|s| !s.is_empty()).collect();
    assert_eq!(
        labels,
        ["source", "sum of squares", "deg. fr.", "mean square", "F ratio", "p-value"],
        "{head}"
    );
    assert!(stdout.lines().any(|l| l.starts_with("remainder ")), "{stdout}");
    assert!(stdout.contains("spread left unexplained (standard deviation): "), "{stdout}");
    assert!(stdout.contains("share of the trait's variance explained: "), "{stdout}");
    assert!(stdout.lines().any(|l| l.starts_with("baseline ")), "{stdout}");
    assert!(stdout.lines().any(|l| l.starts_with("accession=k2 & regime=full ")), "{stdout}");
    // Reference levels: those of the first pot in the file (P00: k1, shade).
    assert!(stdout.contains("reference levels (first appearance among the analysed pots, line 2): accession = k1, regime = shade"), "{stdout}");
    for old in ["(intercept)", "[k2]", "residuals ", "sum sq ", "mean sq ", "adjusted R2", "residual SE"] {
        assert!(!stdout.contains(old), "`{old}` in: {stdout}");
    }
    let out = dir.path().join("out");
    let models = std::fs::read_to_string(out.join("models.csv")).unwrap();
    let mut lines = models.lines();
    assert_eq!(
        lines.next().unwrap(),
        "model,trait,drivers,correlation,nugget,method,loglik,aic,bic,n_params,range,partial_sill,nugget_variance,converged,row_correlation,column_correlation,direction_degrees,range_ratio"
    );
    let rows: Vec<Vec<&str>> = lines.map(|l| l.split(',').collect()).collect();
    // independent + 2 families x (with, without nugget), each by ML and REML
    assert_eq!(rows.len(), 2 + 2 * 2 * 2);
    assert!(rows.iter().all(|r| r[2] == "substrate_temp" && r[1] == "height"));
    assert_eq!(rows[0][3], "none");
    assert_eq!(rows[0][9], "8"); // 7 coefficients + sigma2
    let spherical_nugget: Vec<_> = rows.iter().filter(|r| r[3] == "spherical" && r[4] == "true").collect();
    assert_eq!(spherical_nugget.len(), 2);
    assert!(spherical_nugget.iter().all(|r| r[9] == "10"));
    // AIC = -2 loglik + 2k on every row
    for r in &rows {
        let (ll, aic, k): (f64, f64, f64) =
            (r[6].parse().unwrap(), r[7].parse().unwrap(), r[9].parse().unwrap());
        assert!((aic - (-2.0 * ll + 2.0 * k)).abs() < 1e-9);
    }
    let residuals = std::fs::read_to_string(out.join("residuals.csv")).unwrap();
    assert_eq!(residuals.lines().count(), 1 + 48 * rows.len());
    let anova = std::fs::read_to_string(out.join("anova.csv")).unwrap();
    assert_eq!(
        anova.lines().next().unwrap(),
        "model,method,test,term,df,df_remainder,sum_of_squares,mean_square,f_ratio,p_value"
    );
    assert!(anova.contains("ols,OLS,type_I,accession:regime,2,"));
    assert!(anova.contains("ols,OLS,type_I,remainder,41,,"), "{anova}");
    assert!(anova.contains("ols,OLS,type_III,baseline,1,41,"), "{anova}");
    assert!(anova.contains(",REML,wald,substrate_temp,1,41,"));
    let coef = std::fs::read_to_string(out.join("coefficients.csv")).unwrap();
    assert!(coef.contains("ols,OLS,accession=k2 & regime=full,"), "{coef}");
    assert!(coef.contains("ols,OLS,baseline,"), "{coef}");
    assert!(out.join("diagnostics.csv").exists());
    let rv = std::fs::read_to_string(out.join("residual_variograms.csv")).unwrap();
    assert!(rv.starts_with("variable,direction,"), "{rv}");
    assert!(rv.lines().any(|l| l.starts_with("independent ML,")), "{rv}");
    // no staging folder left behind
    assert!(
        std::fs::read_dir(&out).unwrap().all(|e| !e.unwrap().file_name().to_string_lossy().starts_with('.'))
    );
}

#[test]
fn drivers_from_mapped_covariates() {
    let dir = tempfile::tempdir().unwrap();
    let model =
        "trait = \"height\"\nfactors = [\"accession\"]\ndrivers = [\"cold_hours\"]\ncorrelations = []";
    let p = study(dir.path(), model, &pots_csv(false, height));
    // without the mapping output: a clear list of what is available
    let (ok, _, stderr) = run(&p);
    assert!(!ok);
    assert!(stderr.contains("driver `cold_hours`") && stderr.contains("substrate_temp"), "{stderr}");
    std::fs::create_dir_all(dir.path().join("out")).unwrap();
    let mut cov = String::from("pot,cold_hours,cold_hours_se,distance_door\n");
    for i in 0..48 {
        cov.push_str(&format!(
            "P{i:02},{},{},{}\n",
            10.0 + (i % 8) as f64 * 0.7 + (i % 5) as f64 * 0.05,
            0.3,
            i as f64 * 0.1
        ));
    }
    std::fs::write(dir.path().join("out/pot_covariates.csv"), cov).unwrap();
    let (ok, _, stderr) = run(&p);
    assert!(ok, "{stderr}");
    let models = std::fs::read_to_string(dir.path().join("out/models.csv")).unwrap();
    assert!(models.lines().nth(1).unwrap().contains(",height,cold_hours,none,false,ML,"));
}

fn fails_with(model: &str, pots: &str, needles: &[&str]) {
    let dir = tempfile::tempdir().unwrap();
    let p = study(dir.path(), model, pots);
    let (ok, _, stderr) = run(&p);
    assert!(!ok, "expected failure");
    for n in needles {
        assert!(stderr.contains(n), "`{n}` not in: {stderr}");
    }
    assert!(!stderr.contains("panicked"), "{stderr}");
    assert!(!dir.path().join("out/models.csv").exists());
}

#[test]
fn trait_with_text_is_refused_with_its_line() {
    fails_with(
        MODEL,
        &pots_csv(false, |i| if i == 5 { "tall".into() } else { height(i) }),
        &["pots.csv:7", "height", "tall"],
    );
}

#[test]
fn all_missing_trait_is_refused() {
    fails_with(MODEL, &pots_csv(false, |_| "NA".into()), &["no values", "height"]);
}

#[test]
fn factor_with_one_level_is_refused() {
    let pots = pots_csv(false, height).replace(",k2,", ",k1,").replace(",k3,", ",k1,");
    fails_with(MODEL, &pots, &["factor `accession` has a single level", "k1"]);
}

#[test]
fn more_parameters_than_pots_is_refused() {
    let pots: String = pots_csv(false, height).lines().take(7).map(|l| format!("{l}\n")).collect();
    let model = "trait = \"height\"\nfactors = [\"accession\", \"regime\"]\ninteractions = [[\"accession\", \"regime\"]]";
    fails_with(model, &pots, &["6 coefficients but only 6 pots"]);
}

#[test]
fn duplicate_positions_without_nugget_name_the_pots_and_offer_the_nugget() {
    let model =
        "trait = \"height\"\nfactors = [\"accession\"]\ncorrelations = [\"exponential\"]\nnugget = false";
    fails_with(model, &pots_csv(true, height), &["`P00` and `P01`", "nugget = true"]);
    // with the nugget allowed, the fit runs and says what it skipped
    let dir = tempfile::tempdir().unwrap();
    let p = study(dir.path(), &model.replace("nugget = false", "nugget = true"), &pots_csv(true, height));
    let (ok, stdout, stderr) = run(&p);
    assert!(ok, "{stderr}");
    assert!(stdout.contains("share a position"), "{stdout}");
}

#[test]
fn unknown_model_key_is_refused_with_its_position() {
    fails_with(
        "trait = \"height\"\nfactor = [\"accession\"]",
        &pots_csv(false, height),
        &["study.toml:", "factor"],
    );
}

#[test]
fn single_factor_count_table_is_worded_as_levels() {
    let dir = tempfile::tempdir().unwrap();
    let model =
        "trait = \"height\"\nfactors = [\"accession\"]\ncorrelations = [\"exponential\"]\nnugget = false";
    let p = study(dir.path(), model, &pots_csv(false, height));
    let (ok, stdout, stderr) = run(&p);
    assert!(ok, "{stderr}");
    assert!(stdout.contains("pots per level of accession\n"), "{stdout}");
    assert!(!stdout.contains(" x count"), "{stdout}");
    let k1 = stdout.lines().find(|l| l.trim_start().starts_with("k1 ")).expect("row of k1");
    assert_eq!(k1.split_whitespace().collect::<Vec<_>>(), ["k1", "16"]);
}

#[test]
fn fit_into_a_closed_pipe_ends_quietly_with_status_0() {
    use std::process::Stdio;
    let dir = tempfile::tempdir().unwrap();
    let p = study(dir.path(), MODEL, &pots_csv(false, height));
    // Standard output is a pipe whose reader is already gone (as when `head`
    // has read its lines and exited): every write fails with a broken pipe.
    let (reader, writer) = std::io::pipe().unwrap();
    drop(reader);
    let o = Command::new(env!("CARGO_BIN_EXE_potclim"))
        .arg("fit")
        .arg(&p)
        .stdout(Stdio::from(writer))
        .stderr(Stdio::piped())
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(0), "{stderr}");
    assert!(stderr.is_empty(), "{stderr}");
}
