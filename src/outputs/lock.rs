//! A lock file beside the results folder, so two runs never write one folder at
//! the same time. The lock names the process and host that hold it; a lock left
//! by a process that no longer runs on this host (a crash) is detected, removed
//! and reported.

use crate::error::OutputError;
use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};

/// A held lock; dropping it removes the file.
#[derive(Debug)]
pub struct FolderLock {
    path: PathBuf,
    /// Folders created to hold the lock, deepest first; removed again if still
    /// empty, so a failed run leaves no trace.
    created: Vec<PathBuf>,
    /// Set when a stale lock had to be removed first.
    pub stale_note: Option<String>,
    /// Removes the lock file if the process is interrupted.
    _registered: crate::cleanup::Registration,
}

impl Drop for FolderLock {
    fn drop(&mut self) {
        let _ = fs::remove_file(&self.path);
        for dir in &self.created {
            let _ = fs::remove_dir(dir);
        }
    }
}

/// The lock file for a results folder: `.<name>.sextant-lock` beside it.
pub fn lock_path(folder: &Path) -> PathBuf {
    let name = folder
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "results".into());
    folder.with_file_name(format!(".{name}.sextant-lock"))
}

/// Takes the lock on `folder`, creating its parent folder if needed.
pub fn lock(folder: &Path) -> Result<FolderLock, OutputError> {
    let path = lock_path(folder);
    let mut created = Vec::new();
    if let Some(parent) = path.parent().filter(|p| !p.as_os_str().is_empty()) {
        created = parent
            .ancestors()
            .take_while(|a| !a.as_os_str().is_empty() && !a.exists())
            .map(Path::to_path_buf)
            .collect();
        fs::create_dir_all(parent).map_err(|e| OutputError::io(parent, e))?;
    }
    let host = super::manifest::host_name();
    let mut stale_note = None;
    for _ in 0..2 {
        match fs::OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(&path)
        {
            Ok(mut file) => {
                writeln!(file, "{} {host}", std::process::id())
                    .map_err(|e| OutputError::io(&path, e))?;
                return Ok(FolderLock {
                    _registered: crate::cleanup::register(&path),
                    path,
                    created,
                    stale_note,
                });
            }
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => {
                let text = fs::read_to_string(&path).unwrap_or_default();
                let mut parts = text.split_whitespace();
                let pid: Option<u32> = parts.next().and_then(|p| p.parse().ok());
                let holder_host = parts.next().unwrap_or("").to_string();
                let refused = |reason: String| OutputError::Refused {
                    path: folder.display().to_string(),
                    reason,
                };
                match pid {
                    Some(pid) if holder_host == host && !process_alive(pid) => {
                        fs::remove_file(&path).map_err(|e| OutputError::io(&path, e))?;
                        stale_note = Some(format!(
                            "removed a stale lock {} left by process {pid}, which no longer runs (an earlier run ended without cleaning up)",
                            path.display()
                        ));
                    }
                    Some(pid) if holder_host == host => {
                        return Err(refused(format!(
                            "another sextant run (process {pid}) is writing this folder; wait for it to finish"
                        )));
                    }
                    _ => {
                        return Err(refused(format!(
                            "the lock {} is held by process {} on host `{holder_host}`; if no run is active there, delete the lock file",
                            path.display(),
                            pid.map_or("?".to_string(), |p| p.to_string())
                        )));
                    }
                }
            }
            Err(e) => return Err(OutputError::io(&path, e)),
        }
    }
    Err(OutputError::Refused {
        path: folder.display().to_string(),
        reason: format!("could not take the lock {}", path.display()),
    })
}

/// Whether a process with this id runs on this host. Where the system offers no
/// process table to look at, a process is assumed alive, so a lock is never
/// broken on a guess.
fn process_alive(pid: u32) -> bool {
    let proc_root = Path::new("/proc");
    if !proc_root.join("self").exists() {
        return true;
    }
    proc_root.join(pid.to_string()).exists()
}
