//! HTML text: escaping, `code` spans, JSON that cannot end its script element
//! and the small bars of the tables.

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
pub(super) fn with_code(text: &str) -> String {
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

/// Makes JSON safe inside a script element: every `<` becomes `\u003c` (a
/// JSON escape, valid only inside strings, the only place a `<` can occur), so
/// the data can neither close its element ("</script") nor open a comment-like
/// state ("<!--", "<script").
pub(super) fn script_safe(json: &str) -> String {
    json.replace('<', "\\u003c")
}

/// A small horizontal bar, `value` of `widest`.
pub(super) fn bar(value: f64, widest: f64, negative: bool) -> String {
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

#[cfg(test)]
mod tests {
    use super::*;

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
        let s = script_safe(&serde_json::to_string("</script><!-- x").unwrap());
        assert!(!s.contains('<'));
        let back: String = serde_json::from_str(&s).unwrap();
        assert_eq!(back, "</script><!-- x");
    }
}
