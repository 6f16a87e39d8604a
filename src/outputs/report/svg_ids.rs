//! Inline SVG: a figure's document becomes an element of the page, its prolog
//! dropped and every id (with the references to it) prefixed, so the ids of
//! different figures cannot clash.

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

#[cfg(test)]
mod tests {
    use super::*;

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
}
