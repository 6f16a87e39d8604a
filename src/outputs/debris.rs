//! The hidden entries a run makes beside a results folder, and their removal
//! once the process that made them is gone.
//!
//! Beside a results folder `NAME` a run makes, all named after it:
//!
//! | entry | what it is | who makes it |
//! |---|---|---|
//! | `.NAME.sextant-lock` | the folder lock ([`super::lock`]) | `run`, `apply` |
//! | `.NAME.sextant-new-XXXX` | the staging folder ([`super::folder::Staging`]) | the lock holder |
//! | `.NAME.sextant-old-XXXX` | earlier results moved aside where no atomic exchange exists | the lock holder |
//! | `.NAME.sextant-gone-XXXX` | earlier results being deleted | the lock holder |
//! | `.NAME.sextant-scratch-XXXX`, `.NAME.sextant-ids-XXXX` | scratch files ([`scratch_file`]) | any command that analyses in passes |
//!
//! A process killed outright (`kill -9`, out of memory, power loss) leaves them
//! behind. Staging, old and gone folders are made only while the folder lock is
//! held, so the next holder of the lock knows that every one it finds was left by
//! a process that no longer runs. Scratch files are also made by commands that
//! take no folder lock (`check`, `diff`, `verify --rerun`), so each scratch file
//! holds an advisory lock on itself for as long as it is open: one whose lock
//! can be taken belongs to no running process. [`sweep`] (called by whoever
//! takes the folder lock) first puts earlier results back if a commit was cut
//! between its two renames, then removes the rest and says what it removed.

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
    const ALL: [Kind; 5] = [Kind::New, Kind::Old, Kind::Gone, Kind::Scratch, Kind::Ids];

    fn tag(self) -> &'static str {
        match self {
            Kind::New => "new",
            Kind::Old => "old",
            Kind::Gone => "gone",
            Kind::Scratch => "scratch",
            Kind::Ids => "ids",
        }
    }

    /// How a removed entry of this kind is described to the user.
    fn described(self) -> &'static str {
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
/// removed when dropped, and locked while open so that [`sweep`] can tell it
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
/// files are not locked and [`sweep`] leaves them alone.
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

/// A hidden entry of `folder` found beside it.
struct Found {
    kind: Kind,
    path: PathBuf,
}

/// Every hidden entry of `folder` except its lock, in name order.
fn found(folder: &Path) -> Vec<Found> {
    let parent = parent_of(folder);
    let Ok(entries) = fs::read_dir(&parent) else {
        return Vec::new();
    };
    let mut found: Vec<Found> = entries
        .filter_map(|e| {
            let e = e.ok()?;
            let name = e.file_name().to_string_lossy().into_owned();
            let kind = Kind::ALL
                .into_iter()
                .find(|&k| name.starts_with(&prefix(folder, k)))?;
            // Named as the folder is (a bare name for one in the current folder).
            let path = if parent == Path::new(".") {
                PathBuf::from(&name)
            } else {
                parent.join(&name)
            };
            Some(Found { kind, path })
        })
        .collect();
    found.sort_by(|a, b| a.path.cmp(&b.path));
    found
}

/// Whether anything was left beside `folder` (a cheap look before taking a lock).
pub fn any_left(folder: &Path) -> bool {
    !found(folder).is_empty()
}

/// Puts back and removes what killed processes left beside `folder`, and says
/// what was done. Call only while holding `folder`'s lock.
pub fn sweep(folder: &Path) -> Vec<String> {
    let mut notes = Vec::new();
    let mut left = found(folder);
    // A commit cut between moving the earlier results aside and moving the new
    // ones in: the old folder is complete (it is renamed to `gone` before it is
    // deleted), so it goes back.
    if fs::symlink_metadata(folder).is_err()
        && let Some(i) = left.iter().position(|f| f.kind == Kind::Old)
    {
        let old = left.remove(i);
        match fs::rename(&old.path, folder) {
            Ok(()) => {
                let _ = super::folder::sync_dir(&parent_of(folder));
                notes.push(format!(
                    "put the earlier results back into {} from {} (a run was stopped while it replaced them)",
                    folder.display(),
                    old.path.display()
                ));
            }
            Err(e) => notes.push(format!(
                "could not put the earlier results back from {}: {e}",
                old.path.display()
            )),
        }
    }
    for f in left {
        match remove(&f) {
            Ok(true) => notes.push(format!(
                "removed {}, {} of a run that was stopped without cleaning up",
                f.path.display(),
                f.kind.described()
            )),
            Ok(false) => {}
            Err(e) => notes.push(format!("could not remove {}: {e}", f.path.display())),
        }
    }
    notes
}

/// Removes one entry; false when it is a scratch file still in use.
fn remove(f: &Found) -> io::Result<bool> {
    match f.kind {
        Kind::New | Kind::Old | Kind::Gone => {
            if fs::symlink_metadata(&f.path)?.is_dir() {
                fs::remove_dir_all(&f.path)?;
            } else {
                fs::remove_file(&f.path)?;
            }
            Ok(true)
        }
        Kind::Scratch | Kind::Ids => remove_unused_scratch(&f.path),
    }
}

/// Removes a scratch file whose lock can be taken: its owner is gone. The file
/// is removed while locked, so its owner's check in [`scratch_file`] sees it.
#[cfg(unix)]
fn remove_unused_scratch(path: &Path) -> io::Result<bool> {
    let file = fs::File::open(path)?;
    match file.try_lock() {
        Ok(()) => {}
        Err(fs::TryLockError::WouldBlock) => return Ok(false),
        Err(fs::TryLockError::Error(e)) => return Err(e),
    }
    fs::remove_file(path)?;
    Ok(true)
}

#[cfg(not(unix))]
fn remove_unused_scratch(_path: &Path) -> io::Result<bool> {
    Ok(false)
}

/// For `sextant verify`: if anything was left beside `folder` and no run holds
/// its lock, takes the lock, puts back and removes what was left, and says so.
pub fn tidy(folder: &Path) -> Vec<String> {
    if !any_left(folder) {
        return Vec::new();
    }
    match super::lock::try_lock(folder) {
        Ok(Some(lock)) => lock.notes.clone(),
        // A run is writing the folder: what is there may be its own.
        Ok(None) => Vec::new(),
        Err(e) => vec![format!("could not clean up beside the folder: {e}")],
    }
}
