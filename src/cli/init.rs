//! `potclim init [DIR]`: write a commented study-file template.

use anyhow::{Context, bail};
use std::path::PathBuf;

/// The template: every key of the input stage, commented.
pub const TEMPLATE: &str = include_str!("study_template.toml");

/// The long help of `potclim init`.
pub const HELP: &str = "Write study.toml, a commented template of the study file, into DIR (default: the current folder; created if missing).

The template describes a small example study (pots.csv, sensors.csv, logs/house4_*.csv, one indicator and a trait model) and passes `potclim check` as soon as such files exist. Edit it to name your pot table, sensor table, logger exports, indicators and trait, then run `potclim check study.toml` until it says ok, and `potclim run study.toml` for every table and the report. Every key is documented in docs/study-file.md; README.md walks through a first study.

An existing study.toml is never overwritten unless --force is given.";

/// Arguments of `potclim init`.
#[derive(Debug, clap::Args)]
pub struct InitArgs {
    /// Folder to write study.toml into.
    #[arg(value_name = "DIR", default_value = ".")]
    pub dir: PathBuf,
    /// Overwrite an existing study.toml.
    #[arg(long)]
    pub force: bool,
}

/// Run `potclim init`.
pub fn run(a: InitArgs) -> anyhow::Result<()> {
    std::fs::create_dir_all(&a.dir).with_context(|| format!("cannot create folder {}", a.dir.display()))?;
    let path = a.dir.join("study.toml");
    if path.exists() && !a.force {
        bail!(
            "{} already exists (hint: pass --force to overwrite it, or choose another folder)",
            path.display()
        );
    }
    std::fs::write(&path, TEMPLATE).with_context(|| format!("cannot write {}", path.display()))?;
    outln!("wrote {}", path.display());
    outln!(
        "next: edit it to name your files, columns, indicators and trait; then `potclim check {0}` until it says ok, and `potclim run {0}` for the report",
        path.display()
    );
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn template_is_a_valid_study_file() {
        let st =
            crate::io::study::Study::from_source(std::path::Path::new("x/study.toml"), TEMPLATE.to_string());
        let st = st.unwrap();
        assert_eq!(st.spec.logs.len(), 1);
        assert_eq!(st.spec.qc, crate::io::qc::QcSettings::default());
    }
}
