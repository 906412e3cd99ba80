//! The model sections of the page ([`super`]): the competing models with their
//! comparison and ANOVA tables and residual maps, and the adjusted means once
//! position is accounted for.

use super::{
    RUN, decimals_for, df, escape, extent, figure_html, fixed, missing, openings, opt, p_value, rich,
    sensors, signed,
};
use crate::report::data::{AdjustedMean, ComparisonRow, ReportData, ResidualMap};
use crate::report::figures;
use std::fmt::Write as _;

pub(super) fn section_models(d: &ReportData, out: &mut String) {
    out.push_str("<section id=\"models\">\n<h2>5. The competing models</h2>\n");
    let Some(m) = &d.models else {
        out.push_str(&missing("the model comparison", RUN));
        out.push_str("</section>\n");
        return;
    };
    let chosen = d.verdict.as_ref().map(|v| v.chosen_model.as_str());
    let mut rows: Vec<&ComparisonRow> = m.comparison.iter().collect();
    rows.sort_by(|a, b| a.aic.total_cmp(&b.aic).then_with(|| a.name.cmp(&b.name)));
    out.push_str("<p class=\"lead\">All models were fitted by maximum likelihood on the same pots, so their AIC values compare. Lower AIC is better; the Akaike weight is the share of support among these models. The chosen model is highlighted.</p>\n");
    out.push_str("<div class=\"scroll\"><table>\n<tr><th>model</th><th>drivers</th><th>errors</th><th class=\"n\">parameters</th><th class=\"n\">log-likelihood</th><th class=\"n\">AIC</th><th class=\"n\">BIC</th><th class=\"n\">ΔAIC</th><th class=\"n\">Akaike weight</th></tr>\n");
    for r in &rows {
        let errors = match &r.correlation {
            None => "independent".to_string(),
            Some(c) if r.nugget => format!("{} + nugget", escape(c)),
            Some(c) => escape(c),
        };
        let drivers = if r.drivers.is_empty() {
            "–".to_string()
        } else {
            r.drivers.iter().map(|s| escape(s)).collect::<Vec<_>>().join(", ")
        };
        let class = if Some(r.name.as_str()) == chosen { " class=\"chosen\"" } else { "" };
        let _ = writeln!(
            out,
            "<tr{class}><td>{}</td><td>{drivers}</td><td>{errors}</td><td class=\"n\">{}</td><td class=\"n\">{}</td>\
             <td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td></tr>",
            escape(&r.name),
            r.n_params,
            fixed(r.loglik, 2),
            fixed(r.aic, 2),
            fixed(r.bic, 2),
            fixed(r.delta_aic, 2),
            fixed(r.akaike_weight, 3)
        );
    }
    out.push_str("</table></div>\n");
    let shown_rows = figures::models_that_matter(&m.comparison, chosen, m.tie_margin);
    let shown = shown_rows.len();
    let deltas: Vec<f64> = shown_rows.iter().map(|r| r.delta_aic).collect();
    let cut_note = match figures::delta_aic_cut(&deltas, m.tie_margin) {
        Some(end) => format!(
            " The axis ends at {end:.1} units so that the short bars can be read; the longest bar is cut there and carries its value."
        ),
        None => String::new(),
    };
    let _ = write!(
        out,
        "{}",
        figure_html(
            figures::delta_aic_bars(&m.comparison, chosen, m.tie_margin),
            &format!(
                "Bars: AIC distance to the best model, for {shown} of the {} models: the best of each kind (with or without drivers, independent or spatially correlated errors) and every model within the tie margin; the table above lists all. Models left of the dashed line are within the tie margin of the verdict rule and count as equally supported; the chosen model (accent colour) is the simplest of them.{cut_note}",
                m.comparison.len()
            ),
        )
    );
    out.push_str("<h3>Analysis of variance</h3>\n");
    if m.anova.is_empty() {
        out.push_str(&missing("ANOVA tables", RUN));
    } else {
        out.push_str("<p class=\"lead\">How much of the trait's variation the experimental design explains before any position or driver is considered. The same tables, of every type, are written by <code>potclim fit</code> (<code>anova.csv</code>).</p>\n");
    }
    for t in &m.anova {
        let _ = write!(out, "<p><strong>{}</strong>", escape(&t.model));
        if let Some(k) = &t.kind {
            let _ = write!(out, " — {}", escape(k));
        }
        out.push_str("</p>\n<table>\n<tr><th>term</th><th class=\"n\">df</th><th class=\"n\">sum of squares</th><th class=\"n\">mean square</th><th class=\"n\">F</th><th class=\"n\">p</th></tr>\n");
        let dec = decimals_for(t.rows.iter().flat_map(|r| r.sum_sq.into_iter().chain(r.mean_sq)), 3).min(2);
        for r in &t.rows {
            let _ = writeln!(
                out,
                "<tr><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td></tr>",
                escape(&r.term),
                df(r.df),
                opt(r.sum_sq, |x| fixed(x, dec)),
                opt(r.mean_sq, |x| fixed(x, dec)),
                opt(r.f, |x| fixed(x, 2)),
                p_value(r.p_value)
            );
        }
        out.push_str("</table>\n");
    }
    out.push_str("<h3>Residuals before and after</h3>\n");
    let unit = m.residual_unit.as_deref().unwrap_or("trait unit");
    let maps = figures::residual_maps(
        m.residuals_before.as_ref(),
        m.residuals_after.as_ref(),
        unit,
        extent(d),
        sensors(d),
        openings(d),
    );
    if maps.is_empty() {
        out.push_str(&missing("residual maps", RUN));
    } else {
        out.push_str("<div class=\"figs\">\n");
        for f in maps {
            out.push_str(&figure_html(
                f,
                "Residual = observed minus fitted trait. Blue: smaller than the model expects, red: larger; one colour scale for both maps. Patches of one colour mean structure left unexplained.",
            ));
        }
        out.push_str("</div>\n");
    }
    let morans: Vec<(&str, &ResidualMap)> =
        [("before", m.residuals_before.as_ref()), ("after", m.residuals_after.as_ref())]
            .into_iter()
            .filter_map(|(w, r)| r.map(|r| (w, r)))
            .filter(|(_, r)| r.moran.is_some())
            .collect();
    if !morans.is_empty() {
        out.push_str("<h3>Moran's I of the residuals</h3>\n<table>\n<tr><th>residuals of</th><th class=\"n\">I</th><th class=\"n\">expected if no autocorrelation</th><th class=\"n\">variance</th><th class=\"n\">p</th><th>test</th></tr>\n");
        for (_, r) in morans {
            let mi = r.moran.as_ref().expect("filtered");
            let _ = writeln!(
                out,
                "<tr><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td>{}</td></tr>",
                escape(&r.model),
                fixed(mi.i, 4),
                fixed(mi.expectation, 4),
                fixed(mi.variance, 4),
                p_value(Some(mi.p_value)),
                escape(mi.note.as_deref().unwrap_or(""))
            );
        }
        out.push_str("</table>\n<p class=\"lead\">I near its expectation (and a large p) means neighbouring residuals are no more alike than distant ones.</p>\n");
    }
    let notes = d.verdict.as_ref().map_or(&[][..], |v| v.technical_notes.as_slice());
    if !notes.is_empty() {
        out.push_str("<h3>Technical notes</h3>\n<p class=\"lead\">How the uncertainty of each mapped driver was carried into its effect, for a reader who wants to check the method. The standard errors named here are of the study-period values kriged from the loggers' own study-period values, another quantity than the map's standard error of section 3.</p>\n<ul class=\"technical\">\n");
        for n in notes {
            let _ = writeln!(out, "<li>{}</li>", rich(n));
        }
        out.push_str("</ul>\n");
    }
    out.push_str("</section>\n");
}

pub(super) fn section_means(d: &ReportData, out: &mut String) {
    out.push_str("<section id=\"means\">\n<h2>6. Means once position is accounted for</h2>\n");
    if d.adjusted_means.is_empty() {
        out.push_str(&missing("adjusted means", RUN));
        out.push_str("</section>\n");
        return;
    }
    let unit = escape(d.adjusted_means_unit.as_deref().unwrap_or("trait unit"));
    let _ = writeln!(
        out,
        "<p class=\"lead\">Adjusted mean: the mean of each level under the chosen model, at the average of the drivers, with its standard error (SE). Levels are listed from the highest adjusted mean down. Change: adjusted minus plain mean (the plain factorial model, position ignored); positive means the level was held back by where its pots stood. Shaded: a change larger than the level's SE. All values in {unit}.</p>"
    );
    let mut factors: Vec<&str> = Vec::new();
    for m in &d.adjusted_means {
        if !factors.contains(&m.factor.as_str()) {
            factors.push(&m.factor);
        }
    }
    for f in factors {
        let mut rows: Vec<&AdjustedMean> = d.adjusted_means.iter().filter(|m| m.factor == f).collect();
        rows.sort_by(|a, b| b.mean.total_cmp(&a.mean).then_with(|| a.level.cmp(&b.level)));
        // One number of decimals for the whole table: two significant
        // digits of the smallest SE.
        let dec = decimals_for(rows.iter().map(|m| m.se), 2);
        let _ = writeln!(
            out,
            "<h3>{}</h3>\n<table>\n<tr><th>level</th><th class=\"n\">adjusted mean</th><th class=\"n\">SE</th><th class=\"n\">change from position</th><th class=\"n\">plain mean</th></tr>",
            escape(f)
        );
        for m in &rows {
            let class = if m.change.abs() > m.se { " class=\"moved\"" } else { "" };
            let _ = writeln!(
                out,
                "<tr{class}><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td></tr>",
                escape(&m.level),
                fixed(m.mean, dec),
                fixed(m.se, dec),
                signed(m.change, dec),
                fixed(m.plain_mean, dec),
            );
        }
        out.push_str("</table>\n");
        let moved: Vec<&str> =
            rows.iter().filter(|m| m.change.abs() > m.se).map(|m| m.level.as_str()).collect();
        let reordered = {
            let mut plain: Vec<&AdjustedMean> = rows.clone();
            plain.sort_by(|a, b| b.plain_mean.total_cmp(&a.plain_mean).then_with(|| a.level.cmp(&b.level)));
            plain.iter().zip(&rows).any(|(a, b)| a.level != b.level)
        };
        if moved.is_empty() {
            let _ = writeln!(
                out,
                "<p>Position changes no mean of <code>{}</code> by more than its standard error{}: for this factor the plain means tell the same story.</p>",
                escape(f),
                if reordered {
                    " (the order of some close levels changes, within their SEs)"
                } else {
                    ", and the order of the levels stays the same"
                }
            );
        } else {
            let _ = writeln!(
                out,
                "<p>Position moves {} of the {} levels of <code>{}</code> by more than their standard error ({}){}.</p>",
                moved.len(),
                rows.len(),
                escape(f),
                moved.iter().map(|l| escape(l)).collect::<Vec<_>>().join(", "),
                if reordered {
                    "; the order of the levels changes"
                } else {
                    "; the order of the levels stays the same"
                }
            );
        }
    }
    out.push_str("</section>\n");
}
