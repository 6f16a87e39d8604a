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
//!
//! The page is built section by section: `overview` (the header with its key
//! facts, the contents and the summary), `results` (variance, loadings and
//! flagged rows), `scores3d` (the rotatable view and its data), `figures`
//! and `closing` (cautions and provenance). `svg_ids` inlines the figures
//! with ids that cannot clash; the style sheet and the view's script are the
//! files `style.css` and `view3d.js` beside this one.

pub mod batch;
mod closing;
mod figures;
mod html;
mod overview;
mod results;
mod scores3d;
mod svg_ids;

pub use html::escape;

pub use svg_ids::inline_svg;

use super::view::ReportView;
use sha2::{Digest, Sha256};

/// The colour-blind-safe palette of Okabe & Ito (2008), in its usual order.
pub const PALETTE: [&str; 8] = [
    "#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7", "#000000",
];

/// At most this many flagged rows are listed; contributions.csv has them all.
pub const MAX_FLAGGED_ROWS: usize = 100;

/// The page's style sheet (every class it names starts with `sx-`).
const STYLE: &str = include_str!("style.css");

/// The rotatable 3-D view. It reads its data from the JSON element, shows the
/// view (hidden without a script), draws it, and marks the canvas with
/// `data-ready="yes"` after its first drawing. The file starts with an empty
/// line: the page's policy allows the script by the SHA-256 of these bytes.
const SCRIPT: &str = include_str!("view3d.js");

/// Renders the report page.
pub fn render(view: &ReportView) -> String {
    let three_d = view.scores3d.as_ref().filter(|s| !s.points.is_empty());
    let mut body = String::with_capacity(64 * 1024);
    overview::header(&mut body, view);
    overview::contents(&mut body, view, three_d.is_some());
    overview::summary(&mut body, view);
    results::variance(&mut body, &view.variance);
    results::loadings(&mut body, view);
    results::flagged(&mut body, view);
    if let Some(s) = three_d {
        scores3d::scores_3d(&mut body, s, &view.flagged);
    }
    figures::figures(&mut body, &view.figures);
    closing::cautions(&mut body, &view.cautions);
    closing::provenance(&mut body, &view.provenance);
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::outputs::view::{Figure, FlaggedLine, Scores3d, VarianceLine};

    #[test]
    fn base64_matches_known_values() {
        assert_eq!(base64(b""), "");
        assert_eq!(base64(b"f"), "Zg==");
        assert_eq!(base64(b"fo"), "Zm8=");
        assert_eq!(base64(b"foo"), "Zm9v");
        assert_eq!(base64(b"foobar"), "Zm9vYmFy");
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
}
