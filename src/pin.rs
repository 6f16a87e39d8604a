//! `sextant pin`: write the input table's SHA-256 into the recipe as
//! `input.sha256`, keeping every comment and the layout (via `toml_edit`), so that
//! later runs refuse a changed file.

use crate::error::{Error, OutputError, RecipeError, RecipeProblem};
use crate::outputs::hashing::sha256_hex;
use crate::recipe::{self, plan::input_plan};
use std::path::Path;

/// What `pin` did.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Pinned {
    Added { hash: String },
    Updated { old: String, hash: String },
    Unchanged { hash: String },
}

/// Pins the recipe's input to its current hash.
pub fn pin(recipe_path: &Path) -> Result<(String, Pinned), Error> {
    let loaded = recipe::load(recipe_path)?;
    let input = input_plan(&loaded);
    let shown = input.file.display().to_string();
    let bytes = std::fs::read(&input.file).map_err(|source| crate::error::InputError::Io {
        path: shown.clone(),
        source,
    })?;
    let hash = sha256_hex(&bytes);
    let old = input.pin.as_ref().map(|(h, _)| h.clone());
    if old.as_deref() == Some(hash.as_str()) {
        return Ok((shown, Pinned::Unchanged { hash }));
    }
    let mut doc: toml_edit::DocumentMut =
        loaded
            .text
            .parse()
            .map_err(|e: toml_edit::TomlError| RecipeError {
                file: recipe_path.to_path_buf(),
                at: None,
                problem: RecipeProblem::Syntax(e.to_string()),
            })?;
    doc["input"]["sha256"] = toml_edit::value(hash.clone());
    write_atomically(recipe_path, doc.to_string().as_bytes())?;
    let pinned = match old {
        Some(old) => Pinned::Updated { old, hash },
        None => Pinned::Added { hash },
    };
    Ok((shown, pinned))
}

/// Replaces a file by writing a temporary file beside it and renaming it.
pub fn write_atomically(path: &Path, bytes: &[u8]) -> Result<(), OutputError> {
    let dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    let mut tmp = tempfile::NamedTempFile::new_in(dir).map_err(|e| OutputError::io(dir, e))?;
    let _on_signal = crate::cleanup::register(tmp.path());
    std::io::Write::write_all(&mut tmp, bytes).map_err(|e| OutputError::io(path, e))?;
    tmp.persist(path)
        .map_err(|e| OutputError::io(path, e.error))?;
    Ok(())
}
