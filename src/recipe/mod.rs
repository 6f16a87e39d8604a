//! Recipes: reading the TOML file ([`raw`]) and checking it against the data ([`plan`]).

pub mod applies;
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
    let text = std::fs::read_to_string(path).map_err(|e| RecipeError {
        file: path.to_path_buf(),
        at: None,
        problem: RecipeProblem::Read(e),
    })?;
    parse(path, text)
}

/// Parses recipe text as if it were the file at `path` (which sets the folder
/// that relative paths start from).
pub fn parse(path: &Path, text: String) -> Result<LoadedRecipe, RecipeError> {
    let raw: RawRecipe = toml::from_str(&text).map_err(|e| RecipeError {
        file: path.to_path_buf(),
        at: e.span().map(|s| Position::locate(&text, s.start)),
        problem: RecipeProblem::Syntax(plain_words(e.message().trim_end())),
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
    Ok(loaded)
}

/// Rewords the few serde phrases that would puzzle a recipe author.
fn plain_words(message: &str) -> String {
    let mut m = message.replace("unknown variant", "unknown choice");
    if m.starts_with("missing field") {
        m.push_str("; the README's recipe reference lists every section and key");
    }
    m
}
