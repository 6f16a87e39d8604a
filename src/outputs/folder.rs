//! Writing a results folder all at once.
//!
//! Files go into a hidden temporary folder beside the target; only when every file
//! is written is the folder moved into place. A failed run therefore leaves no
//! partial results and never touches an earlier run's folder. Whether an existing
//! folder may be replaced at all is decided in [`super::replace`].

use crate::error::OutputError;
use std::fs;
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
        let parent = match target.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
            _ => PathBuf::from("."),
        };
        fs::create_dir_all(&parent).map_err(|e| OutputError::io(&parent, e))?;
        let dir = tempfile::Builder::new()
            .prefix(".sextant-new-")
            .tempdir_in(&parent)
            .map_err(|e| OutputError::io(&parent, e))?;
        Ok(Staging {
            registered: crate::cleanup::register(dir.path()),
            dir,
            target: target.to_path_buf(),
            parent,
        })
    }

    /// Writes one file (a relative path); may be called from several threads.
    pub fn write(&self, name: &str, bytes: &[u8]) -> Result<(), OutputError> {
        let path = self.dir.path().join(name);
        if let Some(dir) = path.parent() {
            fs::create_dir_all(dir).map_err(|e| OutputError::io(dir, e))?;
        }
        fs::write(&path, bytes).map_err(|e| OutputError::io(&path, e))
    }

    /// Creates one file (a relative path) to be written by the caller.
    pub fn create(&self, name: &str) -> Result<(PathBuf, fs::File), OutputError> {
        let path = self.dir.path().join(name);
        if let Some(dir) = path.parent() {
            fs::create_dir_all(dir).map_err(|e| OutputError::io(dir, e))?;
        }
        let file = fs::File::create(&path).map_err(|e| OutputError::io(&path, e))?;
        Ok((path, file))
    }

    /// Moves the finished folder into place (any earlier results aside first, so
    /// a failed move can be undone).
    pub fn commit(self) -> Result<(), OutputError> {
        let Staging {
            dir,
            target,
            parent,
            registered,
        } = self;
        // No signal handler may cut the swap in half (see crate::cleanup).
        let hold = crate::cleanup::hold();
        let old = if target.exists() {
            let aside = tempfile::Builder::new()
                .prefix(".sextant-old-")
                .tempdir_in(&parent)
                .map_err(|e| OutputError::io(&parent, e))?;
            let aside_path = aside.path().join("results");
            fs::rename(&target, &aside_path).map_err(|e| OutputError::io(&target, e))?;
            Some((aside, aside_path))
        } else {
            None
        };
        let staged = dir.keep();
        if let Err(e) = fs::rename(&staged, &target) {
            if let Some((_, aside_path)) = &old {
                let _ = fs::rename(aside_path, &target);
            }
            let _ = fs::remove_dir_all(&staged);
            return Err(OutputError::io(&target, e));
        }
        drop(hold);
        drop(registered);
        // The new results are in place; the earlier ones go, even if interrupted.
        if let Some((aside, _)) = old {
            let _forget_on_signal = crate::cleanup::register(aside.path());
            drop(aside);
        }
        Ok(())
    }
}
