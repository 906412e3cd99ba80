//! The verdict section of the page ([`super`]): the verdict word and what it
//! means, the plain-language lines of the headline, the cautions, the residual
//! structures, and what to do next.

use super::{RUN, decimals_for, escape, fixed, missing, opt, p_value, rich, sig, with_unit};
use crate::model::verdict::Headline;
use crate::report::data::{ReportData, VerdictSection};
use std::fmt::Write as _;

/// What each verdict word means, in the page's words.
fn word_meaning(w: &str) -> &'static str {
    match w {
        "covariate" => {
            "a measured microclimate driver (or the distance to an opening) explains the spatial pattern"
        }
        "correlation" => {
            "something unmeasured that varies smoothly over the floor explains the pattern better than any measured driver"
        }
        "both" => "measured drivers explain part of the pattern and a smooth unmeasured effect remains",
        "none" => "no spatial pattern beyond the experimental design stands out",
        _ => "an unrecognised verdict word",
    }
}

pub(super) fn section_verdict(d: &ReportData, out: &mut String) {
    out.push_str("<section id=\"verdict\">\n<h2>1. The answer</h2>\n");
    let Some(v) = &d.verdict else {
        out.push_str(&missing("the model comparison and its verdict", RUN));
        out.push_str("</section>\n");
        return;
    };
    let _ = write!(
        out,
        "<div class=\"answer\"><div class=\"word\">{}</div><div><p><strong>{}.</strong></p>",
        escape(&v.word),
        escape(&capitalise(word_meaning(&v.word))),
    );
    let unit = v.trait_unit.as_deref().unwrap_or("trait units");
    if let Some(h) = &v.headline {
        plain_lines(out, v, h, unit);
    }
    let _ = write!(
        out,
        "<p class=\"why\">{} The verdict rests on the model <code>{}</code>.",
        rich(&v.reason),
        escape(&v.chosen_model)
    );
    if let Some(b) = v.best_by_aic.as_deref().filter(|b| *b != v.chosen_model) {
        let _ = write!(out, " The lowest AIC belongs to <code>{}</code>.", escape(b));
    }
    out.push_str("</p>");
    let warnings: Vec<&String> =
        v.headline.iter().flat_map(|h| h.warnings.iter()).chain(v.map_warnings.iter()).collect();
    if !warnings.is_empty() {
        out.push_str("<ul class=\"warn\">");
        for w in warnings {
            let _ = write!(out, "<li><strong>Less sure than it looks:</strong> {}</li>", rich(w));
        }
        out.push_str("</ul>");
    }
    out.push_str("</div></div>\n");
    if let Some(h) = &v.headline {
        what_next(out, h, v);
    }
    crate::report::residual_structure::render(out, &v.structures);
    out.push_str("<dl class=\"words\">\n");
    for w in ["covariate", "correlation", "both", "none"] {
        let _ = writeln!(out, "<dt>{w}</dt><dd>{}</dd>", word_meaning(w));
    }
    out.push_str("</dl>\n<h3>The drivers</h3>\n");
    if v.drivers.is_empty() {
        out.push_str("<p>No driver was declared or computed.</p>\n");
    } else {
        let unit = v.trait_unit.as_deref().unwrap_or("trait unit");
        let _ = write!(
            out,
            "<div class=\"scroll\"><table>\n<tr><th>driver (unit)</th><th class=\"n\">effect per driver unit ({})</th>\
             <th class=\"n\">SE</th><th class=\"n\">95 % CI</th><th class=\"n\">95 % CI, small sample</th>\
             <th class=\"n\">effect incl. mapping</th>\
             <th class=\"n\">SE incl. mapping</th><th class=\"n\">95 % CI incl. mapping</th>\
             <th class=\"n\">p</th><th class=\"n\">ΔAIC alone</th>\
             <th class=\"n\">ΔAIC with correlation</th><th class=\"n\">VIF</th><th>note</th></tr>\n",
            escape(unit)
        );
        // One number of decimals for every effect column (trait units per
        // driver unit): two significant digits of the smallest SE.
        let dec = decimals_for(
            v.drivers.iter().flat_map(|r| std::iter::once(r.se).chain(r.se_with_mapping_uncertainty)),
            2,
        );
        let e = |x: f64| fixed(x, dec);
        for r in &v.drivers {
            let _ = writeln!(
                out,
                "<tr><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{} to {}</td>\
                 <td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td>\
                 <td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td>\
                 <td class=\"n\">{}</td><td>{}</td></tr>",
                with_unit(&r.name, r.unit.as_deref()),
                e(r.estimate),
                e(r.se),
                e(r.ci_low),
                e(r.ci_high),
                r.small_sample.as_ref().map_or("–".into(), |t| format!(
                    "{} to {}",
                    e(t.ci_low),
                    e(t.ci_high)
                )),
                opt(r.estimate_with_mapping_uncertainty, e),
                opt(r.se_with_mapping_uncertainty, e),
                match (r.ci_low_with_mapping_uncertainty, r.ci_high_with_mapping_uncertainty) {
                    (Some(a), Some(b)) => format!("{} to {}", e(a), e(b)),
                    _ => "–".into(),
                },
                p_value(r.p_value),
                opt(r.delta_aic, |x| fixed(x, 1)),
                opt(r.delta_aic_with_correlation, |x| fixed(x, 1)),
                opt(r.vif, |x| fixed(x, 1)),
                if r.confounded { "<span class=\"flag\">spatially confounded</span>" } else { "" }
            );
        }
        out.push_str("</table></div>\n<p class=\"lead\">Effect: change of the trait per unit of the driver. Small sample: the interval that also allows for the estimated range and nugget of a correlated residual (Kenward and Roger's correction; the exact t with independent errors), the one to quote when the residual is correlated; drivers.csv names the model it comes from. Incl. mapping: the effect, its standard error and interval once the uncertainty of the kriged driver map is included: the model is refitted on imputations of the driver drawn given the loggers and the trait, and the fits are combined by Rubin's rules; the plug-in columns treat the map as exact. ΔAIC: AIC of the model without the driver minus AIC with it, alone with independent errors and with the best correlation model; positive values mean the driver improves the model. VIF: variance inflation against the other drivers; above about 5 the drivers are hard to tell apart (common practice). Spatially confounded: the effect vanishes once spatial correlation is modelled.</p>\n");
    }
    out.push_str("<h3>What the data can and cannot show</h3>\n<ul class=\"cautions\">\n");
    let mut shown: Vec<&str> = Vec::new();
    for c in &v.cautions {
        if !shown.contains(&c.as_str()) {
            shown.push(c);
            let _ = writeln!(out, "<li>{}</li>", rich(c));
        }
    }
    out.push_str(
        "<li>An association between a driver and the trait across the floor is not proof that the driver causes it: anything else that varies the same way over the floor would look the same.</li>\n\
         <li>A driver is known only where loggers stand; between them it is interpolated, and with few loggers the standard errors of the maps (section 3) are wide.</li>\n</ul>\n</section>\n",
    );
}

/// A number for running text: four significant digits, never `-0`.
fn plain(v: f64) -> String {
    let s = sig(v, 4);
    if s.trim_start_matches('-').chars().all(|c| c == '0' || c == '.') {
        s.trim_start_matches('-').to_string()
    } else {
        s
    }
}

/// How many times more likely, in words.
fn times(ratio: f64) -> String {
    if ratio >= 1000.0 {
        "more than 1000 times".into()
    } else if ratio >= 10.0 {
        format!("about {:.0} times", ratio)
    } else {
        format!("{:.1} times", ratio)
    }
}

/// The three plain lines under the verdict: how big, which interval, how sure.
fn plain_lines(out: &mut String, v: &VerdictSection, h: &Headline, unit: &str) {
    out.push_str("<ul class=\"plain\">");
    if let Some(e) = &h.effect {
        let du = v.drivers.iter().find(|d| d.name == e.driver).and_then(|d| d.unit.clone());
        let du = du.map(|u| format!(" {}", escape(&u))).unwrap_or_default();
        let (more_less, size) = if e.effect < 0.0 { ("less", -e.effect) } else { ("more", e.effect) };
        // One format per quantity: three significant digits of the
        // driver's spread for its values, of the interval's width for the
        // effect.
        let dx = decimals_for([e.high - e.low], 3);
        let dy = decimals_for([e.ci_high - e.ci_low], 3);
        let _ = write!(
            out,
            "<li><strong>How big:</strong> across the floor, pots with {}{du} more <code>{}</code> (from {}{du}, the 10th percentile of the pots, to {}{du}, the 90th) have {} {} {more_less} of the trait.</li>",
            fixed(e.high - e.low, dx),
            escape(&e.driver),
            fixed(e.low, dx),
            fixed(e.high, dx),
            fixed(size, dy),
            escape(unit),
        );
        let _ = write!(
            out,
            "<li><strong>Quote:</strong> a change of {} {} (95 % interval {} to {} {}){}.</li>",
            fixed(e.effect, dy),
            escape(unit),
            fixed(e.ci_low, dy),
            fixed(e.ci_high, dy),
            escape(unit),
            if e.includes_mapping {
                ", which includes the uncertainty of the driver's map"
            } else {
                ", treating the driver's values as exact"
            }
        );
    }
    let c = &h.certainty;
    let _ = write!(
        out,
        "<li><strong>How sure:</strong> models of this kind carry {:.0} % of the Akaike weight of all models compared (the chosen model alone {:.0} %)",
        100.0 * c.kind_weight,
        100.0 * c.chosen_weight
    );
    match (&c.other_model, c.other_delta, c.evidence_ratio) {
        (Some(m), Some(d), Some(r)) if d >= 0.0 => {
            let _ = write!(
                out,
                "; the best of them is {} as likely as the best model of another kind, <code>{}</code> ({} AIC units behind)",
                times(r),
                escape(m),
                fixed(d, 1)
            );
        }
        (Some(m), Some(d), Some(r)) => {
            let _ = write!(
                out,
                "; the best model of another kind, <code>{}</code>, is {} as likely ({} AIC units better, within the tie margin, so the simpler model was chosen): the choice is not sure",
                escape(m),
                times(1.0 / r),
                fixed(-d, 1)
            );
        }
        _ => {}
    }
    out.push_str(".</li></ul>");
}

/// What the data suggest doing next.
fn what_next(out: &mut String, h: &Headline, v: &VerdictSection) {
    if h.next_logger.is_none() && h.blocking.is_none() {
        return;
    }
    out.push_str("<h3>What next</h3>\n<ul class=\"next\">\n");
    if let Some(n) = &h.next_logger {
        let du =
            v.drivers.iter().find(|d| d.name == n.driver).and_then(|d| d.unit.clone()).unwrap_or_default();
        let _ = writeln!(
            out,
            "<li>An extra logger would cut the map's error most at pot {} (x {} m, y {} m), where the map's standard error of <code>{}</code> (section 3) is largest ({} {}).</li>",
            escape(&n.pot),
            fixed(n.x, 2),
            fixed(n.y, 2),
            escape(&n.driver),
            plain(n.se),
            escape(&du)
        );
    }
    if let Some(b) = &h.blocking {
        let _ = writeln!(out, "<li>{}</li>", rich(b));
    }
    out.push_str("</ul>\n");
}

fn capitalise(s: &str) -> String {
    let mut c = s.chars();
    c.next().map_or_else(String::new, |f| f.to_uppercase().chain(c).collect())
}
