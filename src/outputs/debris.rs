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
//! | `.NAME.sextant-scratch-XXXX`, `.NAME.sextant-ids-XXXX` | scratch files ([`crate::scratch::scratch_file`]) | any command that analyses in passes |
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

use crate::scratch::{Kind, parent_of, prefix};
use std::fs;
use std::io;
use std::path::{Path, PathBuf};

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
/// is removed while locked, so its owner's check in
/// [`crate::scratch::scratch_file`] sees it.
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
