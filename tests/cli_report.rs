//! `potclim report STUDY` through the binary: redraws report.html from the
//! report_data.json of an output folder, and fails clearly without it.

use std::path::Path;
use std::process::Command;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_potclim"))
}

fn study(dir: &Path) -> std::path::PathBuf {
    let p = dir.join("study.toml");
    std::fs::write(
        &p,
        "[study]\ntitle = \"Report test\"\ntimezone = \"Europe/Berlin\"\noutput = \"out\"\n\n\
         [pots]\nfile = \"pots.csv\"\nid = \"pot\"\nx = \"x\"\ny = \"y\"\n",
    )
    .unwrap();
    p
}

#[test]
fn redraws_the_page_from_report_data() {
    let d = tempfile::tempdir().unwrap();
    let s = study(d.path());
    let out = d.path().join("out");
    std::fs::create_dir_all(&out).unwrap();
    let mut data = potclim::report::sample::sample_report();
    data.layout.as_mut().unwrap().sensors[1].id = "<script>alert(1)</script>".into();
    std::fs::write(out.join("report_data.json"), serde_json::to_string(&data).unwrap()).unwrap();
    let o = bin().arg("report").arg(&s).output().unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let page = std::fs::read_to_string(out.join("report.html")).unwrap();
    for id in ["verdict", "layout", "climate", "spatial", "models", "means", "provenance"] {
        assert!(page.contains(&format!("<section id=\"{id}\">")), "{id}");
    }
    assert!(page.contains("&lt;script&gt;alert(1)&lt;/script&gt;"));
    assert!(!page.contains("<script"));
    potclim::report::xml::check_well_formed(&page).unwrap();
    // Nothing but the page and the data is left in the output folder.
    let mut names: Vec<String> = std::fs::read_dir(&out)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    assert_eq!(names, ["report.html", "report_data.json"]);
}

#[test]
fn missing_report_data_names_the_file_and_the_command() {
    let d = tempfile::tempdir().unwrap();
    let s = study(d.path());
    let o = bin().arg("report").arg(&s).output().unwrap();
    assert_eq!(o.status.code(), Some(1));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("report_data.json") && err.contains("potclim run"), "{err}");
    assert!(!d.path().join("out/report.html").exists());
}

#[test]
fn bad_report_data_gives_line_and_column() {
    let d = tempfile::tempdir().unwrap();
    let s = study(d.path());
    std::fs::create_dir_all(d.path().join("out")).unwrap();
    std::fs::write(d.path().join("out/report_data.json"), "{\n  \"title\": \"x\",\n  \"verdict\": 7\n}\n")
        .unwrap();
    let o = bin().arg("report").arg(&s).output().unwrap();
    assert_eq!(o.status.code(), Some(1));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("report_data.json:3:"), "{err}");
    assert!(err.contains("hint:"), "{err}");
    assert!(!d.path().join("out/report.html").exists());
}
