//! Write the invented sample report (`potclim::report::sample`) so the page
//! can be looked at in a browser:
//!
//! ```sh
//! cargo run --example report_sample -- /tmp/sample-out
//! ```
//!
//! writes `report.html` and `report_data.json` into the given folder.

use potclim::report::{render_html, sample::sample_report};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let dir = std::env::args().nth(1).ok_or("usage: report_sample OUTPUT_FOLDER")?;
    let dir = std::path::Path::new(&dir);
    std::fs::create_dir_all(dir)?;
    let data = sample_report();
    std::fs::write(dir.join("report.html"), render_html(&data))?;
    std::fs::write(dir.join("report_data.json"), serde_json::to_string_pretty(&data)?)?;
    println!("wrote {}", dir.join("report.html").display());
    Ok(())
}
