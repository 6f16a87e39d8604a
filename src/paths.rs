//! Path helpers: lexical normalisation and relative paths between folders.

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
}
