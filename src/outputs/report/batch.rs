//! The report of a scored batch (`report.html` of an `apply` folder): one
//! self-contained page in the style of the run's report, with no script at
//! all. It shows the control chart, the new rows on the training score plot,
//! the rows above a limit with their largest contributions, the cells filled
//! and the provenance (the model's SHA-256, the batch's SHA-256). The same
//! view gives the same bytes: nothing depends on the time or on chance.

use super::closing::provenance;
use super::html::{escape, with_code};
use super::svg_ids::inline_svg;
use super::{MAX_FLAGGED_ROWS, STYLE};
use crate::outputs::batch_view::{BatchFlagged, BatchView};
use crate::outputs::plots::batch::{batch_scores, control_chart};
use crate::outputs::tables::level_label;
use crate::text::{count, readable};

/// "95 %".
fn level(confidence: f64) -> String {
    format!("{} %", level_label(confidence))
}

/// At most this many filled cells are listed; imputed.csv has them all.
pub const MAX_FILLS: usize = 100;

/// Renders the batch report page.
pub fn render(view: &BatchView) -> String {
    let mut body = String::with_capacity(64 * 1024);
    header(&mut body, view);
    summary(&mut body, view);
    let (chart, chart_caption) = control_chart(view);
    figure(
        &mut body,
        "control",
        "Control chart",
        1,
        &chart,
        &chart_caption,
    );
    if view.kept >= 2 {
        let (plot, caption) = batch_scores(view);
        figure(
            &mut body,
            "scores",
            "New rows on the score plot",
            2,
            &plot,
            &caption,
        );
    } else {
        body.push_str("<section id=\"scores\">\n<h2>New rows on the score plot</h2>\n<p>The model keeps one component, so there is no score plot of two components; the control chart shows every row.</p>\n</section>\n");
    }
    flagged(&mut body, view);
    fills(&mut body, view);
    provenance(&mut body, &view.provenance);
    body.push_str("</main>\n");

    let policy = "default-src 'none'; style-src 'unsafe-inline'; img-src data:; base-uri 'none'; form-action 'none'";
    let title = format!("Batch {}", view.table);
    let mut page = String::with_capacity(body.len() + STYLE.len() + 1024);
    page.push_str("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n");
    page.push_str(&format!(
        "<meta http-equiv=\"Content-Security-Policy\" content=\"{policy}\">\n"
    ));
    page.push_str("<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n");
    page.push_str("<meta name=\"generator\" content=\"sextant\">\n");
    page.push_str(&format!("<title>{}</title>\n<style>\n", escape(&title)));
    page.push_str(STYLE);
    page.push_str("</style>\n</head>\n<body>\n");
    page.push_str(&body);
    page.push_str("</body>\n</html>\n");
    page
}

fn header(out: &mut String, view: &BatchView) {
    out.push_str("<main>\n<header class=\"sx-top\">\n<p class=\"sx-kicker\">New batch scored with a saved model</p>\n");
    out.push_str(&format!(
        "<h1>Batch <code>{}</code></h1>\n",
        escape(&view.table)
    ));
    out.push_str(&format!(
        "<p class=\"sx-notes\">Scored with the model of <code>{}</code>.</p>\n",
        escape(&view.results)
    ));
    let levels: Vec<String> = view.limits.iter().map(|l| level(l.confidence)).collect();
    out.push_str("<ul class=\"sx-facts\">\n");
    let fact = |out: &mut String, big: String, words: &str| {
        out.push_str(&format!(
            "<li><span class=\"sx-big\">{big}</span> {}</li>\n",
            escape(words)
        ));
    };
    fact(
        out,
        view.t2.len().to_string(),
        &format!("of {} scored", count(view.rows_in, "row", "rows")),
    );
    fact(
        out,
        view.flagged_count.to_string(),
        &format!(
            "above a T² or SPE limit at {}",
            levels.first().cloned().unwrap_or_else(|| "no level".into())
        ),
    );
    fact(
        out,
        view.fills.len().to_string(),
        "cells filled by the model",
    );
    fact(
        out,
        levels.len().to_string(),
        &format!("confidence levels: {}", levels.join(", ")),
    );
    out.push_str("</ul>\n");
    out.push_str("<nav class=\"sx-toc\" aria-label=\"Sections\"><ul>");
    for (id, name) in [
        ("summary", "Summary"),
        ("control", "Control chart"),
        ("scores", "Score plot"),
        ("flagged", "Rows above a limit"),
        ("fills", "Filled cells"),
        ("provenance", "Provenance"),
    ] {
        out.push_str(&format!("<li><a href=\"#{id}\">{name}</a></li>"));
    }
    out.push_str("</ul></nav>\n</header>\n");
}

fn summary(out: &mut String, view: &BatchView) {
    out.push_str("<section id=\"summary\">\n<h2>Summary</h2>\n<ul class=\"sx-sentences\">\n");
    let mut sentences = vec![format!(
        "{} of {} scored against the model ({} kept); {} above a limit at the lowest level.",
        view.t2.len(),
        count(view.rows_in, "row", "rows"),
        count(view.kept, "component", "components"),
        count(view.flagged_count, "row is", "rows are"),
    )];
    match &view.order {
        Some((column, _)) => sentences.push(format!(
            "The control chart orders the rows by the column `{column}`."
        )),
        None => sentences.push("The control chart shows the rows in file order.".into()),
    }
    sentences.extend(view.notes.iter().cloned());
    for s in sentences {
        out.push_str(&format!("<li>{}</li>\n", with_code(&s)));
    }
    out.push_str("</ul>\n</section>\n");
}

fn figure(out: &mut String, id: &str, heading: &str, number: usize, svg: &str, caption: &str) {
    out.push_str(&format!(
        "<section id=\"{id}\">\n<h2>{heading}</h2>\n<figure id=\"figure-{number}\">\n"
    ));
    match inline_svg(svg, &format!("sx-f{number}-")) {
        Some(inline) => {
            out.push_str("<div class=\"sx-svgbox\">\n");
            out.push_str(&inline);
            out.push_str("\n</div>\n");
        }
        None => out.push_str("<p class=\"sx-note\">This figure could not be shown inline.</p>\n"),
    }
    out.push_str(&format!(
        "<figcaption><span class=\"sx-fignum\">Figure {number}.</span> {}</figcaption>\n</figure>\n</section>\n",
        with_code(caption)
    ));
}

fn flagged(out: &mut String, view: &BatchView) {
    out.push_str("<section id=\"flagged\">\n<h2>Rows above a limit</h2>\n");
    if view.flagged.is_empty() {
        out.push_str("<p>No new row is above a T² or SPE limit at any confidence level of the model.</p>\n</section>\n");
        return;
    }
    out.push_str("<p class=\"sx-lede\">New rows above Hotelling's T² limit for new rows or the SPE limit, most severe first, with the features that contribute most (scaled units; they sum over all features to the row's T² and SPE). contributions.csv lists every feature of the most unusual rows.</p>\n");
    out.push_str("<div class=\"sx-scroll\"><table class=\"sx-flagged\">\n<thead><tr><th scope=\"col\">Row</th><th scope=\"col\" class=\"sx-num\">Line</th><th scope=\"col\" class=\"sx-num\">T²</th><th scope=\"col\" class=\"sx-num\">SPE</th><th scope=\"col\">Above</th><th scope=\"col\">Largest contributions</th></tr></thead>\n<tbody>\n");
    for line in view.flagged.iter().take(MAX_FLAGGED_ROWS) {
        flagged_row(out, line);
    }
    out.push_str("</tbody>\n</table></div>\n");
    if view.flagged_count > view.flagged.len().min(MAX_FLAGGED_ROWS) {
        out.push_str(&format!(
            "<p class=\"sx-lede\">The {} most severe of {} are listed; scores.csv flags them all.</p>\n",
            view.flagged.len().min(MAX_FLAGGED_ROWS),
            count(view.flagged_count, "flagged row", "flagged rows")
        ));
    }
    out.push_str("</section>\n");
}

fn flagged_row(out: &mut String, row: &BatchFlagged) {
    let levels = |pick: fn(&(f64, bool, bool)) -> bool| -> Vec<String> {
        row.above
            .iter()
            .filter(|a| pick(a))
            .map(|a| level(a.0))
            .collect()
    };
    let mut above = Vec::new();
    for (name, list) in [("T²", levels(|a| a.1)), ("SPE", levels(|a| a.2))] {
        if !list.is_empty() {
            above.push(format!("{name} at {}", list.join(", ")));
        }
    }
    out.push_str(&format!(
        "<tr><th scope=\"row\" class=\"sx-name\">{}</th><td class=\"sx-num\">{}</td><td class=\"sx-num\">{}</td><td class=\"sx-num\">{}</td><td>{}</td><td><ul class=\"sx-contrib\">",
        escape(&row.label),
        row.line,
        readable(row.t2),
        readable(row.spe),
        escape(&above.join("; ")),
    ));
    for (feature, t2, spe) in &row.top {
        out.push_str(&format!(
            "<li><span class=\"sx-name\">{}</span> <span class=\"sx-muted\">T² {} · SPE {}</span></li>",
            escape(feature),
            readable(*t2),
            readable(*spe)
        ));
    }
    out.push_str("</ul></td></tr>\n");
}

fn fills(out: &mut String, view: &BatchView) {
    out.push_str("<section id=\"fills\">\n<h2>Filled cells</h2>\n");
    out.push_str(&format!(
        "<p class=\"sx-lede\">Missing cells of the new rows are filled from the training model ({}), never from the new rows themselves; values are on the scale the model fills on (after any transform).</p>\n",
        escape(&view.fill_method)
    ));
    if view.fills.is_empty() {
        out.push_str("<p>No cell of the new rows needed filling.</p>\n</section>\n");
        return;
    }
    out.push_str("<div class=\"sx-scroll\"><table class=\"sx-fills\">\n<thead><tr><th scope=\"col\">Row</th><th scope=\"col\" class=\"sx-num\">Line</th><th scope=\"col\">Feature</th><th scope=\"col\" class=\"sx-num\">Value filled</th></tr></thead>\n<tbody>\n");
    for f in view.fills.iter().take(MAX_FILLS) {
        out.push_str(&format!(
            "<tr><th scope=\"row\" class=\"sx-name\">{}</th><td class=\"sx-num\">{}</td><td class=\"sx-name\">{}</td><td class=\"sx-num\">{}</td></tr>\n",
            escape(&f.label),
            f.line,
            escape(&f.feature),
            readable(f.value)
        ));
    }
    out.push_str("</tbody>\n</table></div>\n");
    if view.fills.len() > MAX_FILLS {
        out.push_str(&format!(
            "<p class=\"sx-lede\">The first {MAX_FILLS} of {} are listed; imputed.csv has them all.</p>\n",
            count(view.fills.len(), "filled cell", "filled cells")
        ));
    }
    out.push_str("</section>\n");
}
