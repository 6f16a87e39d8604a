//! Recipes: reading the TOML file ([`raw`]) and checking it against the data ([`plan`]).

pub mod applies;
mod duplicates;
pub mod explain;
pub mod plan;
pub mod plots;
pub mod raw;
pub mod resolved;

use crate::error::{Position, RecipeError, RecipeProblem};
use raw::RawRecipe;
use std::ops::Range;
use std::path::{Path, PathBuf};

/// A recipe file as read: its path, its text and the raw structure.
#[derive(Debug)]
pub struct LoadedRecipe {
    pub path: PathBuf,
    pub text: String,
    pub raw: RawRecipe,
}

impl LoadedRecipe {
    /// The folder that relative paths in the recipe start from.
    pub fn dir(&self) -> PathBuf {
        match self.path.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
            _ => PathBuf::from("."),
        }
    }

    /// An error pointing at `span` of the recipe text.
    pub fn error_at(&self, span: Range<usize>, problem: RecipeProblem) -> RecipeError {
        RecipeError {
            file: self.path.clone(),
            at: Some(Position::locate(&self.text, span.start)),
            problem,
        }
    }
}

/// Reads and parses a recipe; a syntax error, an unknown key, a wrong type or an
/// out-of-range value comes back with its line and column.
pub fn load(path: &Path) -> Result<LoadedRecipe, RecipeError> {
    let bytes = crate::paths::read_regular(path).map_err(|e| RecipeError {
        file: path.to_path_buf(),
        at: None,
        problem: RecipeProblem::Read(e),
    })?;
    let text = String::from_utf8(bytes).map_err(|e| {
        // Point at the first byte that is not UTF-8, in the text before it.
        let valid = e.utf8_error().valid_up_to();
        let before = String::from_utf8_lossy(&e.as_bytes()[..valid]).into_owned();
        let rest = &e.as_bytes()[valid..];
        let line_end = rest.iter().position(|&b| b == b'\n').unwrap_or(rest.len());
        let shown = format!("{before}{}", String::from_utf8_lossy(&rest[..line_end]));
        RecipeError {
            file: path.to_path_buf(),
            at: Some(Position::locate(&shown, valid)),
            problem: RecipeProblem::NotUtf8 { byte: rest[0] },
        }
    })?;
    parse(path, text)
}

/// Parses recipe text as if it were the file at `path` (which sets the folder
/// that relative paths start from).
pub fn parse(path: &Path, text: String) -> Result<LoadedRecipe, RecipeError> {
    let raw: RawRecipe = toml::from_str(&text).map_err(|e| {
        // serde reads an array of tables into a single table's fields one by
        // one, and complains about whatever comes first: name the real mistake.
        if let Some((offset, name)) = repeated_single_table(&text) {
            return RecipeError {
                file: path.to_path_buf(),
                at: Some(Position::locate(&text, offset)),
                problem: RecipeProblem::ArrayOfTables { name },
            };
        }
        // The crate names neither the key nor where it was first defined.
        let twice =
            e.message().starts_with("duplicate key") || e.message().starts_with("duplicate table");
        let first = e
            .span()
            .filter(|_| twice)
            .and_then(|s| duplicates::first_definition(&text, s.start));
        RecipeError {
            file: path.to_path_buf(),
            at: e.span().map(|s| Position::locate(&text, s.start)),
            problem: match first {
                Some((key, first)) => RecipeProblem::DefinedTwice { key, first },
                None => RecipeProblem::Syntax(plain_words(e.message().trim_end())),
            },
        }
    })?;
    let loaded = LoadedRecipe {
        path: path.to_path_buf(),
        text,
        raw,
    };
    if loaded.raw.format.get_ref().0 != 1 {
        return Err(loaded.error_at(
            loaded.raw.format.span(),
            RecipeProblem::Format {
                found: loaded.raw.format.get_ref().0,
            },
        ));
    }
    applies::check_applicable(&loaded)?;
    plan::check_number_marks(&loaded)?;
    Ok(loaded)
}

/// The first `[[name]]` header of a table that the recipe has once, with its
/// offset (only `[[plot]]` repeats).
fn repeated_single_table(text: &str) -> Option<(usize, String)> {
    const SINGLE: [&str; 12] = [
        "input",
        "missing",
        "missing.iterative_pca",
        "missing.knn",
        "transform",
        "scaling",
        "components",
        "components.randomized",
        "components.parallel_analysis",
        "components.cross_validation",
        "diagnostics",
        "output",
    ];
    let mut offset = 0;
    for line in text.split_inclusive('\n') {
        let header = line.trim();
        if let Some(inner) = header.strip_prefix("[[").and_then(|h| h.split("]]").next()) {
            let name = inner.trim();
            if SINGLE.contains(&name) {
                return Some((
                    offset + line.len() - line.trim_start().len(),
                    name.to_string(),
                ));
            }
        }
        offset += line.len();
    }
    None
}

/// The recipe's name for each raw struct, for type errors that would name it.
const TABLES: [(&str, &str); 13] = [
    ("struct RawRecipe", "a recipe"),
    ("struct RawInput", "a table, [input]"),
    ("struct RawMissing", "a table, [missing]"),
    ("struct RawIterative", "a table, [missing.iterative_pca]"),
    ("struct RawKnn", "a table, [missing.knn]"),
    ("struct RawTransform", "a table, [transform]"),
    ("struct RawScaling", "a table, [scaling]"),
    ("struct RawComponents", "a table, [components]"),
    ("struct RawRandomized", "a table, [components.randomized]"),
    (
        "struct RawParallel",
        "a table, [components.parallel_analysis]",
    ),
    (
        "struct RawCrossValidation",
        "a table, [components.cross_validation]",
    ),
    ("struct RawDiagnostics", "a table, [diagnostics]"),
    ("struct RawPlot", "a [[plot]] table"),
];

/// Rewords the serde phrases that would puzzle a recipe author: Rust type
/// names and serde's words for TOML's arrays and tables.
fn plain_words(message: &str) -> String {
    let mut m = message.replace("unknown variant", "unknown choice");
    // Longest names first, so `struct RawRecipe` does not eat a prefix of another.
    for (rust, recipe) in TABLES {
        m = m.replace(rust, recipe);
    }
    m = m
        .replace("struct RawOutput", "a table, [output]")
        .replace("invalid type: sequence", "wrong type: an array")
        .replace("invalid type: map", "wrong type: a table")
        .replace("invalid type:", "wrong type:")
        .replace(
            "expected a sequence",
            "expected an array such as [\"a\", \"b\"]",
        )
        .replace("expected a map", "expected a table");
    if m.starts_with("missing field") {
        m.push_str("; the README's recipe reference lists every section and key");
    }
    m
}
