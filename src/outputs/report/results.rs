//! The results in tables: the variance of the components, the largest loadings
//! of the kept ones and the flagged rows with their largest contributions.

use super::MAX_FLAGGED_ROWS;
use super::html::{bar, escape};
use crate::outputs::tables::level_label;
use crate::outputs::view::{FlaggedLine, ReportView, VarianceLine};
use crate::text::{fixed, percent_unsigned_zero as percent, significant};

pub(super) fn variance(out: &mut String, lines: &[VarianceLine]) {
    out.push_str("<section id=\"variance\">\n<h2>Variance of the components</h2>\n");
    out.push_str("<p class=\"sx-lede\">Each computed component's eigenvalue (the variance of its scores), its share of the total variance and the running total. Kept components are marked.</p>\n");
    out.push_str("<div class=\"sx-scroll\"><table class=\"sx-variance\">\n<thead><tr><th scope=\"col\">Component</th><th scope=\"col\" class=\"sx-num\">Eigenvalue</th><th scope=\"col\" class=\"sx-num\">Share</th><th scope=\"col\" class=\"sx-num\">Cumulative</th><th scope=\"col\">Kept</th><th scope=\"col\" class=\"sx-barcol\"><span class=\"sx-sr\">Share as a bar</span></th></tr></thead>\n<tbody>\n");
    let widest = lines.iter().map(|l| l.share).fold(0.0_f64, f64::max);
    for l in lines {
        out.push_str(&format!(
            "<tr{}><th scope=\"row\">PC{}</th><td class=\"sx-num\">{}</td><td class=\"sx-num\">{}</td><td class=\"sx-num\">{}</td><td>{}</td><td class=\"sx-barcol\">{}</td></tr>\n",
            if l.kept { " class=\"sx-kept\"" } else { "" },
            l.component,
            significant(l.eigenvalue, 4),
            percent(l.share),
            percent(l.cumulative),
            if l.kept { "<span class=\"sx-tag\">kept</span>" } else { "" },
            bar(l.share, widest, false),
        ));
    }
    out.push_str("</tbody>\n</table></div>\n</section>\n");
}

pub(super) fn loadings(out: &mut String, view: &ReportView) {
    out.push_str("<section id=\"loadings\">\n<h2>Largest loadings of the kept components</h2>\n");
    if view.top_loadings.is_empty() {
        out.push_str("<p>No component was kept.</p>\n</section>\n");
        return;
    }
    out.push_str("<p class=\"sx-lede\">The features with the largest loadings in magnitude; a component mixes every feature, so these name a direction to examine, not a cause.</p>\n<div class=\"sx-cards\">\n");
    for (a, list) in view.top_loadings.iter().enumerate() {
        let share = view
            .variance
            .get(a)
            .map(|v| format!(" <span class=\"sx-muted\">({})</span>", percent(v.share)))
            .unwrap_or_default();
        out.push_str(&format!(
            "<div class=\"sx-card\"><h3>PC{}{share}</h3>\n<table class=\"sx-loadings\"><thead><tr><th scope=\"col\">Feature</th><th scope=\"col\" class=\"sx-num\">Loading</th><th scope=\"col\" class=\"sx-barcol\"><span class=\"sx-sr\">Loading as a bar</span></th></tr></thead><tbody>\n",
            a + 1
        ));
        let widest = list.iter().map(|(_, l)| l.abs()).fold(0.0_f64, f64::max);
        for (feature, loading) in list {
            out.push_str(&format!(
                "<tr><td class=\"sx-name\">{}</td><td class=\"sx-num\">{}</td><td class=\"sx-barcol\">{}</td></tr>\n",
                escape(feature),
                fixed(*loading, 3),
                bar(loading.abs(), widest, *loading < 0.0)
            ));
        }
        out.push_str("</tbody></table></div>\n");
    }
    out.push_str("</div>\n</section>\n");
}

pub(super) fn flagged(out: &mut String, view: &ReportView) {
    let level = level_label(view.confidence);
    out.push_str(&format!(
        "<section id=\"flagged\">\n<h2>Flagged rows at {level} % confidence</h2>\n"
    ));
    if view.flagged.is_empty() {
        out.push_str(&format!(
            "<p>No row is above the T² or SPE limit at {level} % confidence.</p>\n</section>\n"
        ));
        return;
    }
    out.push_str(&format!(
        "<p class=\"sx-lede\">Rows above Hotelling's T² limit (unusual within the kept components) or the SPE limit (poorly described by them) at {level} % confidence, with the features that contribute most. Contributions are in scaled units and sum over all features to the row's T² and SPE; contributions.csv lists every feature.</p>\n"
    ));
    out.push_str("<div class=\"sx-scroll\"><table class=\"sx-flagged\">\n<thead><tr><th scope=\"col\">Row</th><th scope=\"col\" class=\"sx-num\">T²</th><th scope=\"col\" class=\"sx-num\">SPE</th><th scope=\"col\">Above</th><th scope=\"col\">Largest contributions</th></tr></thead>\n<tbody>\n");
    for line in view.flagged.iter().take(MAX_FLAGGED_ROWS) {
        flagged_row(out, line);
    }
    out.push_str("</tbody>\n</table></div>\n");
    if view.flagged.len() > MAX_FLAGGED_ROWS {
        out.push_str(&format!(
            "<p class=\"sx-lede\">The first {MAX_FLAGGED_ROWS} of {} flagged rows are listed; contributions.csv has them all.</p>\n",
            view.flagged.len()
        ));
    }
    out.push_str("</section>\n");
}

fn flagged_row(out: &mut String, line: &FlaggedLine) {
    let above = match (line.t2_above, line.spe_above) {
        (true, true) => "T² and SPE",
        (true, false) => "T²",
        (false, true) => "SPE",
        (false, false) => "another level only",
    };
    let mark = |above: bool, v: f64| {
        if above {
            format!("<strong>{}</strong>", significant(v, 4))
        } else {
            significant(v, 4)
        }
    };
    out.push_str(&format!(
        "<tr><th scope=\"row\" class=\"sx-name\">{}</th><td class=\"sx-num\">{}</td><td class=\"sx-num\">{}</td><td>{above}</td><td><ul class=\"sx-contrib\">",
        escape(&line.label),
        mark(line.t2_above, line.t2),
        mark(line.spe_above, line.spe),
    ));
    for (feature, t2, spe) in &line.top {
        out.push_str(&format!(
            "<li><span class=\"sx-name\">{}</span> <span class=\"sx-muted\">T² {} · SPE {}</span></li>",
            escape(feature),
            significant(*t2, 3),
            significant(*spe, 3)
        ));
    }
    out.push_str("</ul></td></tr>\n");
}
