//! A lock beside the results folder, so two runs never write one folder at the
//! same time.
//!
//! The lock is the operating system's advisory lock on the file
//! `.<name>.sextant-lock` (`File::try_lock`), held for the whole run. The kernel
//! releases it when the process ends however it ends, so there is no stale lock
//! to guess about: a lock left by a killed run is simply free again. The file's
//! text (process, host, start time) only explains a refusal; it is written after
//! the lock is taken, and an empty or garbled text never blocks anyone.
//!
//! Whoever takes the lock then puts back and removes what killed runs left
//! beside the folder ([`super::debris::sweep`]) and reports it.

use crate::error::OutputError;
use std::fs;
use std::io::{Read, Write};
use std::path::{Path, PathBuf};

/// A held lock; dropping it removes the file and releases the lock.
#[derive(Debug)]
pub struct FolderLock {
    /// The locked file, only held: closing it releases the lock. Fields are
    /// dropped after [`Drop::drop`], which removes the path while the lock is
    /// still held.
    _held: fs::File,
    path: PathBuf,
    /// Folders created to hold the lock, deepest first; removed again if still
    /// empty, so a failed run leaves no trace.
    created: Vec<PathBuf>,
    /// What was put back or removed beside the folder when the lock was taken.
    pub notes: Vec<String>,
    /// Whether dropping leaves the file (see [`FolderLock::abandon`]).
    abandoned: bool,
    /// Removes the lock file if the process is interrupted.
    _registered: crate::cleanup::Registration,
}

// The lock file is removed when the run ends. Removing a file another process
// may have opened is safe only with a second rule, kept by `take`: after its
// lock is granted, a process checks that the path still names the file it
// locked, and starts again if not. The holder removes the path while it still
// holds the lock, so a process that opened the old file before the removal
// gets its lock only after it, sees the path gone (or naming a newer file) and
// retries; no two processes can both believe they hold the lock. Leaving the
// file in place would be simpler but would leave a hidden file beside every
// results folder, and the folders created for a first run that failed.
impl Drop for FolderLock {
    fn drop(&mut self) {
        if self.abandoned {
            return;
        }
        let _ = fs::remove_file(&self.path);
        for dir in &self.created {
            let _ = fs::remove_dir(dir);
        }
    }
}

impl FolderLock {
    /// Releases the lock as a killed process would: the file stays. For tests
    /// that simulate a crash.
    #[doc(hidden)]
    pub fn abandon(mut self) {
        self.abandoned = true;
    }
}

/// The lock file for a results folder: `.<name>.sextant-lock` beside it.
pub fn lock_path(folder: &Path) -> PathBuf {
    crate::scratch::parent_of(folder).join(crate::scratch::lock_name(folder))
}

/// Takes the lock on `folder`, creating its parent folder if needed; refuses
/// when another process holds it.
pub fn lock(folder: &Path) -> Result<FolderLock, OutputError> {
    let path = lock_path(folder);
    let created = match path.parent().filter(|p| !p.as_os_str().is_empty()) {
        Some(parent) => {
            let created = parent
                .ancestors()
                .take_while(|a| !a.as_os_str().is_empty() && !a.exists())
                .map(Path::to_path_buf)
                .collect();
            fs::create_dir_all(parent).map_err(|e| OutputError::io(parent, e))?;
            created
        }
        None => Vec::new(),
    };
    match take(folder, &path, created)? {
        Taken::Held(lock) => Ok(lock),
        Taken::Busy(text) => Err(OutputError::Refused {
            path: folder.display().to_string(),
            reason: busy_reason(&text),
        }),
    }
}

/// Takes the lock on `folder` if no other process holds it; `None` if one does.
pub fn try_lock(folder: &Path) -> Result<Option<FolderLock>, OutputError> {
    match take(folder, &lock_path(folder), Vec::new())? {
        Taken::Held(lock) => Ok(Some(lock)),
        Taken::Busy(_) => Ok(None),
    }
}

enum Taken {
    Held(FolderLock),
    /// Another process holds the lock; its file's text.
    Busy(String),
}

fn take(folder: &Path, path: &Path, created: Vec<PathBuf>) -> Result<Taken, OutputError> {
    let io = |e| OutputError::io(path, e);
    loop {
        let mut file = fs::OpenOptions::new()
            .read(true)
            .write(true)
            .create(true)
            .truncate(false)
            .open(path)
            .map_err(io)?;
        match file.try_lock() {
            Ok(()) => {}
            Err(fs::TryLockError::WouldBlock) => {
                let mut text = String::new();
                let _ = file.read_to_string(&mut text);
                return Ok(Taken::Busy(text));
            }
            Err(fs::TryLockError::Error(e)) => return Err(io(e)),
        }
        // The holder before us removed the path after we opened it (see the
        // comment on `Drop`): this file is nobody's lock any more.
        if !crate::scratch::names(&file, path) {
            continue;
        }
        // Ours from here: an interruption removes it.
        let registered = crate::cleanup::register(path);
        // Only informational: a full disk must not stop a run that holds the lock.
        let _ = describe_holder(&mut file);
        let notes = super::debris::sweep(folder);
        return Ok(Taken::Held(FolderLock {
            _registered: registered,
            _held: file,
            path: path.to_path_buf(),
            created,
            notes,
            abandoned: false,
        }));
    }
}

/// Writes "process host start-time" into the held lock file.
fn describe_holder(file: &mut fs::File) -> std::io::Result<()> {
    file.set_len(0)?;
    let text = format!(
        "{} {} {}\n",
        std::process::id(),
        super::manifest::host_name(),
        super::manifest::utc_now()
    );
    use std::io::Seek;
    file.seek(std::io::SeekFrom::Start(0))?;
    file.write_all(text.as_bytes())
}

/// Why a run is refused, from the holder's lock text (which may be empty or
/// garbled: it is written just after the lock is taken).
fn busy_reason(text: &str) -> String {
    let mut parts = text.split_whitespace();
    let pid = parts.next().and_then(|p| p.parse::<u32>().ok());
    let host = parts.next();
    let started = parts.next();
    let who = match (pid, host, started) {
        (Some(pid), Some(host), Some(started)) => {
            format!(" (process {pid} on host `{host}`, started {started})")
        }
        (Some(pid), Some(host), None) => format!(" (process {pid} on host `{host}`)"),
        _ => String::new(),
    };
    format!("another sextant run{who} is writing this folder; wait for it to finish")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_garbled_lock_text_still_gives_a_message() {
        assert_eq!(
            busy_reason("\u{0}\u{1}garbage"),
            "another sextant run is writing this folder; wait for it to finish"
        );
        assert!(
            busy_reason("12 box 2024-01-02T03:04:05Z\n")
                .contains("(process 12 on host `box`, started 2024-01-02T03:04:05Z)")
        );
    }

    #[test]
    fn a_second_lock_on_the_same_folder_is_refused_until_the_first_is_dropped() {
        let dir = tempfile::tempdir().unwrap();
        let folder = dir.path().join("out");
        let first = lock(&folder).unwrap();
        assert!(try_lock(&folder).unwrap().is_none());
        let err = lock(&folder).unwrap_err().to_string();
        assert!(err.contains(&std::process::id().to_string()), "{err}");
        drop(first);
        assert!(!lock_path(&folder).exists(), "the lock file is removed");
        assert!(try_lock(&folder).unwrap().is_some());
    }
}
