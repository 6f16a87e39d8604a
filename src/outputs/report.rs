//! The self-contained HTML report: one file with an inline style sheet, the
//! figures inlined as SVG elements and a small inline script for the rotatable
//! 3-D view of the scores.
//!
//! The page makes no network request: nothing is loaded from anywhere, and a
//! Content-Security-Policy in the page forbids every fetch and every script but
//! its own (allowed by its SHA-256). Every text that comes from the data or the
//! recipe is HTML-escaped, the scores are embedded as JSON in a
//! `<script type="application/json">` element whose text cannot end it early,
//! and the same view always gives the same bytes: numbers are formatted with
//! `format!` (never by locale), and nothing depends on the time, on chance or
//! on hash-map order.

use super::tables::level_label;
use super::view::{Figure, FlaggedLine, ReportView, Scores3d, VarianceLine};
use crate::text::{fixed, percent_unsigned_zero as percent, significant};
use sha2::{Digest, Sha256};
use std::collections::{BTreeMap, BTreeSet};

/// The colour-blind-safe palette of Okabe & Ito (2008), in its usual order.
pub const PALETTE: [&str; 8] = [
    "#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7", "#000000",
];

/// The colour of every point when the scores have no group column.
const SINGLE_COLOUR: &str = "#0072B2";

/// At most this many flagged rows are listed; contributions.csv has them all.
pub const MAX_FLAGGED_ROWS: usize = 100;

/// Renders the report page.
pub fn render(view: &ReportView) -> String {
    let three_d = view.scores3d.as_ref().filter(|s| !s.points.is_empty());
    let mut body = String::with_capacity(64 * 1024);
    header(&mut body, view);
    contents(&mut body, view, three_d.is_some());
    summary(&mut body, view);
    variance(&mut body, &view.variance);
    loadings(&mut body, view);
    flagged(&mut body, view);
    if let Some(s) = three_d {
        scores_3d(&mut body, s, &view.flagged);
    }
    figures(&mut body, &view.figures);
    cautions(&mut body, &view.cautions);
    provenance(&mut body, &view.provenance);
    body.push_str("</main>\n");

    let mut policy = String::from("default-src 'none'; style-src 'unsafe-inline'; img-src data:;");
    if three_d.is_some() {
        policy.push_str(&format!(
            " script-src 'sha256-{}';",
            base64(&Sha256::digest(SCRIPT.as_bytes()))
        ));
    }
    policy.push_str(" base-uri 'none'; form-action 'none'");

    let title = page_title(view);
    let mut page = String::with_capacity(body.len() + STYLE.len() + SCRIPT.len() + 1024);
    page.push_str("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n");
    page.push_str(&format!(
        "<meta http-equiv=\"Content-Security-Policy\" content=\"{policy}\">\n"
    ));
    page.push_str("<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n");
    page.push_str("<meta name=\"generator\" content=\"sextant\">\n");
    page.push_str(&format!("<title>{}</title>\n", escape(&title)));
    page.push_str("<style>\n");
    page.push_str(STYLE);
    page.push_str("</style>\n</head>\n<body>\n");
    page.push_str(&body);
    if three_d.is_some() {
        page.push_str("<script>");
        page.push_str(SCRIPT);
        page.push_str("</script>\n");
    }
    page.push_str("</body>\n</html>\n");
    page
}

fn page_title(view: &ReportView) -> String {
    if view.title.trim().is_empty() {
        "PCA report".to_string()
    } else {
        view.title.clone()
    }
}

// ---------------------------------------------------------------- sections

fn header(out: &mut String, view: &ReportView) {
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

fn contents(out: &mut String, view: &ReportView, three_d: bool) {
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

fn summary(out: &mut String, view: &ReportView) {
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

fn variance(out: &mut String, lines: &[VarianceLine]) {
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

fn loadings(out: &mut String, view: &ReportView) {
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

fn flagged(out: &mut String, view: &ReportView) {
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

fn scores_3d(out: &mut String, s: &Scores3d, flagged: &[FlaggedLine]) {
    let colouring = Colouring::new(s);
    let flagged_labels: BTreeSet<&str> = flagged.iter().map(|f| f.label.as_str()).collect();
    let flagged_points: Vec<usize> = (0..s.points.len())
        .filter(|&i| {
            s.labels
                .get(i)
                .is_some_and(|l| flagged_labels.contains(l.as_str()))
        })
        .collect();

    out.push_str("<section id=\"scores-3d\">\n<h2>Scores on the first three components</h2>\n");
    out.push_str(&format!(
        "<p class=\"sx-lede\">{} rows on {}, {} and {}.</p>\n",
        s.points.len(),
        escape(&s.axis_titles[0]),
        escape(&s.axis_titles[1]),
        escape(&s.axis_titles[2])
    ));
    out.push_str("<noscript><p class=\"sx-note\">The rotating 3-D view needs JavaScript, which is switched off; everything else in this report is shown without it.</p></noscript>\n");
    out.push_str("<div id=\"sx3d-box\" hidden>\n<p class=\"sx-hint\">Drag to rotate (mouse or touch), or use the arrow keys after selecting the view; double-click or press 0 to reset. Point at a dot to see its row.</p>\n");
    out.push_str(&format!(
        "<canvas id=\"sx3d-canvas\" width=\"640\" height=\"480\" tabindex=\"0\" role=\"img\" aria-label=\"Rotatable scatter of the scores on {}, {} and {}\"></canvas>\n",
        escape(&s.axis_titles[0]),
        escape(&s.axis_titles[1]),
        escape(&s.axis_titles[2])
    ));
    out.push_str("<p id=\"sx3d-info\" class=\"sx-info\" aria-live=\"polite\"></p>\n");
    // The legend.
    out.push_str("<ul class=\"sx-legend\">");
    if let Some(name) = &colouring.group {
        out.push_str(&format!(
            "<li class=\"sx-legend-title\">{}:</li>",
            escape(name)
        ));
        for (label, colour) in &colouring.legend {
            out.push_str(&format!(
                "<li><span class=\"sx-sw {}\"></span>{}</li>",
                swatch_class(colour),
                escape(label)
            ));
        }
    } else {
        out.push_str(&format!(
            "<li><span class=\"sx-sw {}\"></span>each row</li>",
            swatch_class(SINGLE_COLOUR)
        ));
    }
    if !flagged_points.is_empty() {
        out.push_str("<li><span class=\"sx-sw sx-ring\"></span>dark ring: a flagged row</li>");
    }
    out.push_str("</ul>\n</div>\n");

    // The data, as JSON that cannot end its script element.
    let mut json = String::with_capacity(s.points.len() * 48);
    json.push_str("{\"axes\":[");
    json.push_str(
        &s.axis_titles
            .iter()
            .map(|t| json_string(t))
            .collect::<Vec<_>>()
            .join(","),
    );
    json.push_str("],\"group\":");
    json.push_str(
        &colouring
            .group
            .as_deref()
            .map_or("null".into(), json_string),
    );
    json.push_str(",\"values\":[");
    json.push_str(
        &colouring
            .values
            .iter()
            .map(|v| json_string(v))
            .collect::<Vec<_>>()
            .join(","),
    );
    json.push_str("],\"colours\":[");
    json.push_str(
        &colouring
            .colours
            .iter()
            .map(|c| json_string(c))
            .collect::<Vec<_>>()
            .join(","),
    );
    json.push_str("],\"value\":[");
    json.push_str(&join_numbers(
        colouring.of_point.iter().map(|v| v.to_string()),
    ));
    json.push_str("],\"flagged\":[");
    json.push_str(&join_numbers(flagged_points.iter().map(|v| v.to_string())));
    json.push_str("],\"labels\":[");
    json.push_str(
        &s.labels
            .iter()
            .map(|l| json_string(l))
            .collect::<Vec<_>>()
            .join(","),
    );
    json.push_str("],\"points\":[");
    json.push_str(
        &s.points
            .iter()
            .map(|p| {
                format!(
                    "[{},{},{}]",
                    json_number(p[0]),
                    json_number(p[1]),
                    json_number(p[2])
                )
            })
            .collect::<Vec<_>>()
            .join(","),
    );
    json.push_str("]}");
    out.push_str("<script type=\"application/json\" id=\"sx3d-data\">");
    out.push_str(&script_safe(&json));
    out.push_str("</script>\n</section>\n");
}

fn figures(out: &mut String, figures: &[Figure]) {
    if figures.is_empty() {
        return;
    }
    out.push_str("<section id=\"figures\">\n<h2>Figures</h2>\n");
    for (n, f) in figures.iter().enumerate() {
        let number = n + 1;
        out.push_str(&format!("<figure id=\"figure-{number}\">\n"));
        match inline_svg(&f.svg, &format!("sx-f{number}-")) {
            Some(svg) => {
                out.push_str("<div class=\"sx-svgbox\">\n");
                out.push_str(&svg);
                out.push_str("\n</div>\n");
            }
            None => out.push_str(&format!(
                "<p class=\"sx-note\">This figure could not be shown inline; it is in plots/{}.</p>\n",
                escape(&f.file)
            )),
        }
        out.push_str(&format!(
            "<figcaption><span class=\"sx-fignum\">Figure {number}.</span> {} <span class=\"sx-file\">plots/{}</span></figcaption>\n</figure>\n",
            escape(&f.caption),
            escape(&f.file)
        ));
    }
    out.push_str("</section>\n");
}

fn cautions(out: &mut String, cautions: &[String]) {
    out.push_str("<section id=\"cautions\">\n<h2>Reading these results with care</h2>\n<ul class=\"sx-cautions\">\n");
    for c in cautions {
        out.push_str(&format!("<li>{}</li>\n", with_code(c)));
    }
    out.push_str("</ul>\n</section>\n");
}

fn provenance(out: &mut String, pairs: &[(String, String)]) {
    out.push_str("<section id=\"provenance\">\n<h2>Provenance</h2>\n<p class=\"sx-lede\">What produced this report. manifest.json beside it records every setting, including defaults, and every file's size and SHA-256.</p>\n");
    out.push_str("<div class=\"sx-scroll\"><table class=\"sx-provenance\"><tbody>\n");
    for (what, value) in pairs {
        out.push_str(&format!(
            "<tr><th scope=\"row\">{}</th><td><code>{}</code></td></tr>\n",
            escape(what),
            escape(value)
        ));
    }
    out.push_str("</tbody></table></div>\n</section>\n");
}

// ---------------------------------------------------------------- colours

/// How the 3-D view colours its points.
struct Colouring {
    /// The group column, if any.
    group: Option<String>,
    /// Each distinct value (sorted), or one entry without a group.
    values: Vec<String>,
    /// The colour of each entry of `values`.
    colours: Vec<&'static str>,
    /// Each point's index into `values`.
    of_point: Vec<usize>,
    /// (label, colour) in legend order.
    legend: Vec<(String, &'static str)>,
}

impl Colouring {
    /// Up to eight values get a colour each, in sorted order. With more, the seven
    /// most common (ties by name) get the first seven colours and the rest share
    /// the eighth, shown as "other".
    fn new(s: &Scores3d) -> Colouring {
        let n = s.points.len();
        let Some((name, raw)) = s.group.as_ref().filter(|(_, v)| v.len() == n) else {
            return Colouring {
                group: None,
                values: vec![String::new()],
                colours: vec![SINGLE_COLOUR],
                of_point: vec![0; n],
                legend: Vec::new(),
            };
        };
        let mut counts: BTreeMap<&str, usize> = BTreeMap::new();
        for v in raw {
            *counts.entry(v.as_str()).or_default() += 1;
        }
        let values: Vec<String> = counts.keys().map(|v| v.to_string()).collect();
        let index: BTreeMap<&str, usize> =
            counts.keys().enumerate().map(|(i, v)| (*v, i)).collect();
        let of_point = raw.iter().map(|v| index[v.as_str()]).collect();
        let shown = |v: &str| {
            if v.is_empty() {
                "(empty)".to_string()
            } else {
                v.to_string()
            }
        };
        let (colours, legend) = if values.len() <= PALETTE.len() {
            let colours: Vec<&'static str> = (0..values.len()).map(|i| PALETTE[i]).collect();
            let legend = values
                .iter()
                .zip(&colours)
                .map(|(v, c)| (shown(v), *c))
                .collect();
            (colours, legend)
        } else {
            let mut ranked: Vec<(&str, usize)> = counts.iter().map(|(v, c)| (*v, *c)).collect();
            ranked.sort_by(|a, b| b.1.cmp(&a.1).then(a.0.cmp(b.0)));
            let top = PALETTE.len() - 1;
            let mut colours = vec![PALETTE[top]; values.len()];
            let mut legend = Vec::new();
            for (rank, (v, _)) in ranked.iter().take(top).enumerate() {
                colours[index[v]] = PALETTE[rank];
                legend.push((shown(v), PALETTE[rank]));
            }
            legend.push((
                format!("other ({} values)", values.len() - top),
                PALETTE[top],
            ));
            (colours, legend)
        };
        Colouring {
            group: Some(name.clone()),
            values,
            colours,
            of_point,
            legend,
        }
    }
}

/// The CSS class of a legend swatch of a palette colour.
fn swatch_class(colour: &str) -> String {
    match PALETTE.iter().position(|c| *c == colour) {
        Some(i) => format!("sx-c{i}"),
        None => "sx-c4".to_string(),
    }
}

// ---------------------------------------------------------------- text

/// Escapes text for HTML element content and quoted attribute values.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len() + 8);
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

/// Escapes text, then shows `backquoted` parts as code.
fn with_code(text: &str) -> String {
    let escaped = escape(text);
    let parts: Vec<&str> = escaped.split('`').collect();
    if parts.len() < 3 || parts.len().is_multiple_of(2) {
        return escaped;
    }
    let mut out = String::with_capacity(escaped.len() + 32);
    for (i, part) in parts.iter().enumerate() {
        if i % 2 == 1 {
            out.push_str("<code>");
            out.push_str(part);
            out.push_str("</code>");
        } else {
            out.push_str(part);
        }
    }
    out
}

/// A JSON string literal.
fn json_string(text: &str) -> String {
    serde_json::to_string(text).expect("a string serialises")
}

/// Makes JSON safe inside a script element: every `<` becomes `\u003c` (a
/// JSON escape, valid only inside strings, the only place a `<` can occur), so
/// the data can neither close its element ("</script") nor open a comment-like
/// state ("<!--", "<script").
fn script_safe(json: &str) -> String {
    json.replace('<', "\\u003c")
}

fn join_numbers(items: impl Iterator<Item = String>) -> String {
    items.collect::<Vec<_>>().join(",")
}

// ---------------------------------------------------------------- numbers

/// A number for the embedded JSON: six significant digits (plenty for a
/// picture), or `null` for a value that is not finite.
fn json_number(v: f64) -> String {
    if !v.is_finite() {
        return "null".to_string();
    }
    let s = significant(v, 6);
    if s.contains('.') && !s.contains('e') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    }
}

/// A small horizontal bar, `value` of `widest`.
fn bar(value: f64, widest: f64, negative: bool) -> String {
    let width = if widest > 0.0 && value.is_finite() {
        (value / widest * 100.0).clamp(0.0, 100.0)
    } else {
        0.0
    };
    format!(
        "<span class=\"sx-bar{}\" style=\"width:{:.1}%\"></span>",
        if negative { " sx-neg" } else { "" },
        width
    )
}

/// Standard base64 with padding (for the script's hash in the page's policy).
fn base64(bytes: &[u8]) -> String {
    const ALPHABET: &[u8; 64] = b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    let mut out = String::with_capacity(bytes.len().div_ceil(3) * 4);
    for chunk in bytes.chunks(3) {
        let b = [
            chunk[0],
            chunk.get(1).copied().unwrap_or(0),
            chunk.get(2).copied().unwrap_or(0),
        ];
        let n = (u32::from(b[0]) << 16) | (u32::from(b[1]) << 8) | u32::from(b[2]);
        for i in 0..4 {
            if i <= chunk.len() {
                out.push(ALPHABET[((n >> (18 - 6 * i)) & 63) as usize] as char);
            } else {
                out.push('=');
            }
        }
    }
    out
}

// ---------------------------------------------------------------- SVG

/// The SVG element of an SVG document, ready to be placed in the page: any XML
/// declaration, doctype and leading comments are dropped, and every id gets
/// `prefix` (with the references to it: `url(#…)`, `href="#…"`,
/// `aria-labelledby`), so ids of different figures cannot clash. `None` when
/// the text does not start with an `<svg>` element.
pub fn inline_svg(svg: &str, prefix: &str) -> Option<String> {
    let mut rest = svg.trim_start_matches('\u{feff}');
    loop {
        rest = rest.trim_start();
        if rest.starts_with("<?") {
            rest = &rest[rest.find("?>")? + 2..];
        } else if rest.starts_with("<!--") {
            rest = &rest[rest.find("-->")? + 3..];
        } else if rest.starts_with("<!") {
            rest = &rest[declaration_end(rest)?..];
        } else {
            break;
        }
    }
    let after = rest.as_bytes().get(4).copied();
    if !rest.starts_with("<svg")
        || !matches!(after, Some(b' ' | b'\t' | b'\n' | b'\r' | b'>' | b'/'))
    {
        return None;
    }
    Some(prefix_ids(rest.trim_end(), prefix))
}

/// The end of a `<!DOCTYPE …>` declaration, which may hold a `[…]` subset.
fn declaration_end(text: &str) -> Option<usize> {
    let mut depth = 0usize;
    let mut quote: Option<u8> = None;
    for (i, &b) in text.as_bytes().iter().enumerate() {
        match (quote, b) {
            (Some(q), b) if b == q => quote = None,
            (Some(_), _) => {}
            (None, b'"' | b'\'') => quote = Some(b),
            (None, b'[') => depth += 1,
            (None, b']') => depth = depth.saturating_sub(1),
            (None, b'>') if depth == 0 => return Some(i + 1),
            _ => {}
        }
    }
    None
}

/// Rewrites the id attributes and id references of markup (see [`inline_svg`]).
fn prefix_ids(markup: &str, prefix: &str) -> String {
    let bytes = markup.as_bytes();
    let mut out = String::with_capacity(markup.len() + 256);
    let mut i = 0;
    while i < bytes.len() {
        let rest = &markup[i..];
        if rest.starts_with("<!--") {
            let end = rest.find("-->").map_or(rest.len(), |e| e + 3);
            out.push_str(&rest[..end]);
            i += end;
        } else if rest.starts_with("<![CDATA[") {
            let end = rest.find("]]>").map_or(rest.len(), |e| e + 3);
            out.push_str(&rest[..end]);
            i += end;
        } else if bytes[i] == b'<' && bytes.get(i + 1).is_some_and(u8::is_ascii_alphabetic) {
            let (tag, name, used) = rewrite_tag(rest, prefix);
            out.push_str(&tag);
            i += used;
            if name.eq_ignore_ascii_case("style") {
                // A style sheet: rewrite url(#…) references up to its end.
                let text = &markup[i..];
                let end = text.find("</").unwrap_or(text.len());
                out.push_str(&rewrite_urls(&text[..end], prefix));
                i += end;
            }
        } else {
            let end = rest.as_bytes()[1..]
                .iter()
                .position(|&b| b == b'<')
                .map_or(rest.len(), |e| e + 1);
            out.push_str(&rest[..end]);
            i += end;
        }
    }
    out
}

/// Rewrites one start tag at the beginning of `text`; returns the new tag, the
/// element name and how many bytes of `text` it used.
fn rewrite_tag(text: &str, prefix: &str) -> (String, String, usize) {
    let bytes = text.as_bytes();
    let is_space = |b: u8| b.is_ascii_whitespace();
    let mut i = 1;
    while i < bytes.len() && !is_space(bytes[i]) && bytes[i] != b'>' && bytes[i] != b'/' {
        i += 1;
    }
    let name = text[1..i].to_string();
    let mut out = String::from(&text[..i]);
    loop {
        let start = i;
        while i < bytes.len() && is_space(bytes[i]) {
            i += 1;
        }
        out.push_str(&text[start..i]);
        if i >= bytes.len() {
            return (out, name, i);
        }
        if bytes[i] == b'>' {
            out.push('>');
            return (out, name, i + 1);
        }
        if bytes[i] == b'/' {
            out.push('/');
            i += 1;
            continue;
        }
        // An attribute name.
        let name_start = i;
        while i < bytes.len() && !is_space(bytes[i]) && !matches!(bytes[i], b'=' | b'>' | b'/') {
            i += 1;
        }
        let attribute = &text[name_start..i];
        out.push_str(attribute);
        let before_eq = i;
        while i < bytes.len() && is_space(bytes[i]) {
            i += 1;
        }
        if i >= bytes.len() || bytes[i] != b'=' {
            // No value; give back the spaces to the next round.
            i = before_eq;
            if i == name_start {
                // A stray character: copy it to make progress.
                out.push(text[i..].chars().next().unwrap_or(' '));
                i += text[i..].chars().next().map_or(1, char::len_utf8);
            }
            continue;
        }
        out.push_str(&text[before_eq..=i]);
        i += 1;
        let spaces = i;
        while i < bytes.len() && is_space(bytes[i]) {
            i += 1;
        }
        out.push_str(&text[spaces..i]);
        if i < bytes.len() && matches!(bytes[i], b'"' | b'\'') {
            let quote = bytes[i];
            let value_start = i + 1;
            let value_end = text[value_start..]
                .bytes()
                .position(|b| b == quote)
                .map_or(text.len(), |e| value_start + e);
            out.push(quote as char);
            out.push_str(&rewrite_value(
                attribute,
                &text[value_start..value_end],
                prefix,
            ));
            if value_end < text.len() {
                out.push(quote as char);
                i = value_end + 1;
            } else {
                i = value_end;
            }
        } else {
            let value_start = i;
            while i < bytes.len() && !is_space(bytes[i]) && bytes[i] != b'>' {
                i += 1;
            }
            out.push_str(&rewrite_value(attribute, &text[value_start..i], prefix));
        }
    }
}

fn rewrite_value(attribute: &str, value: &str, prefix: &str) -> String {
    match attribute.to_ascii_lowercase().as_str() {
        "id" => format!("{prefix}{value}"),
        "href" | "xlink:href" => match value.strip_prefix('#') {
            Some(id) => format!("#{prefix}{id}"),
            None => rewrite_urls(value, prefix),
        },
        "aria-labelledby" | "aria-describedby" => value
            .split_ascii_whitespace()
            .map(|id| format!("{prefix}{id}"))
            .collect::<Vec<_>>()
            .join(" "),
        _ => rewrite_urls(value, prefix),
    }
}

fn rewrite_urls(text: &str, prefix: &str) -> String {
    if !text.contains("url(") {
        return text.to_string();
    }
    text.replace("url(#", &format!("url(#{prefix}"))
        .replace("url('#", &format!("url('#{prefix}"))
        .replace("url(\"#", &format!("url(\"#{prefix}"))
        .replace("url(&quot;#", &format!("url(&quot;#{prefix}"))
}

// ---------------------------------------------------------------- style and script

const STYLE: &str = r##":root{--ink:#1f2328;--muted:#57606a;--rule:#d0d7de;--soft:#f3f5f7;--accent:#0072B2;--accent-soft:#e8f2f9;--neg:#D55E00}
*{box-sizing:border-box}
[hidden]{display:none!important}
html{-webkit-text-size-adjust:100%;text-size-adjust:100%}
body{margin:0;background:#fff;color:var(--ink);font:16px/1.5 system-ui,-apple-system,"Segoe UI",Roboto,"Helvetica Neue",Arial,sans-serif}
main{max-width:62rem;margin:0 auto;padding:1.5rem 1.25rem 3rem}
header.sx-top{border-bottom:3px solid var(--accent);padding-bottom:1rem}
.sx-kicker{margin:0;color:var(--muted);font-size:.8rem;letter-spacing:.06em;text-transform:uppercase}
h1{font-size:1.7rem;line-height:1.25;margin:.25rem 0 .35rem;overflow-wrap:anywhere}
.sx-notes{white-space:pre-line;color:var(--muted);margin:0 0 .5rem;overflow-wrap:anywhere}
.sx-facts{list-style:none;margin:.8rem 0 0;padding:0;display:flex;flex-wrap:wrap;gap:.5rem}
.sx-facts li{background:var(--soft);border-radius:6px;padding:.45rem .75rem;font-size:.9rem;color:var(--muted)}
.sx-facts .sx-big{display:block;font-size:1.25rem;font-weight:600;color:var(--ink);font-variant-numeric:tabular-nums}
nav.sx-toc{margin:.8rem 0 0}
nav.sx-toc ul{list-style:none;margin:0;padding:0;display:flex;flex-wrap:wrap;gap:.2rem 1rem;font-size:.9rem}
nav.sx-toc a{color:var(--accent);text-decoration:none}
nav.sx-toc a:hover,nav.sx-toc a:focus{text-decoration:underline}
section{margin-top:2.2rem}
h2{font-size:1.25rem;line-height:1.3;margin:0 0 .6rem;padding-bottom:.25rem;border-bottom:1px solid var(--rule)}
h3{font-size:1rem;margin:0 0 .4rem}
.sx-lede{color:var(--muted);font-size:.92rem;margin:.2rem 0 .8rem;max-width:48rem}
.sx-muted{color:var(--muted);font-weight:400}
.sx-note{background:var(--soft);border-left:3px solid var(--muted);padding:.5rem .75rem}
ul.sx-sentences,ul.sx-cautions{padding-left:1.2rem;max-width:52rem}
ul.sx-sentences li,ul.sx-cautions li{margin:.3rem 0;overflow-wrap:anywhere}
code{font-family:ui-monospace,SFMono-Regular,Menlo,Consolas,"Liberation Mono",monospace;font-size:.88em;background:var(--soft);padding:0 .2em;border-radius:3px}
.sx-scroll{overflow-x:auto;-webkit-overflow-scrolling:touch}
table{border-collapse:collapse;font-size:.92rem}
th,td{padding:.3rem .65rem;text-align:left;vertical-align:top;border-bottom:1px solid var(--rule)}
thead th{border-bottom:2px solid var(--ink);font-weight:600;white-space:nowrap}
tbody th{font-weight:600}
.sx-num{text-align:right;font-variant-numeric:tabular-nums;white-space:nowrap}
.sx-name{overflow-wrap:break-word}
tr.sx-kept td,tr.sx-kept th{background:var(--accent-soft)}
.sx-tag{display:inline-block;font-size:.78rem;padding:0 .45rem;border-radius:999px;background:var(--accent);color:#fff}
.sx-barcol{width:8rem;min-width:5rem;vertical-align:middle}
.sx-bar{display:inline-block;height:.6rem;background:var(--accent);border-radius:1px;vertical-align:middle}
.sx-bar.sx-neg{background:var(--neg)}
.sx-sr{position:absolute;width:1px;height:1px;overflow:hidden;clip:rect(0 0 0 0);white-space:nowrap}
.sx-cards{display:grid;grid-template-columns:repeat(auto-fill,minmax(min(100%,21rem),1fr));gap:1rem}
.sx-card{border:1px solid var(--rule);border-radius:6px;padding:.75rem .85rem;overflow-x:auto}
.sx-card table{width:100%}
.sx-card .sx-barcol{width:5rem}
table.sx-flagged td{font-size:.9rem}
ul.sx-contrib{list-style:none;margin:0;padding:0}
ul.sx-contrib li{margin:0 0 .1rem}
.sx-hint{color:var(--muted);font-size:.88rem;margin:.2rem 0 .5rem}
#sx3d-canvas{display:block;width:100%;max-width:46rem;height:auto;border:1px solid var(--rule);border-radius:6px;background:#fff;touch-action:none;cursor:grab}
#sx3d-canvas:focus{outline:2px solid var(--accent);outline-offset:2px}
.sx-info{min-height:1.5em;font-size:.9rem;margin:.4rem 0;font-variant-numeric:tabular-nums;overflow-wrap:anywhere}
.sx-legend{list-style:none;margin:.3rem 0 0;padding:0;display:flex;flex-wrap:wrap;gap:.25rem 1rem;font-size:.88rem}
.sx-legend-title{font-weight:600}
.sx-sw{display:inline-block;width:.8rem;height:.8rem;border-radius:50%;margin-right:.35rem;vertical-align:-.08rem;border:1px solid rgba(0,0,0,.4)}
.sx-sw.sx-ring{background:#fff;border:2px solid #000}
.sx-c0{background:#E69F00}.sx-c1{background:#56B4E9}.sx-c2{background:#009E73}.sx-c3{background:#F0E442}.sx-c4{background:#0072B2}.sx-c5{background:#D55E00}.sx-c6{background:#CC79A7}.sx-c7{background:#000000}
figure{margin:1.2rem 0;border:1px solid var(--rule);border-radius:6px;padding:.75rem}
.sx-svgbox{overflow-x:auto}
.sx-svgbox svg{display:block;max-width:100%;height:auto;margin:0 auto}
figcaption{font-size:.9rem;color:var(--muted);margin-top:.5rem}
.sx-fignum{font-weight:600;color:var(--ink)}
.sx-file{font-family:ui-monospace,SFMono-Regular,Menlo,Consolas,"Liberation Mono",monospace;font-size:.82em;margin-left:.3rem}
table.sx-provenance th{white-space:nowrap;font-weight:600}
table.sx-provenance code{word-break:break-all;background:none;padding:0}
@media (max-width:40rem){body{font-size:15px}main{padding:1rem .75rem 2rem}h1{font-size:1.35rem}th,td{padding:.25rem .4rem}.sx-barcol{width:4rem;min-width:3rem}.sx-facts li{flex:1 1 45%}table.sx-variance .sx-barcol{display:none}}
@media print{body{font-size:10pt}main{max-width:none;padding:0}nav.sx-toc,.sx-hint,.sx-info{display:none}section{margin-top:1.2rem}h2{break-after:avoid}figure,.sx-card,tr{break-inside:avoid}.sx-scroll,.sx-card,.sx-svgbox{overflow:visible}a{color:inherit;text-decoration:none}.sx-facts li,tr.sx-kept td,tr.sx-kept th,.sx-bar,.sx-sw,.sx-tag{-webkit-print-color-adjust:exact;print-color-adjust:exact}#sx3d-canvas{max-width:30rem;break-inside:avoid}}
"##;

/// The rotatable 3-D view. It reads its data from the JSON element, shows the
/// view (hidden without a script), draws it, and marks the canvas with
/// `data-ready="yes"` after its first drawing.
const SCRIPT: &str = r##"
(function () {
  "use strict";
  var source = document.getElementById("sx3d-data");
  var box = document.getElementById("sx3d-box");
  var canvas = document.getElementById("sx3d-canvas");
  var info = document.getElementById("sx3d-info");
  if (!source || !box || !canvas || !canvas.getContext) { return; }
  var ctx = canvas.getContext("2d");
  if (!ctx) { return; }
  var data = JSON.parse(source.textContent);
  var n = data.points.length;
  var flagged = {};
  data.flagged.forEach(function (i) { flagged[i] = true; });

  // Scale every point into the unit ball (the scores are centred on 0).
  var reach = 0, i, a;
  for (i = 0; i < n; i++) {
    var p = data.points[i];
    if (p[0] === null || p[1] === null || p[2] === null) { continue; }
    reach = Math.max(reach, Math.sqrt(p[0] * p[0] + p[1] * p[1] + p[2] * p[2]));
  }
  if (!(reach > 0)) { reach = 1; }
  var unit = data.points.map(function (p) {
    return (p[0] === null || p[1] === null || p[2] === null) ? null : [p[0] / reach, p[1] / reach, p[2] / reach];
  });

  var START_YAW = -0.55, START_PITCH = 0.35;
  var yaw = START_YAW, pitch = START_PITCH;
  var width = 0, height = 0, ratio = 1;
  var screen = new Array(n);
  var picked = -1, pending = false, drag = null;

  box.hidden = false;

  function fit() {
    var w = canvas.clientWidth || 640;
    var h = Math.round(Math.max(240, Math.min(w * 0.75, 560)));
    var r = window.devicePixelRatio || 1;
    if (w !== width || h !== height || r !== ratio) {
      width = w; height = h; ratio = r;
      canvas.style.height = h + "px";
      canvas.width = Math.round(w * r);
      canvas.height = Math.round(h * r);
    }
  }

  // PC1 to the right, PC2 up, PC3 towards the viewer; turn about the vertical
  // axis (yaw), then about the horizontal one (pitch); mild perspective.
  function project(u) {
    var cy = Math.cos(yaw), sy = Math.sin(yaw), cp = Math.cos(pitch), sp = Math.sin(pitch);
    var x = u[0] * cy + u[2] * sy;
    var z1 = -u[0] * sy + u[2] * cy;
    var y = u[1] * cp - z1 * sp;
    var z = u[1] * sp + z1 * cp;
    var scale = Math.min(width, height) * 0.39;
    var f = 6 / (6 - z);
    return [width / 2 + x * scale * f, height / 2 - y * scale * f, z];
  }

  function label(text, at) {
    ctx.font = "600 13px system-ui, sans-serif";
    var w = ctx.measureText(text).width;
    var left = at[0] < width / 2 - 4 ? at[0] - w : (at[0] > width / 2 + 4 ? at[0] : at[0] - w / 2);
    left = Math.max(4, Math.min(width - w - 4, left));
    var top = Math.max(10, Math.min(height - 10, at[1]));
    ctx.textBaseline = "middle";
    ctx.lineWidth = 4;
    ctx.strokeStyle = "rgba(255,255,255,0.9)";
    ctx.strokeText(text, left, top);
    ctx.fillStyle = "#1f2328";
    ctx.fillText(text, left, top);
  }

  function draw() {
    pending = false;
    fit();
    ctx.setTransform(ratio, 0, 0, ratio, 0, 0);
    ctx.globalAlpha = 1;
    ctx.fillStyle = "#ffffff";
    ctx.fillRect(0, 0, width, height);

    var axes = [[1, 0, 0], [0, 1, 0], [0, 0, 1]];
    ctx.lineWidth = 1;
    ctx.strokeStyle = "#8c959f";
    for (a = 0; a < 3; a++) {
      var e = axes[a];
      var from = project([-e[0], -e[1], -e[2]]), to = project(e);
      ctx.beginPath();
      ctx.moveTo(from[0], from[1]);
      ctx.lineTo(to[0], to[1]);
      ctx.stroke();
    }

    var order = [];
    for (i = 0; i < n; i++) {
      screen[i] = unit[i] ? project(unit[i]) : null;
      if (screen[i]) { order.push(i); }
    }
    order.sort(function (s, t) { return (screen[s][2] - screen[t][2]) || (s - t); });
    var radius = Math.max(2.5, Math.min(4.5, width / 180));
    for (var k = 0; k < order.length; k++) {
      i = order[k];
      var q = screen[i];
      var near = (q[2] + 1) / 2;
      ctx.globalAlpha = 0.55 + 0.45 * near;
      ctx.beginPath();
      ctx.arc(q[0], q[1], radius * (0.8 + 0.4 * near), 0, 2 * Math.PI);
      ctx.fillStyle = data.colours[data.value[i]];
      ctx.fill();
      ctx.lineWidth = flagged[i] ? 1.8 : 0.6;
      ctx.strokeStyle = flagged[i] ? "#000000" : "rgba(0,0,0,0.45)";
      ctx.stroke();
    }
    ctx.globalAlpha = 1;
    if (picked >= 0 && screen[picked]) {
      ctx.beginPath();
      ctx.arc(screen[picked][0], screen[picked][1], radius + 5, 0, 2 * Math.PI);
      ctx.lineWidth = 2;
      ctx.strokeStyle = "#1f2328";
      ctx.stroke();
    }
    for (a = 0; a < 3; a++) {
      var end = axes[a];
      label(data.axes[a], project([end[0] * 1.08, end[1] * 1.08, end[2] * 1.08]));
    }
    canvas.setAttribute("data-drawn", String(order.length));
    canvas.setAttribute("data-ready", "yes");
  }

  function redraw() {
    if (pending) { return; }
    pending = true;
    if (window.requestAnimationFrame) { window.requestAnimationFrame(draw); } else { setTimeout(draw, 16); }
  }

  function describe() {
    if (!info) { return; }
    if (picked < 0) { info.textContent = ""; return; }
    var p = data.points[picked];
    var text = data.labels[picked] || ("point " + (picked + 1));
    if (data.group !== null) { text += " \u00b7 " + data.group + ": " + data.values[data.value[picked]]; }
    text += " \u00b7 " + [0, 1, 2].map(function (a) {
      return data.axes[a].split(" ")[0] + " " + (p[a] === null ? "?" : Number(p[a]).toPrecision(4));
    }).join(", ");
    if (flagged[picked]) { text += " \u00b7 flagged"; }
    info.textContent = text;
  }

  function pick(x, y) {
    var best = -1, bestDistance = 64;
    for (var j = 0; j < n; j++) {
      var q = screen[j];
      if (!q) { continue; }
      var d = (q[0] - x) * (q[0] - x) + (q[1] - y) * (q[1] - y);
      if (d < bestDistance || (d === bestDistance && best >= 0 && q[2] > screen[best][2])) { best = j; bestDistance = d; }
    }
    if (best !== picked) { picked = best; describe(); redraw(); }
  }

  function at(e) {
    var rect = canvas.getBoundingClientRect();
    return [e.clientX - rect.left, e.clientY - rect.top];
  }
  function begin(xy) { drag = xy; canvas.style.cursor = "grabbing"; }
  function move(xy) {
    if (!drag) { return false; }
    yaw += (xy[0] - drag[0]) * 0.01;
    pitch = Math.max(-1.55, Math.min(1.55, pitch + (xy[1] - drag[1]) * 0.01));
    drag = xy;
    redraw();
    return true;
  }
  function stop() { drag = null; canvas.style.cursor = ""; }
  function reset() { yaw = START_YAW; pitch = START_PITCH; redraw(); }

  if (window.PointerEvent) {
    canvas.addEventListener("pointerdown", function (e) {
      var xy = at(e);
      pick(xy[0], xy[1]);
      begin(xy);
      try { canvas.setPointerCapture(e.pointerId); } catch (ignored) { /* not an active pointer */ }
      e.preventDefault();
    });
    canvas.addEventListener("pointermove", function (e) {
      var xy = at(e);
      if (!move(xy) && e.pointerType === "mouse") { pick(xy[0], xy[1]); }
    });
    canvas.addEventListener("pointerup", stop);
    canvas.addEventListener("pointercancel", stop);
  } else {
    canvas.addEventListener("mousedown", function (e) { var xy = at(e); pick(xy[0], xy[1]); begin(xy); e.preventDefault(); });
    window.addEventListener("mousemove", function (e) { var xy = at(e); if (!move(xy) && e.target === canvas) { pick(xy[0], xy[1]); } });
    window.addEventListener("mouseup", stop);
    canvas.addEventListener("touchstart", function (e) {
      if (e.touches.length !== 1) { return; }
      var xy = at(e.touches[0]);
      pick(xy[0], xy[1]);
      begin(xy);
      e.preventDefault();
    }, { passive: false });
    canvas.addEventListener("touchmove", function (e) {
      if (e.touches.length !== 1) { return; }
      move(at(e.touches[0]));
      e.preventDefault();
    }, { passive: false });
    canvas.addEventListener("touchend", stop);
    canvas.addEventListener("touchcancel", stop);
  }
  canvas.addEventListener("dblclick", reset);
  canvas.addEventListener("keydown", function (e) {
    var step = 0.1;
    if (e.key === "ArrowLeft") { yaw -= step; } else if (e.key === "ArrowRight") { yaw += step; }
    else if (e.key === "ArrowUp") { pitch = Math.max(-1.55, pitch - step); }
    else if (e.key === "ArrowDown") { pitch = Math.min(1.55, pitch + step); }
    else if (e.key === "0" || e.key === "Home") { reset(); e.preventDefault(); return; }
    else { return; }
    e.preventDefault();
    redraw();
  });
  window.addEventListener("resize", redraw);
  draw();
})();
"##;

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn significant_digits() {
        assert_eq!(significant(6.70021, 4), "6.700");
        assert_eq!(significant(9.99996, 4), "10.00");
        assert_eq!(significant(0.0123456, 4), "0.01235");
        assert_eq!(significant(123456.0, 4), "123456");
        assert_eq!(significant(1.23456e-7, 4), "1.235e-7");
        assert_eq!(significant(-2.5e9, 4), "-2.500e9");
        assert_eq!(significant(0.0, 4), "0");
        assert_eq!(significant(-0.0, 4), "0");
    }

    #[test]
    fn percentages_and_fixed() {
        assert_eq!(percent(0.5712), "57.1 %");
        assert_eq!(percent(1.0), "100.0 %");
        assert_eq!(fixed(-0.0001, 3), "0.000");
        assert_eq!(fixed(-0.4126, 3), "-0.413");
    }

    #[test]
    fn escaping_and_code() {
        assert_eq!(
            escape("<a href=\"x\">&'</a>"),
            "&lt;a href=&quot;x&quot;&gt;&amp;&#39;&lt;/a&gt;"
        );
        assert_eq!(
            with_code("rule `broken-stick` <b>"),
            "rule <code>broken-stick</code> &lt;b&gt;"
        );
        assert_eq!(with_code("one ` only"), "one ` only");
    }

    #[test]
    fn json_cannot_close_its_script() {
        let s = script_safe(&json_string("</script><!-- x"));
        assert!(!s.contains('<'));
        let back: String = serde_json::from_str(&s).unwrap();
        assert_eq!(back, "</script><!-- x");
    }

    #[test]
    fn base64_matches_known_values() {
        assert_eq!(base64(b""), "");
        assert_eq!(base64(b"f"), "Zg==");
        assert_eq!(base64(b"fo"), "Zm8=");
        assert_eq!(base64(b"foo"), "Zm9v");
        assert_eq!(base64(b"foobar"), "Zm9vYmFy");
    }

    #[test]
    fn svg_prolog_is_dropped_and_ids_prefixed() {
        let svg = "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n<!DOCTYPE svg PUBLIC \"-//W3C//DTD SVG 1.1//EN\" \"x.dtd\">\n<!-- a figure -->\n<svg xmlns=\"http://www.w3.org/2000/svg\" aria-labelledby=\"t d\"><title id=\"t\">T</title><desc id='d'>a > b</desc><defs><clipPath id=\"clip\"><rect/></clipPath></defs><g clip-path=\"url(#clip)\"><use href=\"#clip\"/><use xlink:href=\"#clip\"/></g><style>.a{fill:url(#clip)}</style><text>id=\"x\" &amp; url(#clip)</text></svg>\n";
        let out = inline_svg(svg, "p-").unwrap();
        assert!(out.starts_with("<svg xmlns=\"http://www.w3.org/2000/svg\""));
        assert!(out.contains("aria-labelledby=\"p-t p-d\""));
        assert!(out.contains("<title id=\"p-t\">"));
        assert!(out.contains("<desc id='p-d'>a > b</desc>"));
        assert!(out.contains("<clipPath id=\"p-clip\">"));
        assert!(out.contains("clip-path=\"url(#p-clip)\""));
        assert!(out.contains("<use href=\"#p-clip\"/>"));
        assert!(out.contains("<use xlink:href=\"#p-clip\"/>"));
        assert!(out.contains(".a{fill:url(#p-clip)}"));
        // Text content is left alone.
        assert!(out.contains("<text>id=\"x\" &amp; url(#clip)</text>"));
        assert!(out.ends_with("</svg>"));
        assert_eq!(inline_svg("<p>not svg</p>", "p-"), None);
        assert_eq!(
            inline_svg("<svg/>", "p-").as_deref(),
            Some("<svg/>"),
            "an empty element is kept"
        );
    }

    fn small_view() -> ReportView {
        ReportView {
            title: "T & <b>".into(),
            notes: Some("line one\nline two".into()),
            summary: vec!["One sentence with `code`.".into()],
            variance: vec![
                VarianceLine {
                    component: 1,
                    eigenvalue: 2.5,
                    share: 0.625,
                    cumulative: 0.625,
                    kept: true,
                },
                VarianceLine {
                    component: 2,
                    eigenvalue: 1.0,
                    share: 0.25,
                    cumulative: 0.875,
                    kept: false,
                },
                VarianceLine {
                    component: 3,
                    eigenvalue: 0.5,
                    share: 0.125,
                    cumulative: 1.0,
                    kept: false,
                },
            ],
            top_loadings: vec![vec![("<x>".into(), -0.7), ("y".into(), 0.5)]],
            confidence: 0.95,
            flagged: vec![FlaggedLine {
                label: "a\"b".into(),
                t2: 9.0,
                spe: 1.0,
                t2_above: true,
                spe_above: false,
                top: vec![("<x>".into(), 5.0, 0.1)],
            }],
            figures: vec![
                Figure {
                    file: "a.svg".into(),
                    caption: "first".into(),
                    svg: "<?xml version=\"1.0\"?><svg id=\"s\"></svg>".into(),
                },
                Figure {
                    file: "b.svg".into(),
                    caption: "second".into(),
                    svg: "<svg id=\"s\"></svg>".into(),
                },
            ],
            scores3d: Some(Scores3d {
                axis_titles: ["PC1 (62.5 %)".into(), "PC2".into(), "PC3".into()],
                points: vec![[1.0, 2.0, 3.0], [-1.0, -2.0, -3.0]],
                labels: vec!["a\"b".into(), "</script>".into()],
                group: Some(("g".into(), vec!["x".into(), "y".into()])),
            }),
            cautions: vec!["Careful.".into()],
            provenance: vec![("tool".into(), "sextant 0.1.0".into())],
        }
    }

    #[test]
    fn page_is_deterministic_escaped_and_self_contained() {
        let view = small_view();
        let html = render(&view);
        assert_eq!(html, render(&view));
        assert!(html.contains("<h1>T &amp; &lt;b&gt;</h1>"));
        assert!(html.contains("a&quot;b"));
        assert!(html.contains("&lt;x&gt;"));
        assert!(!html.contains("<x>"));
        assert_eq!(html.matches("<script").count(), 2, "the data and the code");
        assert_eq!(html.matches("</script>").count(), 2);
        assert!(html.contains("\\u003c/script>"));
        assert!(html.contains("id=\"sx-f1-s\"") && html.contains("id=\"sx-f2-s\""));
        assert!(!html.contains("<?xml"));
        assert!(html.contains("-0.700"));
        assert!(html.contains("62.5 %") && html.contains("87.5 %"));
        assert!(html.contains("script-src 'sha256-"));
        assert!(
            !html.contains("http:") && !html.contains("https:"),
            "no URL in this view"
        );
    }

    #[test]
    fn page_classes_cannot_style_figures() {
        // Inline SVG shares the page's style sheet: every class the sheet
        // names carries the sx- prefix, so a figure's own classes ("bar",
        // "legend", …) are never restyled by it.
        let bytes = STYLE.as_bytes();
        for (i, _) in STYLE.match_indices('.') {
            if bytes.get(i + 1).is_some_and(u8::is_ascii_alphabetic) {
                assert!(
                    STYLE[i..].starts_with(".sx-"),
                    "unprefixed class at {}",
                    &STYLE[i..i + 20]
                );
            }
        }
        let html = render(&small_view());
        let outside_svg: String = html
            .split("<svg")
            .enumerate()
            .map(|(k, part)| {
                if k == 0 {
                    part
                } else {
                    part.split_once("</svg>").map_or("", |p| p.1)
                }
            })
            .collect();
        for (i, _) in outside_svg.match_indices(" class=\"") {
            assert!(
                outside_svg[i + 8..].starts_with("sx-"),
                "unprefixed class: {}",
                &outside_svg[i..i + 30]
            );
        }
    }

    #[test]
    fn many_groups_fold_into_other() {
        let values: Vec<String> = (0..12).map(|i| format!("v{:02}", i % 10)).collect();
        let s = Scores3d {
            axis_titles: ["a".into(), "b".into(), "c".into()],
            points: vec![[0.0; 3]; 12],
            labels: (0..12).map(|i| i.to_string()).collect(),
            group: Some(("g".into(), values)),
        };
        let c = Colouring::new(&s);
        assert_eq!(c.values.len(), 10);
        assert_eq!(c.legend.len(), 8);
        assert_eq!(c.legend[0], ("v00".to_string(), PALETTE[0]));
        assert_eq!(c.legend[7].0, "other (3 values)");
        assert_eq!(c.colours[9], PALETTE[7]);
    }
}
