//! Finds where a key or table the `toml` crate reports as defined twice was
//! defined first. The crate points at the second definition only; a reader
//! fixing the recipe needs both, so the recipe text is scanned line by line
//! for the earlier definition of the same dotted path (a `[table]` header, a
//! `key = value` line inside a table, or a dotted key that creates the table).

/// One definition on a line: the full dotted path it defines and whether it
/// is a table header.
struct Definition {
    offset: usize,
    path: Vec<String>,
    header: bool,
}

/// For a duplicate reported at byte `at`: the key as the recipe names it
/// (`[missing]` for a table, `input.id` for a key) and the 1-based line of its
/// first definition. `None` when the text does not show one.
pub fn first_definition(text: &str, at: usize) -> Option<(String, usize)> {
    let definitions = definitions(text);
    let second = definitions
        .iter()
        .rev()
        .find(|d| d.offset <= at && line_of(text, d.offset) == line_of(text, at))?;
    let first = definitions.iter().find(|d| {
        d.offset < second.offset
            && (d.path == second.path
                || (d.path.len() > second.path.len() && d.path.starts_with(&second.path)))
    })?;
    let name = second.path.join(".");
    let shown = if second.header {
        format!("[{name}]")
    } else {
        name
    };
    Some((shown, line_of(text, first.offset)))
}

fn line_of(text: &str, offset: usize) -> usize {
    1 + text.as_bytes()[..offset.min(text.len())]
        .iter()
        .filter(|&&b| b == b'\n')
        .count()
}

/// Every header and key line, in order, with the table it belongs to.
fn definitions(text: &str) -> Vec<Definition> {
    let mut out = Vec::new();
    let mut table: Vec<String> = Vec::new();
    let mut offset = 0;
    let mut in_long_string = false;
    for line in text.split_inclusive('\n') {
        let start = offset;
        offset += line.len();
        let trimmed = line.trim();
        // Lines inside a multi-line string are text, not definitions.
        let quotes = trimmed.matches("\"\"\"").count() + trimmed.matches("'''").count();
        let was_long = in_long_string;
        if quotes % 2 == 1 {
            in_long_string = !in_long_string;
        }
        if was_long || trimmed.is_empty() || trimmed.starts_with('#') {
            continue;
        }
        let at = start + (line.len() - line.trim_start().len());
        if let Some(inner) = trimmed.strip_prefix('[') {
            let array = inner.starts_with('[');
            let name = inner.trim_start_matches('[');
            let Some(end) = name.find(']') else { continue };
            table = dotted(&name[..end]);
            if !array {
                out.push(Definition {
                    offset: at,
                    path: table.clone(),
                    header: true,
                });
            }
        } else if let Some(eq) = trimmed.find('=') {
            let mut path = table.clone();
            path.extend(dotted(&trimmed[..eq]));
            out.push(Definition {
                offset: at,
                path,
                header: false,
            });
        }
    }
    out
}

/// The parts of a dotted key, unquoted and without spaces.
fn dotted(key: &str) -> Vec<String> {
    key.split('.')
        .map(|p| p.trim().trim_matches(['"', '\'']).to_string())
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn finds_the_first_definition_of_tables_keys_and_dotted_keys() {
        let text = "format = 1\n[input]\nfile = \"a.csv\"\nid = \"x\"\n[output]\nfolder = \"o\"\n[input]\nid = \"y\"\n";
        let second_table = text.rfind("[input]").unwrap();
        assert_eq!(
            first_definition(text, second_table + 1),
            Some(("[input]".into(), 2))
        );
        let key = "format = 1\n[input]\nid = \"x\"\n# id = 2\nid = \"y\"\n";
        assert_eq!(
            first_definition(key, key.rfind("id =").unwrap()),
            Some(("input.id".into(), 3))
        );
        let dotted_first = "format = 1\ninput.file = \"a\"\n[input]\nid = 1\n";
        assert_eq!(
            first_definition(dotted_first, dotted_first.find("[input]").unwrap()),
            Some(("[input]".into(), 2))
        );
        let in_string = "notes = \"\"\"\n[input]\n\"\"\"\n[input]\n";
        assert_eq!(
            first_definition(in_string, in_string.rfind("[input]").unwrap()),
            None
        );
    }
}
