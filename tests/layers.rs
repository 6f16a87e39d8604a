//! The crate is a house whose floors import only downward: this test reads
//! every `src/**/*.rs`, finds each reference to `crate::NAME` (also inside
//! `use crate::{...}` groups) outside comments, string literals and
//! `#[cfg(test)]` items, maps both ends to their top-level module, and fails
//! on any reference from a module to one on its own floor or above it, on any
//! cycle, and on any top-level module the table below does not list.

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

/// The floors, bottom first. A module may import only modules on lower floors;
/// modules on the same floor may not import each other.
const LAYERS: &[&[&str]] = &[
    // The error types and their wording, path helpers, every number format.
    &["error", "paths", "text"],
    // The progress line on standard error.
    &["progress"],
    // Timings (printed under the progress line); what a signal must remove.
    &["timing", "cleanup"],
    // Our numerical kernels and distribution functions.
    &["linalg", "stats"],
    // CSV bytes → Table; the names of hidden entries and scratch files.
    &["table", "scratch"],
    // The row store: chunks of rows in memory or in a scratch file.
    &["store"],
    // Recipes: raw TOML, the plan, explain, plots, the resolved recipe.
    &["recipe"],
    // The stages of the analysis (no I/O).
    &["stages"],
    // Every analysed row's results and every filled cell, in chunks.
    &["row_results"],
    // What the orchestrator, the passes engine and the outputs share.
    &["analysis"],
    // The passes engine.
    &["stream"],
    // Result files, figures, report, manifest, folder and lock.
    &["outputs"],
    // The orchestrator of `run` and `check`.
    &["run"],
    // The commands that read results folders and recipes: verify, pin.
    &["verify", "pin"],
    // The commands built on them and on the orchestrator: diff, apply, new.
    &["diff", "apply", "new_recipe"],
    // The command line.
    &["cli"],
];

/// Files that are not a module of the library (the crate root declares the
/// modules; the binary uses the library by its name).
const ROOTS: &[&str] = &["lib.rs", "main.rs"];

/// One reference `crate::NAME` in a file.
#[derive(Debug, Clone, PartialEq, Eq)]
struct Reference {
    target: String,
    line: usize,
}

/// The source with comments, doc comments, string and char literals blanked
/// out (newlines kept, so line numbers stay).
fn blank_non_code(src: &str) -> String {
    let c: Vec<char> = src.chars().collect();
    let mut out = String::with_capacity(src.len());
    let mut i = 0;
    let keep_lines = |out: &mut String, ch: char| out.push(if ch == '\n' { '\n' } else { ' ' });
    while i < c.len() {
        let next = c.get(i + 1).copied();
        if c[i] == '/' && next == Some('/') {
            while i < c.len() && c[i] != '\n' {
                out.push(' ');
                i += 1;
            }
        } else if c[i] == '/' && next == Some('*') {
            let mut depth = 0;
            while i < c.len() {
                if c[i] == '/' && c.get(i + 1) == Some(&'*') {
                    depth += 1;
                    out.push_str("  ");
                    i += 2;
                } else if c[i] == '*' && c.get(i + 1) == Some(&'/') {
                    depth -= 1;
                    out.push_str("  ");
                    i += 2;
                    if depth == 0 {
                        break;
                    }
                } else {
                    keep_lines(&mut out, c[i]);
                    i += 1;
                }
            }
        } else if c[i] == 'r' && (next == Some('"') || next == Some('#')) && !ident_before(&c, i) {
            // A raw string: r"..." or r#"..."#.
            let mut j = i + 1;
            let mut hashes = 0;
            while c.get(j) == Some(&'#') {
                hashes += 1;
                j += 1;
            }
            if c.get(j) != Some(&'"') {
                out.push(c[i]);
                i += 1;
                continue;
            }
            j += 1;
            let closes = |k: usize| c[k] == '"' && (1..=hashes).all(|h| c.get(k + h) == Some(&'#'));
            while j < c.len() && !closes(j) {
                j += 1;
            }
            let end = (j + 1 + hashes).min(c.len());
            for &ch in &c[i..end] {
                keep_lines(&mut out, ch);
            }
            i = end;
        } else if c[i] == '"' {
            out.push(' ');
            i += 1;
            while i < c.len() && c[i] != '"' {
                if c[i] == '\\' {
                    keep_lines(&mut out, c[i]);
                    i += 1;
                }
                if i < c.len() {
                    keep_lines(&mut out, c[i]);
                    i += 1;
                }
            }
            out.push(' ');
            i += 1;
        } else if c[i] == '\'' {
            // A char literal ('x', '\n', '\''), or else a lifetime.
            let end = if next == Some('\\') {
                (i + 2..c.len()).find(|&k| c[k] == '\'' && k > i + 2)
            } else if c.get(i + 2) == Some(&'\'') {
                Some(i + 2)
            } else {
                None
            };
            match end {
                Some(e) => {
                    (i..=e).for_each(|_| out.push(' '));
                    i = e + 1;
                }
                None => {
                    out.push('\'');
                    i += 1;
                }
            }
        } else {
            out.push(c[i]);
            i += 1;
        }
    }
    out
}

fn ident_before(c: &[char], i: usize) -> bool {
    i > 0 && (c[i - 1].is_alphanumeric() || c[i - 1] == '_')
}

/// The code with every `#[cfg(test)]` item (a test module, a test-only
/// function or import) blanked out. `code` has no comments or literals left.
fn blank_test_items(code: &str) -> String {
    const MARK: &str = "#[cfg(test)]";
    let mut out: Vec<char> = code.chars().collect();
    let text: String = out.iter().collect();
    let mut from = 0;
    while let Some(at) = text[from..].find(MARK).map(|k| k + from) {
        // Positions in chars: the code is ASCII where it matters, but names
        // may not be, so convert.
        let start = text[..at].chars().count();
        let mut i = start;
        let mut depth = 0usize;
        // Skip this and any further attributes, then the item: up to its `;`
        // or its balanced braces.
        let mut in_attribute = 0usize;
        while i < out.len() {
            let ch = out[i];
            if in_attribute > 0 {
                match ch {
                    '[' => in_attribute += 1,
                    ']' => in_attribute -= 1,
                    _ => {}
                }
            } else if ch == '#' && out.get(i + 1) == Some(&'[') {
                in_attribute = 1;
                out[i] = ' ';
                i += 2;
                continue;
            } else if ch == '{' {
                depth += 1;
            } else if ch == '}' {
                depth -= 1;
                if depth == 0 {
                    out[i] = ' ';
                    break;
                }
            } else if ch == ';' && depth == 0 {
                out[i] = ' ';
                break;
            }
            if ch != '\n' {
                out[i] = ' ';
            }
            i += 1;
        }
        from = at + MARK.len();
    }
    out.into_iter().collect()
}

/// Every `crate::NAME` in `code`, with its line (1-based); a group
/// `crate::{a::b, c}` gives each of its members.
fn references(code: &str) -> Vec<Reference> {
    let mut found = Vec::new();
    for (n, line) in code.lines().enumerate() {
        let mut rest = line;
        while let Some(at) = rest.find("crate::") {
            let before = rest[..at].chars().next_back();
            let after = &rest[at + "crate::".len()..];
            rest = after;
            if before.is_some_and(|b| b.is_alphanumeric() || b == '_' || b == '$') {
                continue;
            }
            if after.trim_start().starts_with('{') {
                continue; // a group: read below, over lines
            }
            let name: String = after
                .chars()
                .take_while(|c| c.is_alphanumeric() || *c == '_')
                .collect();
            if !name.is_empty() {
                found.push(Reference {
                    target: name,
                    line: n + 1,
                });
            }
        }
    }
    found.extend(group_references(code));
    found.sort_by_key(|r| r.line);
    found
}

/// The first name of each member of every `crate::{...}` group.
fn group_references(code: &str) -> Vec<Reference> {
    let mut found = Vec::new();
    let mut from = 0;
    while let Some(at) = code[from..].find("crate::").map(|k| k + from) {
        from = at + "crate::".len();
        let before = code[..at].chars().next_back();
        if before.is_some_and(|b| b.is_alphanumeric() || b == '_' || b == '$') {
            continue;
        }
        let after = &code[from..];
        let Some(open) = after.find(|c: char| !c.is_whitespace()) else {
            continue;
        };
        if !after[open..].starts_with('{') {
            continue;
        }
        let mut depth = 0;
        let mut member_start = true;
        let mut offset = from + open;
        for ch in after[open..].chars() {
            match ch {
                '{' => {
                    depth += 1;
                    if depth == 1 {
                        member_start = true;
                    }
                }
                '}' => {
                    depth -= 1;
                    if depth == 0 {
                        break;
                    }
                }
                ',' if depth == 1 => member_start = true,
                c if depth == 1 && member_start && (c.is_alphanumeric() || c == '_') => {
                    let name: String = code[offset..]
                        .chars()
                        .take_while(|c| c.is_alphanumeric() || *c == '_')
                        .collect();
                    found.push(Reference {
                        target: name,
                        line: code[..offset].matches('\n').count() + 1,
                    });
                    member_start = false;
                }
                _ => {}
            }
            offset += ch.len_utf8();
        }
    }
    found
}

/// The floor of each listed module.
fn floors() -> BTreeMap<&'static str, usize> {
    let mut floor = BTreeMap::new();
    for (i, layer) in LAYERS.iter().enumerate() {
        for &m in *layer {
            assert!(floor.insert(m, i).is_none(), "{m} is listed twice");
        }
    }
    floor
}

fn rust_files(dir: &Path, into: &mut Vec<PathBuf>) {
    let mut entries: Vec<_> = std::fs::read_dir(dir)
        .expect("src can be read")
        .map(|e| e.expect("an entry").path())
        .collect();
    entries.sort();
    for path in entries {
        if path.is_dir() {
            rust_files(&path, into);
        } else if path.extension().is_some_and(|e| e == "rs") {
            into.push(path);
        }
    }
}

/// The top-level module a file under `src` belongs to, or None for the roots.
fn top_module(relative: &Path) -> Option<String> {
    let first = relative.components().next()?.as_os_str().to_str()?;
    if ROOTS.contains(&first) {
        return None;
    }
    Some(first.trim_end_matches(".rs").to_string())
}

/// Every cross-module reference of the crate: (from, to) → where.
fn crate_graph(src: &Path) -> BTreeMap<(String, String), Vec<String>> {
    let mut files = Vec::new();
    rust_files(src, &mut files);
    let mut edges: BTreeMap<(String, String), Vec<String>> = BTreeMap::new();
    for file in files {
        let relative = file.strip_prefix(src).expect("under src");
        let Some(from) = top_module(relative) else {
            continue;
        };
        let text = std::fs::read_to_string(&file).expect("a source file");
        let code = blank_test_items(&blank_non_code(&text));
        for r in references(&code) {
            if r.target != from {
                edges
                    .entry((from.clone(), r.target))
                    .or_default()
                    .push(format!("src/{}:{}", relative.display(), r.line));
            }
        }
    }
    edges
}

/// What breaks the floors: references to the same floor or above, and
/// references to or from modules the table does not list.
fn violations(
    modules: &BTreeSet<String>,
    edges: &BTreeMap<(String, String), Vec<String>>,
) -> Vec<String> {
    let floor = floors();
    let mut problems = Vec::new();
    for m in modules {
        if !floor.contains_key(m.as_str()) {
            problems.push(format!(
                "src/{m}: a top-level module the table LAYERS in tests/layers.rs does not list"
            ));
        }
    }
    for ((from, to), places) in edges {
        let (Some(&a), Some(&b)) = (floor.get(from.as_str()), floor.get(to.as_str())) else {
            if !floor.contains_key(to.as_str()) {
                problems.push(format!(
                    "{}: `crate::{to}` names no listed module",
                    places[0]
                ));
            }
            continue;
        };
        if b >= a {
            let how = if a == b {
                "on its own floor"
            } else {
                "above it"
            };
            for place in places {
                problems.push(format!("{place}: {from} imports {to}, {how}"));
            }
        }
    }
    problems
}

/// Every cycle of the module graph, each as a path from its smallest module.
fn cycles(edges: &BTreeMap<(String, String), Vec<String>>) -> Vec<Vec<String>> {
    let mut next: BTreeMap<&str, Vec<&str>> = BTreeMap::new();
    for (from, to) in edges.keys() {
        next.entry(from).or_default().push(to);
    }
    let mut found = BTreeSet::new();
    for &start in next.keys() {
        // Paths from `start` through modules greater than it, back to it.
        let mut stack = vec![(start, vec![start])];
        while let Some((at, path)) = stack.pop() {
            for &to in next.get(at).map(Vec::as_slice).unwrap_or(&[]) {
                if to == start {
                    found.insert(path.iter().map(|s| s.to_string()).collect::<Vec<_>>());
                } else if to > start && !path.contains(&to) {
                    let mut longer = path.clone();
                    longer.push(to);
                    stack.push((to, longer));
                }
            }
        }
    }
    found.into_iter().collect()
}

#[test]
fn every_module_imports_only_the_floors_below_it() {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("src");
    let edges = crate_graph(&src);
    let mut modules = BTreeSet::new();
    for entry in std::fs::read_dir(&src).expect("src can be read") {
        let path = entry.expect("an entry").path();
        let relative = path.strip_prefix(&src).expect("under src");
        // A folder is a module when it holds Rust files (src/schemas holds JSON).
        let is_module = if path.is_dir() {
            let mut inside = Vec::new();
            rust_files(&path, &mut inside);
            !inside.is_empty()
        } else {
            path.extension().is_some_and(|e| e == "rs")
        };
        if let Some(m) = top_module(relative).filter(|_| is_module) {
            modules.insert(m);
        }
    }
    assert!(
        modules.contains("run") && modules.contains("outputs") && edges.len() > 20,
        "the source was not found or not read: {modules:?}, {} edges",
        edges.len()
    );
    let mut problems = violations(&modules, &edges);
    for cycle in cycles(&edges) {
        problems.push(format!("a cycle: {} → {}", cycle.join(" → "), cycle[0]));
    }
    assert!(problems.is_empty(), "\n{}\n", problems.join("\n"));
}

#[test]
fn comments_literals_and_test_modules_are_not_read() {
    let src = r##"
//! See [`crate::outputs`].
use crate::error::Error; // not crate::run
/* crate::cli /* nested crate::cli */ */
fn f<'a>(x: &'a str) -> char {
    let _ = "crate::run";
    let _ = r#"crate::run "quoted""#;
    let _ = '"';
    let _ = crate::stats::f('\'');
    '{'
}
use crate::{
    linalg::Matrix,
    table::{self, Table},
};
#[cfg(test)]
mod tests {
    use crate::cli;
    fn g() { if true { crate::run::x(); } }
}
#[cfg(test)]
use crate::verify;
fn h() -> usize { crate::paths::x() }
"##;
    let code = blank_test_items(&blank_non_code(src));
    let found: Vec<(String, usize)> = references(&code)
        .into_iter()
        .map(|r| (r.target, r.line))
        .collect();
    let expected = [
        ("error", 3),
        ("stats", 9),
        ("linalg", 13),
        ("table", 14),
        ("paths", 23),
    ];
    let expected: Vec<(String, usize)> =
        expected.iter().map(|(m, l)| (m.to_string(), *l)).collect();
    assert_eq!(found, expected);
}

#[test]
fn an_upward_import_a_cycle_and_an_unlisted_module_are_reported() {
    let mut edges = BTreeMap::new();
    edges.insert(
        ("stages".into(), "outputs".into()),
        vec!["src/stages/x.rs:3".into()],
    );
    edges.insert(
        ("outputs".into(), "stages".into()),
        vec!["src/outputs/y.rs:4".into()],
    );
    edges.insert(
        ("timing".into(), "cleanup".into()),
        vec!["src/timing.rs:5".into()],
    );
    edges.insert(
        ("run".into(), "outputs".into()),
        vec!["src/run.rs:6".into()],
    );
    let modules: BTreeSet<String> = ["stages", "outputs", "timing", "cleanup", "run", "extra"]
        .iter()
        .map(|s| s.to_string())
        .collect();
    let problems = violations(&modules, &edges);
    assert_eq!(
        problems,
        [
            "src/extra: a top-level module the table LAYERS in tests/layers.rs does not list",
            "src/stages/x.rs:3: stages imports outputs, above it",
            "src/timing.rs:5: timing imports cleanup, on its own floor",
        ]
    );
    assert_eq!(
        cycles(&edges),
        [vec!["outputs".to_string(), "stages".into()]]
    );
}
