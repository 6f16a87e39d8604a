//! Path helpers: lexical normalisation, relative paths between folders, and
//! whether one path lies inside a folder once links are followed.

use std::path::{Component, Path, PathBuf};

/// An absolute path with `.` and `..` removed lexically (the path may not exist
/// yet, so it cannot be canonicalised).
pub fn normalize(path: &Path) -> PathBuf {
    let absolute = std::path::absolute(path).unwrap_or_else(|_| path.to_path_buf());
    let mut out = PathBuf::new();
    for part in absolute.components() {
        match part {
            Component::CurDir => {}
            Component::ParentDir => {
                out.pop();
            }
            other => out.push(other.as_os_str()),
        }
    }
    out
}

/// The path with `name/..` pairs and `.` parts removed lexically, kept relative
/// when it was relative; used to show paths in messages.
pub fn tidy(path: &Path) -> PathBuf {
    let mut out: Vec<Component> = Vec::new();
    for part in path.components() {
        match part {
            Component::CurDir => {}
            Component::ParentDir if matches!(out.last(), Some(Component::Normal(_))) => {
                out.pop();
            }
            other => out.push(other),
        }
    }
    if out.is_empty() {
        PathBuf::from(".")
    } else {
        out.iter().collect()
    }
}

/// The path of `to` relative to the folder `from`, with `/` separators, so a
/// manifest never holds an absolute path.
pub fn relative(from: &Path, to: &Path) -> String {
    let from = normalize(from);
    let to = normalize(to);
    let a: Vec<_> = from.components().collect();
    let b: Vec<_> = to.components().collect();
    let common = a.iter().zip(&b).take_while(|(x, y)| x == y).count();
    let mut parts: Vec<String> = vec!["..".to_string(); a.len() - common];
    parts.extend(
        b[common..]
            .iter()
            .map(|c| c.as_os_str().to_string_lossy().into_owned()),
    );
    if parts.is_empty() {
        ".".to_string()
    } else {
        parts.join("/")
    }
}

/// The path of `relative` inside `root`, with the folders between them made.
/// `root` itself is never made: a folder that a signal handler removed stays
/// removed, and a writer still running fails instead of making it again (see
/// `crate::cleanup`).
pub fn make_subfolders(root: &Path, relative: &str) -> std::io::Result<PathBuf> {
    let mut dir = root.to_path_buf();
    for part in Path::new(relative)
        .parent()
        .into_iter()
        .flat_map(Path::components)
    {
        dir.push(part);
        match std::fs::create_dir(&dir) {
            Ok(()) => {}
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists && dir.is_dir() => {}
            Err(e) => return Err(e),
        }
    }
    Ok(root.join(relative))
}

/// The metadata of `path` (links followed) if it is a regular file; a folder,
/// device, pipe or socket is an error of kind `InvalidInput`, so a recipe or
/// table named `/dev/zero` or a named pipe is refused instead of read forever.
pub fn regular_file(path: &Path) -> std::io::Result<std::fs::Metadata> {
    let meta = std::fs::metadata(path)?;
    if meta.is_file() {
        return Ok(meta);
    }
    let kind = if meta.is_dir() {
        "a folder"
    } else {
        "a device, pipe or socket"
    };
    Err(std::io::Error::new(
        std::io::ErrorKind::InvalidInput,
        format!("it is {kind}, not a regular file"),
    ))
}

/// Reads a whole file that must be a regular file (see [`regular_file`]).
pub fn read_regular(path: &Path) -> std::io::Result<Vec<u8>> {
    regular_file(path)?;
    std::fs::read(path)
}

/// Whether `path` is `folder` or lies inside it. Three views must all say no:
/// the paths as written (lexically), the paths with every symbolic link
/// resolved, and, where the platform has them, device and inode numbers (the
/// folder against each resolved ancestor of `path`), which also see a second
/// mount or a case-insensitive spelling of the same folder. Used before a
/// folder is replaced, so no link can make a replacement delete an input.
pub fn inside(path: &Path, folder: &Path) -> bool {
    if normalize(path).starts_with(normalize(folder)) {
        return true;
    }
    let (path, folder) = (resolve(path), resolve(folder));
    if path.starts_with(&folder) {
        return true;
    }
    match file_id(&folder) {
        Some(id) => path.ancestors().any(|a| file_id(a) == Some(id)),
        None => false,
    }
}

/// The absolute path with every link resolved: the longest part that exists is
/// canonicalised, and the rest (which cannot hold a link) is appended with
/// `.` and `..` removed lexically.
pub fn resolve(path: &Path) -> PathBuf {
    let absolute = std::path::absolute(path).unwrap_or_else(|_| path.to_path_buf());
    let mut rest = Vec::new();
    let mut existing = absolute.as_path();
    loop {
        if let Ok(found) = std::fs::canonicalize(existing) {
            let mut out = found;
            for part in rest.iter().rev() {
                match part {
                    Component::CurDir => {}
                    Component::ParentDir => {
                        out.pop();
                    }
                    other => out.push(other.as_os_str()),
                }
            }
            return out;
        }
        match (existing.parent(), existing.components().next_back()) {
            (Some(parent), Some(last)) => {
                rest.push(last);
                existing = parent;
            }
            _ => return normalize(&absolute),
        }
    }
}

/// The device and inode of an existing file or folder (links followed).
#[cfg(unix)]
fn file_id(path: &Path) -> Option<(u64, u64)> {
    use std::os::unix::fs::MetadataExt;
    std::fs::metadata(path).ok().map(|m| (m.dev(), m.ino()))
}

/// Elsewhere only the resolved paths are compared.
#[cfg(not(unix))]
fn file_id(_path: &Path) -> Option<(u64, u64)> {
    None
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn relative_paths() {
        assert_eq!(
            relative(Path::new("/a/b/results"), Path::new("/a/b/recipes/r.toml")),
            "../recipes/r.toml"
        );
        assert_eq!(relative(Path::new("/a"), Path::new("/a/x/../y")), "y");
        assert_eq!(
            tidy(Path::new("recipes/../data/x.csv")),
            PathBuf::from("data/x.csv")
        );
        assert_eq!(tidy(Path::new("../a/./b")), PathBuf::from("../a/b"));
    }

    /// A table reached through a link into the results folder once let
    /// `run --replace` delete it: the written paths did not overlap.
    #[cfg(unix)]
    #[test]
    fn a_link_into_the_folder_is_inside_it() {
        let dir = tempfile::tempdir().unwrap();
        let results = dir.path().join("results");
        std::fs::create_dir(&results).unwrap();
        std::fs::write(results.join("data.csv"), "a\n1\n").unwrap();
        std::os::unix::fs::symlink(results.join("data.csv"), dir.path().join("data.csv")).unwrap();
        std::os::unix::fs::symlink(&results, dir.path().join("alias")).unwrap();
        assert!(inside(&dir.path().join("data.csv"), &results));
        assert!(inside(&results.join("data.csv"), &dir.path().join("alias")));
        assert!(inside(&dir.path().join("alias/x/../data.csv"), &results));
        assert!(!inside(
            &dir.path().join("data.csv"),
            &dir.path().join("other")
        ));
        // A folder that does not exist yet, below a link.
        assert!(inside(
            &results.join("new/x.csv"),
            &dir.path().join("alias/new")
        ));
        assert!(!inside(&dir.path().join("resultsx/a"), &results));
    }
}
