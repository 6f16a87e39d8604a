//! The names of the hidden entries a run makes beside a results folder
//! (`.NAME.sextant-KIND-XXXX`, listed in `outputs::debris`), and the scratch
//! files among them: made locked, so that a sweep can tell a file still in use
//! from one a killed process left. At the bottom of the crate because the row
//! store and the passes engine make scratch files, and the outputs' staging
//! folder, lock and sweep use the same names.

use std::fs;
use std::io;
use std::path::{Path, PathBuf};

/// The kinds of hidden entry named after a results folder.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    /// A staging folder.
    New,
    /// Earlier results moved aside during a commit.
    Old,
    /// Earlier results being deleted after a commit.
    Gone,
    /// The store of a table's values or of rows' results.
    Scratch,
    /// The sorted runs of the id check.
    Ids,
}

impl Kind {
    pub const ALL: [Kind; 5] = [Kind::New, Kind::Old, Kind::Gone, Kind::Scratch, Kind::Ids];

    pub fn tag(self) -> &'static str {
        match self {
            Kind::New => "new",
            Kind::Old => "old",
            Kind::Gone => "gone",
            Kind::Scratch => "scratch",
            Kind::Ids => "ids",
        }
    }

    /// How a removed entry of this kind is described to the user.
    pub fn described(self) -> &'static str {
        match self {
            Kind::New => "the unfinished results",
            Kind::Old | Kind::Gone => "the replaced results",
            Kind::Scratch | Kind::Ids => "a scratch file",
        }
    }
}

/// The folder `folder` sits in ("." for a bare name).
pub fn parent_of(folder: &Path) -> PathBuf {
    match folder.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    }
}

/// The name hidden entries of `folder` start with: `.NAME.sextant-`.
fn stem(folder: &Path) -> String {
    let name = folder
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "results".into());
    format!(".{name}.sextant-")
}

/// The prefix of entries of kind `kind` for `folder`: `.NAME.sextant-KIND-`.
pub fn prefix(folder: &Path, kind: Kind) -> String {
    format!("{}{}-", stem(folder), kind.tag())
}

/// The lock file's name for `folder`: `.NAME.sextant-lock`.
pub fn lock_name(folder: &Path) -> String {
    format!("{}lock", stem(folder))
}

/// A scratch file of kind `kind` beside `owner` (the results folder it serves),
/// removed when dropped, and locked while open so that a sweep can tell it
/// from one left by a killed process.
pub fn scratch_file(owner: &Path, kind: Kind) -> io::Result<tempfile::NamedTempFile> {
    let dir = parent_of(owner);
    let prefix = prefix(owner, kind);
    loop {
        let file = tempfile::Builder::new().prefix(&prefix).tempfile_in(&dir)?;
        if lock_own(&file)? {
            return Ok(file);
        }
        // A sweep removed it between its creation and our lock (it took the
        // lock first): the path is gone or names another file, so leave the
        // path alone and make a new one.
        let _ = file.into_temp_path().keep();
    }
}

/// Locks a new scratch file; false if its path no longer names it by then.
#[cfg(unix)]
fn lock_own(file: &tempfile::NamedTempFile) -> io::Result<bool> {
    // Blocks only while a sweep that took the lock first removes the file.
    file.as_file().lock()?;
    Ok(names(file.as_file(), file.path()))
}

/// Without advisory locks that other handles may still read through, scratch
/// files are not locked and a sweep leaves them alone.
#[cfg(not(unix))]
fn lock_own(_file: &tempfile::NamedTempFile) -> io::Result<bool> {
    Ok(true)
}

/// Whether `path` still names the open file `file` (the same inode).
#[cfg(unix)]
pub fn names(file: &fs::File, path: &Path) -> bool {
    use std::os::unix::fs::MetadataExt;
    match (file.metadata(), fs::metadata(path)) {
        (Ok(a), Ok(b)) => a.dev() == b.dev() && a.ino() == b.ino(),
        _ => false,
    }
}

/// Whether `path` still names the open file `file`; where an open file cannot
/// be removed or replaced (Windows), it always does while it is open.
#[cfg(not(unix))]
pub fn names(_file: &fs::File, path: &Path) -> bool {
    path.exists()
}
