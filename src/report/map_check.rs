//! The map checking itself, under each mapped indicator of the climate
//! section: every logger left out in turn and its value mapped from the
//! others (the mapping stage's leave-one-sensor-out check,
//! [`crate::spatial::selfcheck`], carried in [`LoggerCheck`] rows), a
//! sentence on how many loggers the map honours within two standard errors,
//! a warning for each logger it does not, and what the map would say at the
//! logger nearest each opening without that logger. Renders; computes
//! nothing but the count of flagged rows.

use super::data::{IndicatorSurface, LoggerCheck};
use super::html::{decimals_for, escape, fixed, opt};
use std::fmt::Write as _;

/// Append the check of surface `s` to `out` (nothing without checks).
pub fn render(out: &mut String, s: &IndicatorSurface) {
    if s.checks.is_empty() {
        return;
    }
    let unit = if s.unit.is_empty() { String::new() } else { format!(" {}", escape(&s.unit)) };
    // Three significant digits of the loggers' spread, at least one decimal.
    let (lo, hi) = s
        .checks
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), c| (lo.min(c.observed), hi.max(c.observed)));
    let d = decimals_for([hi - lo], 3).max(1);
    let v = |x: f64| format!("{}{unit}", fixed(x, d));
    out.push_str("<h4>The map against each logger it did not see</h4>\n");
    out.push_str("<p class=\"lead\">Each logger was left out in turn and its value mapped from the other loggers. At its own position the map reproduces a logger exactly, so only the map made without it can disagree with it. A logger more than two standard errors away from that map (a two-sided 95 % band; common practice) is marked.</p>\n");
    let with_se = s.checks.iter().filter(|c| c.z.is_some()).count();
    let flagged: Vec<&LoggerCheck> = s.checks.iter().filter(|c| c.flagged).collect();
    if with_se == 0 {
        out.push_str("<p>The map has no standard errors (IDW or nearest logger), so the errors below cannot be judged against them.</p>\n");
    } else if flagged.is_empty() {
        let _ = writeln!(
            out,
            "<p>All {with_se} loggers lie within two standard errors of the map made without them.</p>"
        );
    } else {
        let _ = writeln!(
            out,
            "<p>{} of {with_se} loggers lie within two standard errors of the map made without them; {} {}.</p>",
            with_se - flagged.len(),
            flagged.len(),
            if flagged.len() == 1 { "does not" } else { "do not" }
        );
    }
    let mut notes: Vec<String> = flagged
        .iter()
        .map(|c| {
            format!(
                "<strong>Logger {}</strong>{} reads {}; the map made without it gives {} there, {} standard errors away: the map may be unreliable around this logger, and a second logger near it would tell which is right.",
                escape(&c.sensor),
                nearest(c),
                v(c.observed),
                v(c.predicted),
                fixed(c.z.unwrap_or(f64::NAN).abs(), 1)
            )
        })
        .collect();
    for c in s.checks.iter().filter(|c| !c.flagged && !c.nearest_to.is_empty()) {
        notes.push(format!(
            "At {} the map leans most on logger {}: without it the map would give {} there against the {} it reads (error {}{}).",
            c.nearest_to.iter().map(|o| format!("<code>{}</code>", escape(o))).collect::<Vec<_>>().join(" and "),
            escape(&c.sensor),
            v(c.predicted),
            v(c.observed),
            v(c.predicted - c.observed),
            c.z.map(|z| format!(", {} standard errors", fixed(z.abs(), 1))).unwrap_or_default()
        ));
    }
    if !notes.is_empty() {
        out.push_str("<ul class=\"warn\">\n");
        for n in &notes {
            let _ = writeln!(out, "<li>{n}</li>");
        }
        out.push_str("</ul>\n");
    }
    // Largest disagreements first; loggers without an SE last.
    let mut rows: Vec<&LoggerCheck> = s.checks.iter().collect();
    rows.sort_by(|a, b| {
        let key = |c: &LoggerCheck| c.z.map_or(-1.0, f64::abs);
        key(b).total_cmp(&key(a)).then_with(|| a.sensor.cmp(&b.sensor))
    });
    let _ = writeln!(
        out,
        "<div class=\"scroll\"><table>\n<tr><th>logger</th><th class=\"n\">reads{unit}</th><th class=\"n\">map without it</th><th class=\"n\">error</th><th class=\"n\">SE</th><th class=\"n\">error / SE</th><th>note</th></tr>"
    );
    for c in rows {
        let mut note = Vec::new();
        if c.flagged {
            note.push("more than 2 SE off".to_string());
        }
        if !c.nearest_to.is_empty() {
            note.push(format!("nearest logger to {}", escape(&c.nearest_to.join(", "))));
        }
        let _ = writeln!(
            out,
            "<tr><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td>{}</td></tr>",
            escape(&c.sensor),
            fixed(c.observed, d),
            fixed(c.predicted, d),
            fixed(c.predicted - c.observed, d),
            opt(c.se, |x| fixed(x, d)),
            opt(c.z, |z| fixed(z, 2)),
            note.join("; ")
        );
    }
    out.push_str("</table></div>\n");
}

/// `" (the logger nearest to the door)"`, or nothing.
fn nearest(c: &LoggerCheck) -> String {
    if c.nearest_to.is_empty() {
        String::new()
    } else {
        format!(
            " (the logger nearest to {})",
            c.nearest_to
                .iter()
                .map(|o| format!("<code>{}</code>", escape(o)))
                .collect::<Vec<_>>()
                .join(" and ")
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn check(
        sensor: &str,
        observed: f64,
        predicted: f64,
        se: Option<f64>,
        nearest_to: &[&str],
    ) -> LoggerCheck {
        let z = se.map(|s| (predicted - observed) / s);
        LoggerCheck {
            sensor: sensor.into(),
            observed,
            predicted,
            se,
            z,
            flagged: z.is_some_and(|z| z.abs() > 2.0),
            nearest_to: nearest_to.iter().map(|s| s.to_string()).collect(),
        }
    }

    /// The count, the warning for a logger beyond two SEs, the note on the
    /// logger nearest an opening, and the rows largest disagreement first.
    #[test]
    fn flags_counts_and_the_logger_at_the_door() {
        let s = IndicatorSurface {
            name: "night_cold_hours".into(),
            unit: "h".into(),
            checks: vec![
                check("L02", 120.0, 130.0, Some(20.0), &[]),
                check("L01", 375.0, 290.0, Some(60.0), &["door"]),
                check("L07", 40.0, 100.0, Some(20.0), &[]),
            ],
            ..Default::default()
        };
        let mut out = String::new();
        render(&mut out, &s);
        assert!(
            out.contains(
                "2 of 3 loggers lie within two standard errors of the map made without them; 1 does not."
            ),
            "{out}"
        );
        assert!(out.contains("<strong>Logger L07</strong> reads 40.0 h; the map made without it gives 100.0 h there, 3.0 standard errors away"), "{out}");
        assert!(
            out.contains("At <code>door</code> the map leans most on logger L01: without it the map would give 290.0 h there against the 375.0 h it reads (error -85.0 h, 1.4 standard errors)"),
            "{out}"
        );
        let (l07, l01, l02) =
            (out.find("<td>L07").unwrap(), out.find("<td>L01").unwrap(), out.find("<td>L02").unwrap());
        assert!(l07 < l01 && l01 < l02, "{out}");
        assert!(
            out.contains("<td>nearest logger to door</td>") && out.contains("<td>more than 2 SE off</td>"),
            "{out}"
        );
        // nothing without checks; no count without SEs
        let mut none = String::new();
        render(&mut none, &IndicatorSurface::default());
        assert!(none.is_empty());
        let idw = IndicatorSurface { checks: vec![check("L01", 1.0, 2.0, None, &[])], ..Default::default() };
        let mut out = String::new();
        render(&mut out, &idw);
        assert!(out.contains("has no standard errors") && out.contains("<td class=\"n\">–</td>"), "{out}");
    }
}
