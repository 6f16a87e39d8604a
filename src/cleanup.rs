//! What an interrupted run leaves behind is removed.
//!
//! A run writes its results into a hidden staging folder beside the results
//! folder, may keep the table's values in a hidden scratch file there, and holds
//! a lock file; all three are removed when the run ends, even by an error. A
//! signal (Ctrl-C, `SIGTERM`, `SIGHUP`) would end the process without that, so
//! they are registered here while they exist, and [`install`] sets a handler
//! that removes every registered path and exits with status 130 (the shell's
//! 128 + SIGINT). Moving finished results into place holds the registry
//! ([`hold`]), so an interruption either comes before the move (and the previous
//! results stay as they were) or after it (and the new ones are complete).
//!
//! A signal that cannot be caught (`SIGKILL`, the out-of-memory killer) or a
//! power loss skips all of this; what it leaves is named after the results
//! folder and removed by the next run that takes the folder's lock
//! ([`crate::outputs::debris`]).

use std::path::{Path, PathBuf};
use std::sync::{Mutex, MutexGuard};

/// The exit status of an interrupted run.
pub const INTERRUPTED: i32 = 130;

/// Paths to remove on a signal, each with the number of its registration.
static REGISTERED: Mutex<Registry> = Mutex::new(Registry {
    next: 0,
    paths: Vec::new(),
});

struct Registry {
    next: u64,
    paths: Vec<(u64, PathBuf)>,
}

fn registry() -> MutexGuard<'static, Registry> {
    // A panic while the registry is held leaves it as it was: still usable.
    REGISTERED.lock().unwrap_or_else(|e| e.into_inner())
}

/// A path that a signal would remove; dropping this forgets it again (the owner
/// removes the path itself, or has moved it into place).
#[derive(Debug)]
pub struct Registration(u64);

impl Drop for Registration {
    fn drop(&mut self) {
        registry().paths.retain(|(id, _)| *id != self.0);
    }
}

/// Registers a file or folder to remove if the process is interrupted.
pub fn register(path: &Path) -> Registration {
    registry().add(path)
}

impl Registry {
    fn add(&mut self, path: &Path) -> Registration {
        let id = self.next;
        self.next += 1;
        self.paths.push((id, path.to_path_buf()));
        Registration(id)
    }
}

/// Creates a file or folder with `make` and registers the path `path_of`
/// gives, with the registry held throughout: a signal cannot come between the
/// creation and the registration and leave the new entry behind.
pub fn create_registered<T, E>(
    make: impl FnOnce() -> Result<T, E>,
    path_of: impl FnOnce(&T) -> &Path,
) -> Result<(T, Registration), E> {
    let mut registry = registry();
    let made = make()?;
    let registration = registry.add(path_of(&made));
    Ok((made, registration))
}

/// Holds off the handler while a few file-system steps that must not be cut
/// in half run (moving results into place).
pub fn hold() -> impl Drop {
    registry()
}

/// Sets the handler for Ctrl-C, `SIGTERM` and `SIGHUP`. Call once, at start.
pub fn install() {
    // Without a handler a signal still ends the process; only the clean-up is
    // lost, so failing to set one is not worth refusing to run.
    let _ = ctrlc::set_handler(|| {
        crate::progress::current().finish();
        let removed = remove_registered();
        if removed > 0 {
            eprintln!("interrupted: removed the unfinished results and scratch files");
        } else {
            eprintln!("interrupted");
        }
        std::process::exit(INTERRUPTED);
    });
}

/// Removes every registered path, newest first; returns how many existed.
fn remove_registered() -> usize {
    let registry = registry();
    let mut removed = 0;
    for (_, path) in registry.paths.iter().rev() {
        if !path.exists() {
            continue;
        }
        removed += 1;
        // Other threads may still be writing into a folder: try a few times.
        for _ in 0..5 {
            let gone = if path.is_dir() {
                std::fs::remove_dir_all(path)
            } else {
                std::fs::remove_file(path)
            };
            if gone.is_ok() || !path.exists() {
                break;
            }
            std::thread::sleep(std::time::Duration::from_millis(10));
        }
    }
    // The registry stays locked: no thread may register or move anything now.
    std::mem::forget(registry);
    removed
}
