//! The report's words on a rows x columns or direction-dependent residual
//! model that the verdict chose or kept within the tie margin: its sentence
//! and, for a direction, the residuals' variograms along and across the
//! fitted direction as evidence. Renders [`StructureSummary`] values that the
//! model stage computed ([`crate::model::structures::summarise`]); computes
//! nothing.

use super::html::{escape, fixed};
use crate::model::structures::{EvidenceVariogram, StructureSummary};
use std::fmt::Write as _;

/// Append the block for `structures` (nothing when empty) to `out`.
pub fn render(out: &mut String, structures: &[StructureSummary]) {
    if structures.is_empty() {
        return;
    }
    out.push_str("<h3>Residuals along benches and lanes</h3>\n");
    for s in structures {
        let role = if s.chosen {
            "The verdict rests on this model".to_string()
        } else {
            format!("Within the tie margin ({} AIC units above the lowest)", fixed(s.delta_aic, 1))
        };
        let _ = writeln!(
            out,
            "<p>{role}: <code>{}</code>. {}.</p>",
            escape(&s.model),
            escape(&capital(&s.sentence))
        );
        if !s.evidence.is_empty() {
            evidence(out, &s.evidence);
        }
    }
}

fn capital(s: &str) -> String {
    let mut c = s.chars();
    match c.next() {
        Some(f) => f.to_uppercase().chain(c).collect(),
        None => String::new(),
    }
}

/// The evidence variograms as a table: one row per direction, one cell per
/// lag bin (`semivariance (pairs)`).
fn evidence(out: &mut String, ev: &[EvidenceVariogram]) {
    out.push_str(
        "<p>Evidence: experimental variograms of this model's residuals (Matheron's estimator) within the angular \
         windows below. Where the residuals stay alike farther along the fitted direction, the semivariance along it \
         rises more slowly than across it.</p>\n<div class=\"scroll\"><table>\n<tr><th>direction</th>\
         <th>lag (m): semivariance (pairs)</th></tr>\n",
    );
    for v in ev {
        let cells: Vec<String> = v
            .bins
            .iter()
            .map(|b| format!("{}: {} ({})", fixed(b.lag, 2), fixed(b.semivariance, 3), b.pairs))
            .collect();
        let _ = writeln!(
            out,
            "<tr><td>{} ({}° ± {}°)</td><td>{}</td></tr>",
            escape(&v.label),
            fixed(v.angle_deg, 0),
            fixed(v.tolerance_deg, 1),
            if cells.is_empty() { "no pairs".to_string() } else { escape(&cells.join("; ")) }
        );
    }
    out.push_str("</table></div>\n");
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::structures::EvidenceBin;

    fn summary(chosen: bool) -> StructureSummary {
        StructureSummary {
            model: "base | exponential_directional".into(),
            chosen,
            delta_aic: if chosen { 0.0 } else { 1.5 },
            sentence: "direction-dependent exponential: longest practical range 3.10 m along 25 degrees from the x axis, 0.40 times as long across (1.24 m)".into(),
            along_row: None,
            along_column: None,
            direction_degrees: Some(25.0),
            practical_range_along: Some(3.1),
            practical_range_across: Some(1.24),
            range_ratio: Some(0.4),
            nugget_share: 0.0,
            evidence: vec![
                EvidenceVariogram {
                    label: "along".into(),
                    angle_deg: 25.0,
                    tolerance_deg: 22.5,
                    bins: vec![EvidenceBin { lag: 0.5, semivariance: 0.25, pairs: 40 }],
                },
                EvidenceVariogram { label: "across".into(), angle_deg: 115.0, tolerance_deg: 22.5, bins: vec![] },
            ],
        }
    }

    /// The block names the model, says its role, carries the sentence and
    /// the evidence cells as computed; nothing at all without structures.
    #[test]
    fn renders_sentence_role_and_evidence() {
        let mut out = String::new();
        render(&mut out, &[]);
        assert!(out.is_empty());
        render(&mut out, &[summary(true), summary(false)]);
        assert!(
            out.contains("The verdict rests on this model: <code>base | exponential_directional</code>"),
            "{out}"
        );
        assert!(out.contains("Within the tie margin (1.5 AIC units above the lowest)"), "{out}");
        assert!(
            out.contains("Direction-dependent exponential: longest practical range 3.10 m along 25 degrees"),
            "{out}"
        );
        assert!(out.contains("0.50: 0.250 (40)"), "{out}");
        assert!(out.contains("across (115° ± 22.5°)</td><td>no pairs"), "{out}");
    }
}
