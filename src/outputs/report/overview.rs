//! The top of the page: the header with the key facts, the contents and the
//! summary sentences.

use super::html::{escape, with_code};
use super::page_title;
use crate::outputs::tables::level_label;
use crate::outputs::view::{ReportView, VarianceLine};
use crate::text::percent_unsigned_zero as percent;

pub(super) fn header(out: &mut String, view: &ReportView) {
    out.push_str("<main>\n<header class=\"sx-top\">\n<p class=\"sx-kicker\">Principal component analysis report</p>\n");
    out.push_str(&format!("<h1>{}</h1>\n", escape(&page_title(view))));
    if let Some(notes) = view.notes.as_deref().filter(|n| !n.trim().is_empty()) {
        out.push_str(&format!(
            "<p class=\"sx-notes\">{}</p>\n",
            escape(notes.trim())
        ));
    }
    // Key facts, from the variance table and the flagged rows.
    let kept: Vec<&VarianceLine> = view.variance.iter().filter(|v| v.kept).collect();
    if !view.variance.is_empty() {
        let share: f64 = kept.iter().map(|v| v.share).sum();
        out.push_str("<ul class=\"sx-facts\">\n");
        out.push_str(&format!(
            "<li><span class=\"sx-big\">{}</span> of {} components kept</li>\n",
            kept.len(),
            view.variance.len()
        ));
        out.push_str(&format!(
            "<li><span class=\"sx-big\">{}</span> of the variance explained by them</li>\n",
            percent(share)
        ));
        out.push_str(&format!(
            "<li><span class=\"sx-big\">{}</span> {} above a T² or SPE limit at {} %</li>\n",
            view.flagged.len(),
            if view.flagged.len() == 1 {
                "row"
            } else {
                "rows"
            },
            level_label(view.confidence)
        ));
        if !view.figures.is_empty() {
            out.push_str(&format!(
                "<li><span class=\"sx-big\">{}</span> {}</li>\n",
                view.figures.len(),
                if view.figures.len() == 1 {
                    "figure"
                } else {
                    "figures"
                }
            ));
        }
        out.push_str("</ul>\n");
    }
    out.push_str("</header>\n");
}

pub(super) fn contents(out: &mut String, view: &ReportView, three_d: bool) {
    let mut items = vec![
        ("summary", "Summary"),
        ("variance", "Variance"),
        ("loadings", "Loadings"),
        ("flagged", "Flagged rows"),
    ];
    if three_d {
        items.push(("scores-3d", "3-D scores"));
    }
    if !view.figures.is_empty() {
        items.push(("figures", "Figures"));
    }
    items.push(("cautions", "Cautions"));
    items.push(("provenance", "Provenance"));
    out.push_str("<nav class=\"sx-toc\" aria-label=\"Sections\"><ul>");
    for (id, name) in items {
        out.push_str(&format!("<li><a href=\"#{id}\">{name}</a></li>"));
    }
    out.push_str("</ul></nav>\n");
}

pub(super) fn summary(out: &mut String, view: &ReportView) {
    out.push_str("<section id=\"summary\">\n<h2>Summary</h2>\n");
    if view.summary.is_empty() {
        out.push_str("<p>No summary was recorded.</p>\n");
    } else {
        out.push_str("<ul class=\"sx-sentences\">\n");
        for sentence in &view.summary {
            out.push_str(&format!("<li>{}</li>\n", with_code(sentence)));
        }
        out.push_str("</ul>\n");
    }
    out.push_str("</section>\n");
}
