//! `potclim report STUDY`: redraw `report.html` from the `report_data.json`
//! that `potclim run` left in the study's output folder, without re-running
//! the analysis. With `--png`, every figure is also written as
//! `figures/<id>.png` through a headless Chromium.

use crate::io::output::StageWriter;
use crate::io::study::Study;
use crate::report::{html, parse_report_data, png};
use anyhow::Context;
use clap::Args;
use std::path::PathBuf;

/// Arguments of `potclim report`.
#[derive(Debug, Args)]
pub struct ReportArgs {
    /// The study file (its `[study].output` folder holds `report_data.json`).
    pub study: PathBuf,
    /// Also write every figure as `figures/<id>.png` (needs Chromium).
    #[arg(long)]
    pub png: bool,
    /// The Chromium executable for `--png` (default: `chromium` on PATH).
    #[arg(long, value_name = "PATH", requires = "png")]
    pub browser: Option<PathBuf>,
}

/// Run `potclim report`.
pub fn run(args: ReportArgs) -> anyhow::Result<()> {
    let study =
        Study::load(&args.study).with_context(|| format!("while reading {}", args.study.display()))?;
    let out = study.output_dir();
    let data_path = out.join("report_data.json");
    let text = std::fs::read_to_string(&data_path).with_context(|| {
        format!(
            "while reading {} (it is written by `potclim run {}`; run that first)",
            data_path.display(),
            args.study.display()
        )
    })?;
    let data = parse_report_data(&data_path, &text)?;
    let browser = if args.png { Some(png::require_chromium(args.browser.as_deref())?) } else { None };
    let mut writer = StageWriter::new(&out, "report")?;
    writer.write("report.html", html::render_html(&data).as_bytes())?;
    let mut n_png = 0;
    if let Some(b) = &browser {
        for fig in html::all_figures(&data) {
            let name = format!("figures/{}.png", fig.id);
            let path = writer.path(&name);
            png::figure_png(b, &fig, &path).with_context(|| format!("while writing {name}"))?;
            n_png += 1;
        }
    }
    let published = writer.commit()?;
    outln!("wrote {}", published[0].display());
    if n_png > 0 {
        outln!("wrote {n_png} figures as PNG in {}", out.join("figures").display());
    }
    Ok(())
}
