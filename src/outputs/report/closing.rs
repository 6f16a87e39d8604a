//! The end of the page: the cautions for reading the results and the
//! provenance of the run.

use super::html::{escape, with_code};

pub(super) fn cautions(out: &mut String, cautions: &[String]) {
    out.push_str("<section id=\"cautions\">\n<h2>Reading these results with care</h2>\n<ul class=\"sx-cautions\">\n");
    for c in cautions {
        out.push_str(&format!("<li>{}</li>\n", with_code(c)));
    }
    out.push_str("</ul>\n</section>\n");
}

pub(super) fn provenance(out: &mut String, pairs: &[(String, String)]) {
    out.push_str("<section id=\"provenance\">\n<h2>Provenance</h2>\n<p class=\"sx-lede\">What produced this report. manifest.json beside it records every setting, including defaults, and every file's size and SHA-256.</p>\n");
    out.push_str("<div class=\"sx-scroll\"><table class=\"sx-provenance\"><tbody>\n");
    for (what, value) in pairs {
        out.push_str(&format!(
            "<tr><th scope=\"row\">{}</th><td><code>{}</code></td></tr>\n",
            escape(what),
            escape(value)
        ));
    }
    out.push_str("</tbody></table></div>\n");
    if pairs.iter().any(|(what, _)| what == "results digest") {
        // `run` prints two digests; the reader of the report sees one.
        out.push_str("<p>The results digest is the SHA-256 of the list of every other output's SHA-256 and path; <code>sextant run</code> prints it under the same name. The manifest digest that <code>run</code> also prints covers this report as well, so it cannot appear in it.</p>\n");
    }
    out.push_str("</section>\n");
}
