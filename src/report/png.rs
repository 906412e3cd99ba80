//! PNG export of figures through a headless Chromium: the SVG is wrapped in
//! a one-figure page, the browser takes a screenshot of exactly the figure's
//! size, and the file is checked to be a PNG. No image crate and no system
//! fonts are needed on our side; the browser renders the text.
//!
//! The browser runs with a fresh, temporary profile, no network services and
//! a time limit, and its profile is removed afterwards.

use super::ReportError;
use super::figures::Figure;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// Names tried on `PATH`, in order.
pub const BROWSER_NAMES: [&str; 2] = ["chromium", "chromium-browser"];

/// The first Chromium found on `PATH`.
pub fn find_chromium() -> Option<PathBuf> {
    let path = std::env::var_os("PATH")?;
    std::env::split_paths(&path)
        .flat_map(|dir| BROWSER_NAMES.iter().map(move |n| dir.join(n)))
        .find(|p| p.is_file())
}

/// The Chromium to use, or a [`ReportError::NoBrowser`] with an install hint.
pub fn require_chromium(explicit: Option<&Path>) -> Result<PathBuf, ReportError> {
    if let Some(p) = explicit {
        return if p.is_file() {
            Ok(p.to_path_buf())
        } else {
            Err(ReportError::NoBrowser {
                looked: p.display().to_string(),
                hint: "give the path of a Chromium executable".into(),
            })
        };
    }
    find_chromium().ok_or_else(|| ReportError::NoBrowser {
        looked: format!("{} on PATH", BROWSER_NAMES.join(", ")),
        hint: "install it (Debian/Ubuntu: `apt-get install -y chromium`) or leave out --png".into(),
    })
}

/// The headless flags every run uses: no sandbox (containers), no GPU, no
/// background network services, a fresh profile.
pub fn headless_args(profile: &Path) -> Vec<String> {
    [
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-quic",
        "--no-first-run",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--hide-scrollbars",
    ]
    .iter()
    .map(|s| s.to_string())
    .chain(std::iter::once(format!("--user-data-dir={}", profile.display())))
    .collect()
}

/// Run `browser` with `args`, killing it after `limit`. Returns its exit
/// success and its stderr.
pub fn run_browser(browser: &Path, args: &[String], limit: Duration) -> std::io::Result<(bool, String)> {
    let mut child = Command::new(browser)
        .args(args)
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()?;
    let mut stderr = child.stderr.take();
    let reader = std::thread::spawn(move || {
        let mut s = String::new();
        if let Some(e) = stderr.as_mut() {
            let _ = std::io::Read::read_to_string(e, &mut s);
        }
        s
    });
    let start = Instant::now();
    let status = loop {
        if let Some(st) = child.try_wait()? {
            break Some(st);
        }
        if start.elapsed() > limit {
            let _ = child.kill();
            let _ = child.wait();
            break None;
        }
        std::thread::sleep(Duration::from_millis(50));
    };
    let err = reader.join().unwrap_or_default();
    Ok((status.is_some_and(|s| s.success()), err))
}

/// A fresh scratch folder under the system temp folder.
fn scratch() -> std::io::Result<PathBuf> {
    use std::sync::atomic::{AtomicU64, Ordering};
    static N: AtomicU64 = AtomicU64::new(0);
    let d = std::env::temp_dir().join(format!(
        "potclim-png-{}-{}",
        std::process::id(),
        N.fetch_add(1, Ordering::Relaxed)
    ));
    std::fs::create_dir_all(&d)?;
    Ok(d)
}

/// Write `fig` as a PNG of its own size to `out`.
pub fn figure_png(browser: &Path, fig: &Figure, out: &Path) -> Result<(), ReportError> {
    let dir = scratch().map_err(|source| ReportError::Io { path: std::env::temp_dir(), source })?;
    let result = (|| {
        let page = dir.join("figure.html");
        let html = format!(
            "<!DOCTYPE html><html><head><meta charset=\"utf-8\"/><style>html,body{{margin:0;padding:0;background:#fff;overflow:hidden}}svg{{display:block}}</style></head><body>{}</body></html>",
            fig.svg
        );
        std::fs::write(&page, html).map_err(|source| ReportError::Io { path: page.clone(), source })?;
        let mut args = headless_args(&dir.join("profile"));
        args.push(format!("--screenshot={}", out.display()));
        args.push(format!("--window-size={},{}", fig.width, fig.height));
        args.push(format!("file://{}", page.display()));
        let (ok, err) = run_browser(browser, &args, Duration::from_secs(90))
            .map_err(|source| ReportError::Io { path: browser.to_path_buf(), source })?;
        let bytes = std::fs::read(out).unwrap_or_default();
        if !bytes.starts_with(b"\x89PNG\r\n\x1a\n") {
            let tail: String = err.lines().rev().take(5).collect::<Vec<_>>().join(" | ");
            return Err(ReportError::Png {
                figure: fig.id.clone(),
                message: format!(
                    "the browser {} and wrote no PNG; its last messages: {tail}",
                    if ok { "exited" } else { "failed" }
                ),
            });
        }
        Ok(())
    })();
    let _ = std::fs::remove_dir_all(&dir);
    result
}
