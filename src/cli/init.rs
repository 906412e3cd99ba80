//! `potclim init [DIR]`: write a commented study-file template.

use anyhow::{Context, bail};
use std::path::PathBuf;

/// The template: every key of the input stage, commented.
pub const TEMPLATE: &str = include_str!("study_template.toml");

/// The long help of `potclim init`.
pub const HELP: &str = "Write study.toml, a commented template of the study file, into DIR (default: the current folder; created if missing).

The template describes a small example study (pots.csv, sensors.csv, logs/house4_*.csv, one indicator and a trait model) and passes `potclim check` as soon as such files exist. Edit it to name your pot table, sensor table, logger exports, indicators and trait, then run `potclim check study.toml` until it says ok, and `potclim run study.toml` for every table and the report. Every key is documented in docs/study-file.md; README.md walks through a first study.

An existing study.toml is never overwritten unless --force is given.

With --logs GLOB..., each logger export matched is read (its first lines and a sample of rows from its start and end) and the template's [[logs]] blocks are replaced by blocks written for those files: delimiter, decimal mark, preamble and header lines, time column(s) and pattern, time zone, sensor id, channel columns and units, or a recurring layout. Files of one format share one block. Every guess carries a comment saying what it was read from; what the files cannot decide (day-first or month-first dates, a unit with no header word and an ambiguous range, the light source of lux, no time zone anywhere) is written as commented choices and listed on the screen. A file that matches no format is named with the lines read and what was not recognised.";

/// Arguments of `potclim init`.
#[derive(Debug, clap::Args)]
pub struct InitArgs {
    /// Folder to write study.toml into.
    #[arg(value_name = "DIR", default_value = ".")]
    pub dir: PathBuf,
    /// Overwrite an existing study.toml.
    #[arg(long)]
    pub force: bool,
    /// Logger exports (files or glob patterns) to write the [[logs]] blocks from.
    #[arg(long, value_name = "GLOB", num_args = 1..)]
    pub logs: Vec<String>,
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
    let text = if a.logs.is_empty() { TEMPLATE.to_string() } else { with_detected_logs(&a.logs, &a.dir)? };
    std::fs::write(&path, text).with_context(|| format!("cannot write {}", path.display()))?;
    outln!("wrote {}", path.display());
    outln!(
        "next: edit it to name your files, columns, indicators and trait; then `potclim check {0}` until it says ok, and `potclim run {0}` for the report",
        path.display()
    );
    Ok(())
}

/// Expand the `--logs` patterns (relative to the current folder) into files.
pub(crate) fn expand(patterns: &[String]) -> anyhow::Result<Vec<PathBuf>> {
    let mut files = Vec::new();
    for p in patterns {
        let mut n = 0;
        for f in glob::glob(p).with_context(|| format!("`{p}` is not a valid glob pattern"))? {
            let f = f.with_context(|| format!("while listing `{p}`"))?;
            if f.is_file() {
                files.push(f);
                n += 1;
            }
        }
        if n == 0 {
            bail!(
                "`{p}` matches no file (hint: patterns are relative to the current folder; quote them so the shell passes them as they are)"
            );
        }
    }
    files.sort();
    files.dedup();
    Ok(files)
}

/// Print what detection could not decide and the files it could not read.
pub(crate) fn print_detection(
    groups: &[crate::io::detect::Group],
    errors: &[crate::io::IoError],
) -> anyhow::Result<()> {
    let files: usize = groups.iter().map(|g| g.files.len()).sum();
    outln!("detected {} block(s) for {files} file(s)", groups.len());
    for (i, g) in groups.iter().enumerate() {
        let layout = g.guess.layout.map(|l| format!(", layout {}", l.name())).unwrap_or_default();
        outln!("  block {}: {} file(s){layout}", i + 1, g.files.len());
        for u in &g.undecided {
            outln!("    to decide: {u}");
        }
    }
    for e in errors {
        outln!("not recognised: {e:#}");
    }
    Ok(())
}

/// The template with its `[[logs]]` blocks replaced by blocks detected from
/// the files of `patterns`.
fn with_detected_logs(patterns: &[String], dir: &std::path::Path) -> anyhow::Result<String> {
    let files = expand(patterns)?;
    let (blocks, groups, errors) = crate::io::detect::suggest(&files, dir);
    print_detection(&groups, &errors)?;
    if groups.is_empty() {
        bail!("no file given to --logs was recognised; nothing written");
    }
    Ok(replace_logs(TEMPLATE, &blocks))
}

/// Replace the `[[logs]]` blocks of a study-file text (from the first
/// `[[logs]]` line to the last key line before the next section, commented
/// or not) with `blocks`; appended at the end when there is none.
pub(crate) fn replace_logs(template: &str, blocks: &str) -> String {
    let lines: Vec<&str> = template.lines().collect();
    let Some(start) = lines.iter().position(|l| l.trim_start().starts_with("[[logs]]")) else {
        return format!("{template}\n{blocks}");
    };
    let mut end = start;
    for (i, l) in lines.iter().enumerate().skip(start + 1) {
        let t = l.trim_start();
        let header = t.starts_with('[') || t.trim_start_matches('#').trim_start().starts_with('[');
        if header && !t.starts_with("[[logs]]") && !t.starts_with("[logs.") {
            break;
        }
        if !t.is_empty() && !t.starts_with('#') {
            end = i;
        }
    }
    let mut out: Vec<String> = lines[..start].iter().map(|s| s.to_string()).collect();
    out.push(blocks.trim_end().to_string());
    out.extend(lines[end + 1..].iter().map(|s| s.to_string()));
    out.join("\n") + "\n"
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

    #[test]
    fn detected_blocks_replace_the_template_blocks_only() {
        let block = "[[logs]]\nfiles = [\"a/*.csv\"]\ntime = \"t\"\ntime_format = \"unix\"\nsensor_from = \"file_stem\"\n[logs.columns]\ntemperature = { column = \"c\", unit = \"degC\" }\n";
        let text = replace_logs(TEMPLATE, block);
        let st =
            crate::io::study::Study::from_source(std::path::Path::new("x/study.toml"), text.clone()).unwrap();
        assert_eq!(st.spec.logs.len(), 1, "{text}");
        assert_eq!(st.spec.logs[0].files, ["a/*.csv"]);
        assert!(text.contains("[pots]") && text.contains("# [qc]") && text.contains("[sensors]"));
    }
}
