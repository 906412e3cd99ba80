//! Tests of [`super`]: escaping and number formats, a well-formed page with every
//! section and figure, notes for missing stages, the report data round-tripped
//! through JSON, the snapshot of a small report, and the snapshot helpers that the
//! other pages' tests use.

use super::super::sample::sample_report;
use super::super::xml::check_well_formed;
use super::*;

const SECTIONS: [&str; 7] = ["verdict", "layout", "climate", "spatial", "models", "means", "provenance"];

#[test]
fn escape_covers_markup_and_quotes() {
    assert_eq!(escape(r#"<a href="x">'&'</a>"#), "&lt;a href=&quot;x&quot;&gt;&#39;&amp;&#39;&lt;/a&gt;");
    assert_eq!(escape("°C µmol m⁻²"), "°C µmol m⁻²");
}

#[test]
fn numbers_have_fixed_precision() {
    assert_eq!(sig(-0.45123, 4), "-0.4512");
    assert_eq!(sig(512.6, 4), "512.6");
    assert_eq!(sig(0.0001234, 3), "1.23e-4");
    assert_eq!(sig(1234567.0, 3), "1.23e6");
    assert_eq!(sig(0.0, 3), "0");
    assert_eq!(sig(f64::NAN, 3), "–");
    assert_eq!(fixed(2.0 / 3.0, 2), "0.67");
    assert_eq!(p_value(Some(0.0004)), "&lt; 0.001");
    assert_eq!(p_value(Some(0.04567)), "0.046");
    assert_eq!(p_value(None), "–");
    assert_eq!(df(83.0), "83");
    assert_eq!(df(12.345), "12.35");
}

/// A sensor named like a script tag reaches the page as text only: in the
/// logger table (our escape) and in the SVG labels (plotters' escape).
#[test]
fn user_strings_never_become_markup() {
    let mut d = sample_report();
    let evil = "<script>alert(1)</script>";
    d.layout.as_mut().unwrap().sensors[0].id = evil.into();
    d.title = format!("Trial & {evil}");
    d.layout.as_mut().unwrap().trait_name = "\"height\" <cm>".into();
    let page = render_html(&d);
    assert!(!page.to_lowercase().contains("<script"), "a script tag reached the page");
    let escaped = "&lt;script&gt;alert(1)&lt;/script&gt;";
    assert!(page.matches(escaped).count() >= 3, "expected the name in table, title and maps");
    assert!(page.contains("<td>&lt;script&gt;alert(1)&lt;/script&gt;</td>"));
    check_well_formed(&page).unwrap();
}

#[test]
fn the_page_is_well_formed_with_every_section() {
    let page = render_html(&sample_report());
    check_well_formed(&page).unwrap();
    let mut last = 0;
    for id in SECTIONS {
        let at = page.find(&format!("<section id=\"{id}\">")).unwrap_or_else(|| panic!("no section {id}"));
        assert!(at > last, "section {id} out of order");
        last = at;
    }
    assert!(!page.contains("class=\"missing\""), "the full sample should have no missing section");
    assert!(!page.contains("http://") || page.matches("http://").all(|_| true));
    // Self-contained: no external references (the only URLs are the SVG namespace).
    for bad in ["<link", "<script", "src=\"", "url("] {
        assert!(!page.contains(bad), "external asset marker {bad}");
    }
}

#[test]
fn every_figure_is_xml_with_title_and_labelled_axes() {
    let mut twice = sample_report();
    let v = twice.variograms[0].clone();
    twice.variograms.push(v);
    let ids: Vec<String> = all_figures(&twice).into_iter().map(|f| f.id).collect();
    assert!(ids.contains(&"variogram-night-cold-hours-2".to_string()), "{ids:?}");
    let figs = all_figures(&sample_report());
    assert_eq!(figs.len(), 10, "{:?}", figs.iter().map(|f| &f.id).collect::<Vec<_>>());
    let mut ids: Vec<&str> = figs.iter().map(|f| f.id.as_str()).collect();
    ids.sort();
    ids.dedup();
    assert_eq!(ids.len(), figs.len(), "figure ids must be unique");
    for f in &figs {
        check_well_formed(&f.svg).unwrap_or_else(|e| panic!("{}: {e}", f.id));
        for s in [&f.title, &f.x_label, &f.y_label] {
            assert!(f.svg.contains(&escape(s)), "{}: {s:?} is not drawn", f.id);
        }
        for l in [&f.x_label, &f.y_label] {
            let unit = l.rsplit_once('(').map(|(_, u)| u.trim_end_matches(')').trim());
            assert!(unit.is_some_and(|u| !u.is_empty()), "{}: axis label {l:?} has no unit", f.id);
        }
    }
}

#[test]
fn missing_stages_leave_a_note_naming_the_command() {
    let page = render_html(&ReportData { title: "Empty".into(), ..ReportData::default() });
    check_well_formed(&page).unwrap();
    for id in SECTIONS {
        assert!(page.contains(&format!("<section id=\"{id}\">")), "{id}");
    }
    assert_eq!(page.matches("class=\"missing\"").count(), 7);
    assert_eq!(page.matches("potclim run STUDY").count(), 7);
}

#[test]
fn report_data_round_trips_through_json() {
    let d = sample_report();
    let text = serde_json::to_string(&d).unwrap();
    let back = super::super::parse_report_data(std::path::Path::new("r.json"), &text).unwrap();
    // serde_json's default float parsing may differ in the last bit, so
    // compare the two documents with a relative tolerance on numbers.
    fn close(a: &serde_json::Value, b: &serde_json::Value) -> bool {
        use serde_json::Value::*;
        match (a, b) {
            (Number(x), Number(y)) => {
                let (x, y) = (x.as_f64().unwrap(), y.as_f64().unwrap());
                (x - y).abs() <= 1e-14 * x.abs().max(y.abs()).max(1.0)
            }
            (Array(x), Array(y)) => x.len() == y.len() && x.iter().zip(y).all(|(p, q)| close(p, q)),
            (Object(x), Object(y)) => {
                x.len() == y.len() && x.iter().all(|(k, v)| y.get(k).is_some_and(|w| close(v, w)))
            }
            _ => a == b,
        }
    }
    let a: serde_json::Value = serde_json::from_str(&text).unwrap();
    let b = serde_json::to_value(&back).unwrap();
    assert!(close(&a, &b), "JSON changed on a round trip");
    assert_eq!(back.title, d.title);
    assert_eq!(back.verdict, d.verdict);
    let err = super::super::parse_report_data(std::path::Path::new("r.json"), "{\n  \"title\": 3\n}")
        .unwrap_err()
        .to_string();
    assert!(err.starts_with("r.json:2:"), "{err}");
}

fn small_report() -> ReportData {
    ReportData {
        title: "Snapshot study".into(),
        compartment: Some(CompartmentSize { length: 4.0, width: 2.0 }),
        verdict: Some(VerdictSection {
            word: "correlation".into(),
            reason: "An unmeasured effect explains it.".into(),
            chosen_model: "base | exponential".into(),
            best_by_aic: Some("base | exponential".into()),
            trait_unit: Some("cm".into()),
            drivers: vec![DriverRow {
                name: "cold".into(),
                unit: Some("h".into()),
                estimate: -0.123456,
                se: 0.0456789,
                estimate_with_mapping_uncertainty: Some(-0.118765),
                se_with_mapping_uncertainty: Some(0.0512345),
                ci_low_with_mapping_uncertainty: Some(-0.2211),
                ci_high_with_mapping_uncertainty: Some(-0.0164),
                ci_low: -0.2130,
                ci_high: -0.0339,
                p_value: Some(0.00712),
                delta_aic: Some(4.56789),
                delta_aic_with_correlation: Some(-1.2345),
                vif: Some(1.0),
                confounded: true,
                small_sample: Some(SmallSampleRow {
                    ci_low: -0.2414,
                    ci_high: -0.0055,
                    p_value: 0.0421,
                    df: 9.3,
                    model: "base+cold | exponential".into(),
                }),
            }],
            cautions: vec!["Two loggers only.".into()],
            ..Default::default()
        }),
        models: Some(ModelsSection {
            comparison: vec![
                ComparisonRow {
                    name: "base".into(),
                    loglik: -20.123456,
                    aic: 46.246912,
                    bic: 48.1,
                    n_params: 3,
                    delta_aic: 3.0,
                    akaike_weight: 0.18242552,
                    ..ComparisonRow::default()
                },
                ComparisonRow {
                    name: "base | exponential".into(),
                    correlation: Some("exponential".into()),
                    nugget: true,
                    loglik: -17.623456,
                    aic: 43.246912,
                    bic: 46.0,
                    n_params: 4,
                    delta_aic: 0.0,
                    akaike_weight: 0.81757448,
                    ..ComparisonRow::default()
                },
            ],
            anova: vec![AnovaTable {
                model: "base".into(),
                kind: None,
                rows: vec![
                    AnovaRow {
                        term: "accession".into(),
                        df: 2.0,
                        sum_sq: Some(10.5),
                        mean_sq: Some(5.25),
                        f: Some(3.27654),
                        p_value: Some(0.0712),
                    },
                    AnovaRow { term: "residual".into(), df: 9.0, sum_sq: Some(15.04), ..AnovaRow::default() },
                ],
            }],
            tie_margin: Some(2.0),
            ..ModelsSection::default()
        }),
        adjusted_means: vec![AdjustedMean {
            factor: "accession".into(),
            level: "A1".into(),
            mean: 10.0,
            se: 0.25,
            plain_mean: 9.5,
            change: 0.5,
        }],
        adjusted_means_unit: Some("cm".into()),
        ..ReportData::default()
    }
}

/// Replace every inline SVG by a marker naming its size, so the snapshot
/// pins the page's text and tables; the figures have their own tests.
pub(crate) fn strip_svgs(page: &str) -> String {
    let mut out = String::new();
    let mut rest = page;
    while let Some(a) = rest.find("<svg") {
        out.push_str(&rest[..a]);
        let end = rest[a..].find("</svg>").expect("closed svg") + a + "</svg>".len();
        let head_end = rest[a..].find('>').unwrap() + a;
        let head = &rest[a..head_end];
        let attr = |k: &str| {
            head.split(&format!("{k}=\"")).nth(1).and_then(|s| s.split('"').next()).unwrap_or("?").to_string()
        };
        out.push_str(&format!("<svg-figure width=\"{}\" height=\"{}\"/>", attr("width"), attr("height")));
        rest = &rest[end..];
    }
    out.push_str(rest);
    out
}

/// Snapshot of a small fixed report. Regenerate after an intended change
/// with `UPDATE_SNAPSHOTS=1 cargo test --lib report::html` and review the diff.
#[test]
fn snapshot_of_a_small_report() {
    check_snapshot("small_report.html", &strip_svgs(&render_html(&small_report())));
}

/// Compare `page` with the snapshot `src/report/snapshots/<file>`
/// (rewritten first when `UPDATE_SNAPSHOTS` is set), showing the first
/// line that differs.
pub(crate) fn check_snapshot(file: &str, page: &str) {
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("src/report/snapshots").join(file);
    if std::env::var_os("UPDATE_SNAPSHOTS").is_some() {
        std::fs::create_dir_all(path.parent().unwrap()).unwrap();
        std::fs::write(&path, page).unwrap();
    }
    let want = std::fs::read_to_string(&path).expect("snapshot missing: run with UPDATE_SNAPSHOTS=1");
    if want != page {
        let line = want.lines().zip(page.lines()).position(|(a, b)| a != b).unwrap_or(0);
        panic!(
            "snapshot differs at line {}:\n  want: {}\n  got:  {}\n(full output:\n{page})",
            line + 1,
            want.lines().nth(line).unwrap_or(""),
            page.lines().nth(line).unwrap_or("")
        );
    }
}
