//! Writing a results folder all at once.
//!
//! Files go into a hidden staging folder beside the target
//! (`.NAME.sextant-new-XXXX`); only when every file is written is the folder
//! moved into place. A failed run therefore leaves no partial results and never
//! touches an earlier run's folder. Whether an existing folder may be replaced
//! at all is decided in [`super::replace`].
//!
//! The commit is made to survive a kill at any instant and a power loss:
//! 1. every file and folder in the staging folder is flushed to disk (`fsync`),
//!    so the folder that is moved into place is complete on disk;
//! 2. where the system has an atomic exchange (Linux `renameat2` with
//!    `RENAME_EXCHANGE`, Apple's `renameatx_np` with `RENAME_SWAP`), the staging
//!    folder and the earlier results swap names in one step, so the target path
//!    always names either the complete old or the complete new results; a new
//!    target is a plain rename. Elsewhere the earlier results are first renamed
//!    aside (`.NAME.sextant-old-XXXX`) and the next holder of the folder lock
//!    puts them back if the process died before the new folder moved in
//!    ([`super::debris::sweep`]);
//! 3. the parent folder is flushed, so the rename itself is on disk;
//! 4. the earlier results are deleted (renamed to `.NAME.sextant-gone-XXXX`
//!    first, so a half-deleted folder is never taken for complete results).

use crate::error::OutputError;
use crate::scratch::{self, Kind};
use std::fs;
use std::io;
use std::path::{Path, PathBuf};

/// Writes `files` (relative path, bytes) into a new folder and moves it to `target`.
pub fn write_folder(target: &Path, files: &[(String, Vec<u8>)]) -> Result<(), OutputError> {
    let staging = Staging::new(target)?;
    for (name, bytes) in files {
        staging.write(name, bytes)?;
    }
    staging.commit()
}

/// A results folder being written: a hidden temporary folder beside the target,
/// removed if dropped before [`Staging::commit`] moves it into place.
pub struct Staging {
    dir: tempfile::TempDir,
    target: PathBuf,
    parent: PathBuf,
    /// Removes the staging folder if the process is interrupted.
    registered: crate::cleanup::Registration,
}

impl Staging {
    pub fn new(target: &Path) -> Result<Staging, OutputError> {
        let parent = scratch::parent_of(target);
        fs::create_dir_all(&parent).map_err(|e| OutputError::io(&parent, e))?;
        let (dir, registered) = crate::cleanup::create_registered(
            || {
                tempfile::Builder::new()
                    .prefix(&scratch::prefix(target, Kind::New))
                    .tempdir_in(&parent)
            },
            |dir| dir.path(),
        )
        .map_err(|e| OutputError::io(&parent, e))?;
        Ok(Staging {
            registered,
            dir,
            target: target.to_path_buf(),
            parent,
        })
    }

    /// Writes one file (a relative path); may be called from several threads.
    /// It is flushed to disk by [`Staging::commit`].
    pub fn write(&self, name: &str, bytes: &[u8]) -> Result<(), OutputError> {
        let path = self.subfolders_of(name)?;
        fs::write(&path, bytes).map_err(|e| OutputError::io(&path, e))
    }

    /// The path of `name` in the staging folder, with its subfolders made
    /// (never the staging folder itself: [`crate::paths::make_subfolders`]).
    fn subfolders_of(&self, name: &str) -> Result<PathBuf, OutputError> {
        crate::paths::make_subfolders(self.dir.path(), name)
            .map_err(|e| OutputError::io(&self.dir.path().join(name), e))
    }

    /// Creates one file (a relative path) to be written by the caller; it is
    /// flushed to disk by [`Staging::commit`].
    pub fn create(&self, name: &str) -> Result<(PathBuf, fs::File), OutputError> {
        let path = self.subfolders_of(name)?;
        let file = fs::File::create(&path).map_err(|e| OutputError::io(&path, e))?;
        Ok((path, file))
    }

    /// Flushes the finished folder to disk and moves it into place (see the
    /// module's comment for the steps).
    pub fn commit(self) -> Result<(), OutputError> {
        self.commit_with(&mut FaultPlan::none())
    }

    /// [`Staging::commit`] with every file-system step passed through `faults`,
    /// which a test uses to make one step fail or stop the commit dead.
    #[doc(hidden)]
    pub fn commit_with(self, faults: &mut FaultPlan) -> Result<(), OutputError> {
        let Staging {
            dir,
            target,
            parent,
            registered,
        } = self;
        // From here on the staging folder is removed by hand on failure, and
        // left as it is when a test stops the commit dead.
        let staged = dir.keep();
        // No signal handler may cut the steps below in half (see crate::cleanup);
        // a kill can, and is what the order of the steps is for.
        let hold = crate::cleanup::hold();
        let swapped = swap(&staged, &target, &parent, faults);
        drop(hold);
        match swapped {
            Ok(Swapped { aside, synced }) => {
                drop(registered);
                // The new results are in place; the earlier ones go, even if
                // interrupted (and a sweep removes what a kill leaves).
                if let Some(aside) = aside {
                    let _forget_on_signal = crate::cleanup::register(&aside);
                    discard(&aside, &target, &parent, faults);
                }
                synced.map_err(|e| OutputError::io(&parent, e))
            }
            Err(Stop::Aborted) => {
                drop(registered);
                Err(OutputError::io(&staged, io::Error::other(ABORTED)))
            }
            Err(Stop::Failed(e)) => {
                let _ = fs::remove_dir_all(&staged);
                Err(e)
            }
        }
    }
}

/// The message of the error a commit stopped dead by a [`FaultPlan`] returns.
#[doc(hidden)]
pub const ABORTED: &str = "stopped by the fault plan";

/// The message of a step's failure injected by a [`FaultPlan`].
const INJECTED: &str = "injected failure";

/// What the swap left to do: the earlier results to delete (now under a
/// hidden name), and how flushing the parent folder went.
struct Swapped {
    aside: Option<PathBuf>,
    synced: io::Result<()>,
}

/// Why a commit ended early.
enum Stop {
    /// A step failed; what was done is undone.
    Failed(OutputError),
    /// The fault plan stopped the commit dead: nothing more is done.
    Aborted,
}

/// Flushes the staging folder and moves it to `target` (steps 1 to 3).
fn swap(
    staged: &Path,
    target: &Path,
    parent: &Path,
    faults: &mut FaultPlan,
) -> Result<Swapped, Stop> {
    sync_tree(staged, faults)?;
    let aside = if fs::symlink_metadata(target).is_err() {
        faults.step()?;
        fs::rename(staged, target).map_err(|e| failed(target, e))?;
        None
    } else {
        Some(replace(staged, target, parent, faults)?)
    };
    // The new results are in place: a failed flush is reported, not undone.
    let synced = match faults.step() {
        Ok(()) => sync_dir(parent),
        Err(Stop::Aborted) => return Err(Stop::Aborted),
        Err(Stop::Failed(_)) => Err(io::Error::other(INJECTED)),
    };
    Ok(Swapped { aside, synced })
}

/// Puts the staged folder at `target` in place of the earlier results; returns
/// where the earlier results now are.
fn replace(
    staged: &Path,
    target: &Path,
    parent: &Path,
    faults: &mut FaultPlan,
) -> Result<PathBuf, Stop> {
    if faults.exchange {
        faults.step()?;
        match exchange(staged, target) {
            Some(Ok(())) => return Ok(staged.to_path_buf()),
            Some(Err(e)) => return Err(failed(target, e)),
            None => {} // not on this file system: the two renames below
        }
    }
    let old = unused_name(target, parent, Kind::Old);
    faults.step()?;
    fs::rename(target, &old).map_err(|e| failed(target, e))?;
    let moved_in = faults
        .step()
        .and_then(|()| fs::rename(staged, target).map_err(|e| failed(target, e)));
    if let Err(stop) = moved_in {
        if let Stop::Failed(_) = stop {
            // Best effort: if this fails too, the next lock holder puts them back.
            let _ = fs::rename(&old, target);
        }
        return Err(stop);
    }
    Ok(old)
}

/// Deletes the earlier results (step 4). A failure leaves them for the next
/// sweep, which removes them: the new results are in place either way.
fn discard(aside: &Path, target: &Path, parent: &Path, faults: &mut FaultPlan) {
    let gone = unused_name(target, parent, Kind::Gone);
    if faults.step().is_err() || fs::rename(aside, &gone).is_err() {
        return;
    }
    if faults.step().is_err() {
        return;
    }
    let _ = fs::remove_dir_all(&gone);
}

fn failed(path: &Path, e: io::Error) -> Stop {
    Stop::Failed(OutputError::io(path, e))
}

/// A name of kind `kind` for `target` that nothing uses yet. Only the folder
/// lock's holder makes these, so checking first is enough.
fn unused_name(target: &Path, parent: &Path, kind: Kind) -> PathBuf {
    let prefix = scratch::prefix(target, kind);
    let pid = std::process::id();
    (0u32..)
        .map(|i| parent.join(format!("{prefix}{pid}-{i}")))
        .find(|p| fs::symlink_metadata(p).is_err())
        .expect("some name is free")
}

/// Flushes every file, then every folder (deepest first), of `root` to disk.
fn sync_tree(root: &Path, faults: &mut FaultPlan) -> Result<(), Stop> {
    let mut files = Vec::new();
    let mut dirs = vec![root.to_path_buf()];
    let mut i = 0;
    while i < dirs.len() {
        let dir = dirs[i].clone();
        let entries = fs::read_dir(&dir).map_err(|e| failed(&dir, e))?;
        for entry in entries {
            let entry = entry.map_err(|e| failed(&dir, e))?;
            let kind = entry.file_type().map_err(|e| failed(&entry.path(), e))?;
            if kind.is_dir() {
                dirs.push(entry.path());
            } else {
                files.push(entry.path());
            }
        }
        i += 1;
    }
    files.sort();
    for file in &files {
        faults.step()?;
        sync_file(file).map_err(|e| failed(file, e))?;
    }
    for dir in dirs.iter().rev() {
        faults.step()?;
        sync_dir(dir).map_err(|e| failed(dir, e))?;
    }
    Ok(())
}

/// Flushes one file's contents to disk (through a handle of its own: the
/// writers have closed theirs).
fn sync_file(path: &Path) -> io::Result<()> {
    // Windows flushes only through a handle that may write.
    fs::OpenOptions::new()
        .read(true)
        .write(cfg!(windows))
        .open(path)?
        .sync_all()
}

/// Flushes a folder's entries (names created, renamed or removed) to disk.
#[cfg(unix)]
pub fn sync_dir(path: &Path) -> io::Result<()> {
    fs::File::open(path)?.sync_all()
}

/// Folders cannot be opened for flushing here; their entries are written
/// through by the file system.
#[cfg(not(unix))]
pub fn sync_dir(_path: &Path) -> io::Result<()> {
    Ok(())
}

/// Swaps the names `a` and `b` in one step; `None` where the system or the file
/// system has no such step.
#[cfg(any(target_os = "linux", target_os = "android", target_vendor = "apple"))]
fn exchange(a: &Path, b: &Path) -> Option<io::Result<()>> {
    use rustix::fs::{CWD, RenameFlags, renameat_with};
    use rustix::io::Errno;
    match renameat_with(CWD, a, CWD, b, RenameFlags::EXCHANGE) {
        Ok(()) => Some(Ok(())),
        // An old kernel, or a file system without the exchange.
        Err(Errno::INVAL | Errno::NOSYS | Errno::NOTSUP) => None,
        Err(e) => Some(Err(e.into())),
    }
}

#[cfg(not(any(target_os = "linux", target_os = "android", target_vendor = "apple")))]
fn exchange(_a: &Path, _b: &Path) -> Option<io::Result<()>> {
    None
}

/// Which file-system step of a commit a test makes fail or stop dead (steps
/// count from 1: each flush, rename and removal); also whether the atomic
/// exchange may be used, so a test can take the two-rename way where the
/// exchange exists.
#[doc(hidden)]
#[derive(Debug, Clone)]
pub struct FaultPlan {
    at: Option<usize>,
    abort: bool,
    exchange: bool,
    steps: usize,
    fired: bool,
}

impl FaultPlan {
    /// No fault: a normal commit.
    pub fn none() -> FaultPlan {
        FaultPlan {
            at: None,
            abort: false,
            exchange: true,
            steps: 0,
            fired: false,
        }
    }

    /// Step `k` fails with an error, as a full disk would make it.
    pub fn fail_at(k: usize) -> FaultPlan {
        FaultPlan {
            at: Some(k),
            ..FaultPlan::none()
        }
    }

    /// The commit stops dead before step `k`, as if the process were killed.
    pub fn abort_at(k: usize) -> FaultPlan {
        FaultPlan {
            at: Some(k),
            abort: true,
            ..FaultPlan::none()
        }
    }

    /// The same plan without the atomic exchange.
    pub fn without_exchange(mut self) -> FaultPlan {
        self.exchange = false;
        self
    }

    /// Whether the fault happened (false once `k` passes the commit's steps).
    pub fn fired(&self) -> bool {
        self.fired
    }

    /// Counts the next step; its fault, if it is the chosen one.
    fn step(&mut self) -> Result<(), Stop> {
        self.steps += 1;
        if self.at != Some(self.steps) {
            return Ok(());
        }
        self.fired = true;
        if self.abort {
            return Err(Stop::Aborted);
        }
        Err(Stop::Failed(OutputError::io(
            Path::new("a commit step"),
            io::Error::other(INJECTED),
        )))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Regression: after a signal had removed the staging folder, a writer
    /// thread still running made it again (with `create_dir_all`), and the
    /// interrupted run left it behind.
    #[test]
    fn a_removed_staging_folder_is_not_made_again_by_a_writer() {
        let ws = tempfile::tempdir().unwrap();
        let staging = Staging::new(&ws.path().join("out")).unwrap();
        staging.write("plots/a.svg", b"<svg/>").unwrap();
        assert!(staging.dir.path().join("plots/a.svg").is_file());
        fs::remove_dir_all(staging.dir.path()).unwrap();
        assert!(staging.write("plots/b.svg", b"<svg/>").is_err());
        assert!(staging.create("tables/c.csv").is_err());
        assert!(!staging.dir.path().exists());
    }
}
