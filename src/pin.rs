//! `sextant pin`: write the input table's SHA-256 into the recipe as
//! `input.sha256`, keeping every comment and the layout (via `toml_edit`), so that
//! later runs refuse a changed file. The edit changes nothing else about the
//! file: a link is written through to its target, the target keeps its mode
//! (and, where allowed, its owner), and a file the user may not write, or has
//! made read-only, is refused rather than replaced.

use crate::error::{Error, OutputError, RecipeError, RecipeProblem};
use crate::outputs::hashing::sha256_hex;
use crate::recipe::{self, plan::input_plan};
use std::path::{Path, PathBuf};

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
    let bytes =
        crate::paths::read_regular(&input.file).map_err(|source| crate::error::InputError::Io {
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
    let target = editable_target(recipe_path)?;
    doc["input"]["sha256"] = toml_edit::value(hash.clone());
    write_atomically(&target, doc.to_string().as_bytes())?;
    let pinned = match old {
        Some(old) => Pinned::Updated { old, hash },
        None => Pinned::Added { hash },
    };
    Ok((shown, pinned))
}

/// The file `pin` will rewrite: the recipe itself, or the file its link leads
/// to. Refused (exit 2) when the user could not edit it by hand: read-only, not
/// writable by this user, or one of several hard links (a new file would split
/// them).
fn editable_target(recipe_path: &Path) -> Result<PathBuf, Error> {
    let refuse = |reason: String| -> Error {
        RecipeError {
            file: recipe_path.to_path_buf(),
            at: None,
            problem: RecipeProblem::CannotPin { reason },
        }
        .into()
    };
    let target = std::fs::canonicalize(recipe_path)
        .map_err(|e| refuse(format!("its path cannot be resolved ({e})")))?;
    let meta = std::fs::metadata(&target)
        .map_err(|e| refuse(format!("{} cannot be read ({e})", target.display())))?;
    if meta.permissions().readonly() {
        return Err(refuse(format!(
            "{} is read-only; make it writable first if the pin should be added",
            target.display()
        )));
    }
    // Opening for writing (without truncating) asks the system whether this
    // user may change the file; replacing it by rename would not ask.
    if let Err(e) = std::fs::OpenOptions::new().write(true).open(&target) {
        return Err(refuse(format!(
            "{} cannot be written by this user ({e})",
            target.display()
        )));
    }
    #[cfg(unix)]
    {
        use std::os::unix::fs::MetadataExt;
        if meta.nlink() > 1 {
            return Err(refuse(format!(
                "{} has {} hard links, and rewriting it would leave the others unpinned; pin a copy or edit input.sha256 by hand",
                target.display(),
                meta.nlink()
            )));
        }
    }
    Ok(target)
}

/// Replaces a file by writing a temporary file beside it, with the old file's
/// permissions, flushing it to disk and renaming it over the old one; the
/// folder is flushed too, so a power cut leaves the old or the new file.
pub fn write_atomically(path: &Path, bytes: &[u8]) -> Result<(), OutputError> {
    let dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    let (mut tmp, _on_signal) = crate::cleanup::create_registered(
        || tempfile::NamedTempFile::new_in(dir),
        |tmp| tmp.path(),
    )
    .map_err(|e| OutputError::io(dir, e))?;
    std::io::Write::write_all(&mut tmp, bytes).map_err(|e| OutputError::io(path, e))?;
    if let Ok(old) = std::fs::metadata(path) {
        keep_owner(tmp.path(), &old);
        std::fs::set_permissions(tmp.path(), old.permissions())
            .map_err(|e| OutputError::io(path, e))?;
    }
    tmp.as_file()
        .sync_all()
        .map_err(|e| OutputError::io(path, e))?;
    tmp.persist(path)
        .map_err(|e| OutputError::io(path, e.error))?;
    // Not every system can flush a folder; the rename itself is done.
    if let Ok(folder) = std::fs::File::open(dir) {
        let _ = folder.sync_all();
    }
    Ok(())
}

/// Gives the new file the old one's owner and group where this user may (an
/// administrator editing a colleague's recipe); elsewhere the new file is
/// the user's own, as an edit in a text editor would make it.
#[cfg(unix)]
fn keep_owner(new: &Path, old: &std::fs::Metadata) {
    use std::os::unix::fs::MetadataExt;
    let _ = std::os::unix::fs::chown(new, Some(old.uid()), Some(old.gid()));
}

#[cfg(not(unix))]
fn keep_owner(_new: &Path, _old: &std::fs::Metadata) {}
