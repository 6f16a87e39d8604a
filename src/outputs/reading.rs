//! Opening the files a results folder's manifest names, without trusting it.
//!
//! A manifest is a JSON file anyone can write, so the commands that read one
//! (`verify`, `apply`, `diff`) open a named file only after looking at it
//! without following links: it must be a regular file, and the path it resolves
//! to (links followed) must lie inside the folder the caller allows. A fifo or
//! device is never opened (and files are opened with `O_NONBLOCK`, in case one
//! is swapped in between the look and the open); hashes are computed a block at
//! a time, so an endless or huge file never has to fit in memory.

use super::hashing::hex;
use sha2::{Digest, Sha256};
use std::fs::{self, File};
use std::io::Read;
use std::path::Path;

/// Why a file was not opened.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Unopened {
    /// Nothing is there (or a link points nowhere).
    Missing,
    /// Something is there that may not be read; the reason in plain words.
    Refused(String),
}

/// Whether symbolic links may lead to the file (they must still end inside
/// the allowed folder).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Links {
    /// Results folders hold only regular files: a link is refused.
    Refuse,
    /// Inputs may be reached through links that stay inside the allowed folder.
    FollowInside,
}

/// Opens `path` for reading if it is a regular file whose resolved path lies
/// inside `within` (already resolved: [`crate::paths::resolve`]).
pub fn open_regular(path: &Path, within: &Path, links: Links) -> Result<File, Unopened> {
    let refused = |why: String| Err(Unopened::Refused(why));
    let look = match fs::symlink_metadata(path) {
        Ok(m) => m,
        Err(e) if is_absent(&e) => return Err(Unopened::Missing),
        Err(e) => return refused(format!("cannot be looked at ({e})")),
    };
    if look.file_type().is_symlink() && links == Links::Refuse {
        return refused("a symbolic link; a results folder holds only regular files".into());
    }
    let real = match fs::canonicalize(path) {
        Ok(p) => p,
        Err(e) if is_absent(&e) => return Err(Unopened::Missing),
        Err(e) => return refused(format!("cannot be resolved ({e})")),
    };
    if !real.starts_with(within) {
        return refused(format!(
            "resolves to {}, outside {}, through a symbolic link",
            real.display(),
            within.display()
        ));
    }
    let meta = match fs::metadata(&real) {
        Ok(m) => m,
        Err(e) => return refused(format!("cannot be looked at ({e})")),
    };
    if !meta.is_file() {
        return refused(format!("{}, not a regular file", kind(&meta.file_type())));
    }
    let file = open_nonblocking(&real)
        .map_err(|e| Unopened::Refused(format!("cannot be opened ({e})")))?;
    match file.metadata() {
        Ok(m) if m.is_file() => Ok(file),
        Ok(m) => refused(format!("{}, not a regular file", kind(&m.file_type()))),
        Err(e) => refused(format!("cannot be looked at ({e})")),
    }
}

fn is_absent(e: &std::io::Error) -> bool {
    matches!(
        e.kind(),
        std::io::ErrorKind::NotFound | std::io::ErrorKind::NotADirectory
    )
}

fn open_nonblocking(path: &Path) -> std::io::Result<File> {
    use std::os::unix::fs::OpenOptionsExt;
    fs::OpenOptions::new()
        .read(true)
        // The flag's value from rustix (already a dependency for the commit's exchange).
        .custom_flags(rustix::fs::OFlags::NONBLOCK.bits() as i32)
        .open(path)
}

fn kind(t: &fs::FileType) -> &'static str {
    use std::os::unix::fs::FileTypeExt;
    if t.is_dir() {
        "a folder"
    } else if t.is_fifo() {
        "a named pipe"
    } else if t.is_char_device() || t.is_block_device() {
        "a device"
    } else if t.is_socket() {
        "a socket"
    } else {
        "something"
    }
}

/// The SHA-256 of everything `reader` gives, read a block at a time.
pub fn sha256_of(mut reader: impl Read) -> std::io::Result<String> {
    let mut hasher = Sha256::new();
    let mut block = vec![0u8; 1 << 16];
    loop {
        match reader.read(&mut block) {
            Ok(0) => break,
            Ok(n) => hasher.update(&block[..n]),
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
            Err(e) => return Err(e),
        }
    }
    Ok(hex(&hasher.finalize()))
}

/// All of `file` if it is at most `limit` bytes, otherwise `None`.
pub fn read_at_most(file: File, limit: u64) -> std::io::Result<Option<Vec<u8>>> {
    let mut bytes = Vec::new();
    file.take(limit.saturating_add(1)).read_to_end(&mut bytes)?;
    Ok((bytes.len() as u64 <= limit).then_some(bytes))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn streamed_hash_is_the_plain_hash() {
        let bytes: Vec<u8> = (0..200_000u32).map(|i| (i % 251) as u8).collect();
        assert_eq!(
            sha256_of(&bytes[..]).unwrap(),
            super::super::hashing::sha256_hex(&bytes)
        );
    }

    #[test]
    fn links_devices_and_folders_are_refused() {
        let dir = tempfile::tempdir().unwrap();
        let within = crate::paths::resolve(dir.path());
        fs::write(dir.path().join("a.csv"), "x").unwrap();
        std::os::unix::fs::symlink(dir.path().join("a.csv"), dir.path().join("in")).unwrap();
        std::os::unix::fs::symlink("/dev/zero", dir.path().join("zero")).unwrap();
        fs::create_dir(dir.path().join("sub")).unwrap();
        let open = |name: &str, links| open_regular(&dir.path().join(name), &within, links);
        assert!(open("a.csv", Links::Refuse).is_ok());
        assert!(open("in", Links::FollowInside).is_ok());
        assert!(matches!(
            open("in", Links::Refuse),
            Err(Unopened::Refused(_))
        ));
        assert!(
            matches!(open("zero", Links::FollowInside), Err(Unopened::Refused(w)) if w.contains("outside"))
        );
        assert!(
            matches!(open("sub", Links::Refuse), Err(Unopened::Refused(w)) if w.contains("a folder"))
        );
        assert_eq!(open("none", Links::Refuse).unwrap_err(), Unopened::Missing);
    }
}
