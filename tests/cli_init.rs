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
