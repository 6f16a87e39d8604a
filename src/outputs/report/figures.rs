//! The figures, inlined as SVG elements with their captions.

use super::html::escape;
use super::svg_ids::inline_svg;
use crate::outputs::view::Figure;

pub(super) fn figures(out: &mut String, figures: &[Figure]) {
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
