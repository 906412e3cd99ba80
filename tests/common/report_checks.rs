//! Checks of the demo's report page, called by `cli_map.rs` after its one
//! run of the demo (so the demo is analysed once): logger lines in distinct
//! colours, every text inside its figure, captions that match their figure,
//! the ΔAIC chart limited to the models that matter, a QC table that fits A4,
//! cautions without chain settings and without repeats, no `-0.00`, the
//! ANOVA shown, adjusted means sorted by the mean.

use potclim::report::xml::svg_texts;
use serde_json::Value;

/// Each `<figure>` of the page: its id, SVG and caption.
fn figures(html: &str) -> Vec<(String, String, String)> {
    let mut out = Vec::new();
    for part in html.split("<figure id=\"").skip(1) {
        let id = part.split('"').next().unwrap_or("").to_string();
        let end = part.find("</figure>").unwrap_or(part.len());
        let body = &part[..end];
        let svg_end = body.find("</svg>").map_or(body.len(), |e| e + 6);
        let svg = body[body.find("<svg").unwrap_or(0)..svg_end].to_string();
        let caption = body.split("<figcaption>").nth(1).unwrap_or("").to_string();
        out.push((id, svg, caption));
    }
    out
}

fn attr(svg: &str, key: &str) -> f64 {
    let head = &svg[..svg.find('>').unwrap_or(svg.len())];
    head.split(&format!("{key}=\""))
        .nth(1)
        .and_then(|v| v.split('"').next())
        .and_then(|v| v.parse().ok())
        .unwrap()
}

/// Every check, on the page and the data it was drawn from.
pub fn demo_report(html: &str, data: &Value) {
    let figs = figures(html);
    assert!(figs.len() >= 10, "{} figures", figs.len());
    // Every text inside its figure.
    for (id, svg, _) in &figs {
        let (w, h) = (attr(svg, "width"), attr(svg, "height"));
        for t in svg_texts(svg) {
            assert!(
                t.left >= -1.0 && t.right <= w + 1.0 && t.y >= 0.0 && t.y <= h,
                "{id}: {:?} ({:.0} to {:.0}, y {:.0}) outside {w}x{h}",
                t.text,
                t.left,
                t.right,
                t.y
            );
        }
    }
    // Logger lines: one colour per logger of each chart.
    let series = data["climate"]["series"].as_array().unwrap();
    let series_figs: Vec<_> = figs.iter().filter(|f| f.0.starts_with("fig-series-")).collect();
    assert_eq!(series_figs.len(), series.len());
    for ((id, svg, caption), s) in series_figs.iter().zip(series) {
        let n = s["sensors"].as_array().unwrap().len();
        let mut colours: Vec<&str> = svg
            .split("<polyline")
            .skip(1)
            .filter_map(|p| p.split("stroke=\"").nth(1).and_then(|c| c.split('"').next()))
            .collect();
        colours.sort();
        colours.dedup();
        assert!(colours.len() >= n, "{id}: {} colours for {n} loggers", colours.len());
        assert!(caption.contains("own colour"), "{id}");
    }
    // Captions match: the residual variogram has no fitted lines.
    for (id, _, caption) in figs.iter().filter(|f| f.0.starts_with("fig-variogram-")) {
        let residual = id.contains("residuals");
        assert_eq!(caption.contains("Lines: the fitted families"), !residual, "{id}: {caption}");
    }
    // The ΔAIC chart: fewer bars than models, the chosen model among them.
    let all = data["models"]["comparison"].as_array().unwrap().len();
    let (_, bars, caption) = figs.iter().find(|f| f.0 == "fig-delta-aic").expect("ΔAIC chart");
    let shown: usize =
        caption.split("for ").nth(1).and_then(|c| c.split(' ').next()).unwrap().parse().unwrap();
    assert!(shown < all && shown >= 2, "{shown} of {all}");
    let chosen = data["verdict"]["chosen_model"].as_str().unwrap();
    assert!(bars.contains(chosen), "the chosen model is not on the chart");
    // QC table: five columns whatever the reasons.
    let qc = html.split("<table class=\"qc\">").nth(1).expect("QC table");
    let head = &qc[..qc.find("</tr>").unwrap()];
    assert_eq!(head.matches("<th").count(), 5, "{head}");
    // Cautions for people: no chain settings, no raw nugget, no repeat.
    let cautions: Vec<&str> =
        data["verdict"]["cautions"].as_array().unwrap().iter().map(|c| c.as_str().unwrap()).collect();
    let section = &html[html.find("<ul class=\"cautions\">").unwrap()..];
    let section = &section[..section.find("</ul>").unwrap()];
    for bad in ["burn-in", "draw kept", "partial sill", "nugget 1"] {
        assert!(!section.contains(bad), "a caution shows `{bad}`");
    }
    let items: Vec<&str> = section.split("<li>").skip(1).collect();
    for (k, a) in items.iter().enumerate() {
        assert!(!items[..k].contains(a), "caution repeated: {a}");
    }
    assert!(cautions.len() + 2 >= items.len());
    assert!(html.contains("<h3>Technical notes</h3>"), "the technical notes are gone");
    assert!(!html.contains("mean kriging SE of the driver at the pots"), "two SEs under one name");
    // No negative zero anywhere in the text.
    for bad in [">-0.0<", ">-0.00<", ">-0<", " -0.00 "] {
        assert!(!html.contains(bad), "`{bad}` on the page");
    }
    // The ANOVA is shown.
    assert!(!html.contains("Not available: ANOVA"), "no ANOVA");
    let models = &html[html.find("<section id=\"models\">").unwrap()..];
    assert!(models.contains("type II sums of squares"), "no ANOVA table");
    // Adjusted means: within each factor, sorted by the mean, highest first.
    let means = data["adjusted_means"].as_array().unwrap();
    let section = &html[html.find("<section id=\"means\">").unwrap()..];
    let section = &section[..section.find("</section>").unwrap()];
    let mut factors: Vec<&str> = means.iter().map(|m| m["factor"].as_str().unwrap()).collect();
    factors.dedup();
    for f in factors {
        let mut rows: Vec<(&str, f64)> = means
            .iter()
            .filter(|m| m["factor"] == f)
            .map(|m| (m["level"].as_str().unwrap(), m["mean"].as_f64().unwrap()))
            .collect();
        rows.sort_by(|a, b| b.1.total_cmp(&a.1));
        let table = &section[section.find(&format!("<h3>{f}</h3>")).unwrap()..];
        let table = &table[..table.find("</table>").unwrap()];
        let at: Vec<usize> =
            rows.iter().map(|(l, _)| table.find(&format!("<td>{l}</td>")).expect("level shown")).collect();
        assert!(at.is_sorted(), "{f}: levels not sorted by the adjusted mean");
        assert!(table.contains("change from position"));
    }
    assert!(section.contains("Position moves") || section.contains("Position changes no mean"));
}
