//! Whether an existing folder may be replaced by new results.
//!
//! A folder is replaced only if it holds sextant results of the same recipe and
//! inputs, or when the caller says `replace`; a folder that is not a sextant
//! results folder is never replaced. Replacing deletes everything in the folder,
//! so "holds sextant results" is checked, not taken from the manifest's word:
//! the manifest's digest must match its contents, and the folder must hold
//! exactly the files that manifest names (regular files, in the folders their
//! names imply) and manifest.json itself. Anything else (a file or folder the
//! manifest does not name, a symbolic link, a device) is named in the refusal.
//! A folder that is itself a symbolic link is never replaced. An empty folder
//! may always be used.

use super::manifest::{digest_matches, fingerprint, output_names};
use crate::error::OutputError;
use serde_json::Value;
use std::collections::BTreeSet;
use std::fs;
use std::io::Read;
use std::path::Path;

/// The largest manifest.json read when deciding; a real one is a few kilobytes
/// per output file.
const MANIFEST_LIMIT: u64 = 64 << 20;

/// How many unexpected entries a refusal names before it counts the rest.
const NAMED_AT_MOST: usize = 5;

/// The command that writes a folder: the option that names the folder, the
/// words for results it may not replace, and which results folders it may
/// replace at all (`apply` replaces only its own earlier results, never a run's).
#[derive(Debug, Clone, Copy)]
pub struct Writer {
    pub option: &'static str,
    pub different: &'static str,
    pub own: fn(&Value) -> bool,
    pub not_own: &'static str,
}

/// `sextant run`: any sextant results folder may be replaced.
pub const RUN: Writer = Writer {
    option: "output.folder",
    different: "a different recipe or input",
    own: |_| true,
    not_own: "",
};

/// Decides whether `target` may be replaced by results with `new_fingerprint`.
pub fn check_replaceable(
    target: &Path,
    new_fingerprint: &(String, Vec<String>),
    replace: bool,
) -> Result<(), OutputError> {
    check_replaceable_by(target, new_fingerprint, replace, &RUN)
}

/// [`check_replaceable`] for the command `writer`.
pub fn check_replaceable_by(
    target: &Path,
    new_fingerprint: &(String, Vec<String>),
    replace: bool,
    writer: &Writer,
) -> Result<(), OutputError> {
    let option = writer.option;
    let refuse = |reason: String| OutputError::Refused {
        path: target.display().to_string(),
        reason,
    };
    let meta = match fs::symlink_metadata(target) {
        Ok(meta) => meta,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(()),
        Err(e) => return Err(OutputError::io(target, e)),
    };
    if meta.file_type().is_symlink() {
        return Err(refuse(
            "is a symbolic link; sextant writes results only into a real folder and never replaces a link or what it points to; choose another output folder".into(),
        ));
    }
    if !meta.is_dir() {
        return Err(refuse(format!(
            "exists and is not a folder; choose another {option}"
        )));
    }
    let Some(old) = sextant_manifest(target) else {
        let empty = fs::read_dir(target)
            .map(|mut d| d.next().is_none())
            .unwrap_or(false);
        if empty {
            return Ok(());
        }
        return Err(refuse(
            "exists and is not a sextant results folder (no manifest.json); sextant will not replace it".into(),
        ));
    };
    let named: BTreeSet<String> = output_names(&old).unwrap_or_default().into_iter().collect();
    let unexpected = unlisted_entries(target, &named).map_err(|e| OutputError::io(target, e))?;
    if !digest_matches(&old) {
        let holds = if unexpected.is_empty() {
            String::new()
        } else {
            format!(
                ", and the folder holds {} that it does not name",
                describe_entries(&unexpected)
            )
        };
        return Err(refuse(format!(
            "its manifest.json does not match its own digest (it was edited, or not written by sextant){holds}; sextant will not replace the folder, so nothing was deleted; move it away or choose another output folder"
        )));
    }
    if let Err(why) = output_names(&old) {
        return Err(refuse(format!(
            "its manifest.json is not one sextant writes ({why}); sextant will not replace it"
        )));
    }
    if !unexpected.is_empty() {
        return Err(refuse(format!(
            "holds {} that its manifest.json does not name as results; sextant replaces only a folder holding exactly the files it wrote, so nothing was deleted; move {} away or choose another output folder",
            describe_entries(&unexpected),
            if unexpected.len() == 1 { "it" } else { "them" }
        )));
    }
    if !(writer.own)(&old) {
        return Err(refuse(format!(
            "{}, so nothing was deleted; choose another {option}",
            writer.not_own
        )));
    }
    if replace || fingerprint(&old).as_ref() == Some(new_fingerprint) {
        return Ok(());
    }
    Err(refuse(format!(
        "holds results of {}; pass --replace to replace them, or choose another {option}",
        writer.different
    )))
}

/// The folder's manifest.json, if it is a regular file holding a JSON object
/// that says sextant wrote it.
fn sextant_manifest(folder: &Path) -> Option<Value> {
    let path = folder.join("manifest.json");
    if !fs::symlink_metadata(&path).ok()?.is_file() {
        return None;
    }
    let mut bytes = Vec::new();
    fs::File::open(&path)
        .ok()?
        .take(MANIFEST_LIMIT)
        .read_to_end(&mut bytes)
        .ok()?;
    let value: Value = serde_json::from_slice(&bytes).ok()?;
    (value.pointer("/tool/name").and_then(Value::as_str) == Some("sextant")).then_some(value)
}

/// An entry of a results folder that its manifest does not account for.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Unlisted {
    /// The path relative to the folder, `/`-separated.
    pub path: String,
    /// What it is, when that is why it does not belong ("a symbolic link").
    pub what: Option<&'static str>,
}

impl std::fmt::Display for Unlisted {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self.what {
            Some(what) => write!(f, "`{}` ({what})", self.path),
            None => write!(f, "`{}`", self.path),
        }
    }
}

/// Every entry of `folder` that is neither manifest.json, nor a file `named`
/// (relative, `/`-separated), nor a folder on the way to one, in name order;
/// a named file or manifest.json that is not a regular file (a symbolic link,
/// a folder, a device) is listed too. Symbolic links are never followed, and
/// only folders that hold named files are entered.
pub fn unlisted_entries(folder: &Path, named: &BTreeSet<String>) -> std::io::Result<Vec<Unlisted>> {
    let folders: BTreeSet<&str> = named
        .iter()
        .flat_map(|n| n.match_indices('/').map(move |(i, _)| &n[..i]))
        .collect();
    let mut found = Vec::new();
    let mut pending = vec![String::new()];
    while let Some(prefix) = pending.pop() {
        let dir = if prefix.is_empty() {
            folder.to_path_buf()
        } else {
            folder.join(&prefix)
        };
        let mut entries: Vec<(std::ffi::OsString, fs::FileType)> = Vec::new();
        for entry in fs::read_dir(&dir)? {
            let entry = entry?;
            entries.push((entry.file_name(), entry.file_type()?));
        }
        entries.sort_by(|a, b| a.0.cmp(&b.0));
        for (name, kind) in entries {
            let Some(name) = name.to_str() else {
                found.push(Unlisted {
                    path: format!("{prefix}{}", name.to_string_lossy()),
                    what: Some("a name that is not UTF-8"),
                });
                continue;
            };
            let path = format!("{prefix}{name}");
            let listed = named.contains(&path) || (prefix.is_empty() && name == "manifest.json");
            if kind.is_dir() && folders.contains(path.as_str()) {
                pending.push(format!("{path}/"));
            } else if listed && kind.is_file() {
                // A named regular file: as it should be.
            } else if listed || !kind.is_file() {
                found.push(Unlisted {
                    path,
                    what: Some(kind_name(&kind)),
                });
            } else {
                found.push(Unlisted { path, what: None });
            }
        }
    }
    found.sort_by(|a, b| a.path.cmp(&b.path));
    Ok(found)
}

fn kind_name(kind: &fs::FileType) -> &'static str {
    use std::os::unix::fs::FileTypeExt;
    if kind.is_symlink() {
        "a symbolic link"
    } else if kind.is_dir() {
        "a folder"
    } else if kind.is_file() {
        "a file"
    } else if kind.is_fifo() {
        "a named pipe"
    } else if kind.is_char_device() || kind.is_block_device() {
        "a device"
    } else if kind.is_socket() {
        "a socket"
    } else {
        "not a regular file"
    }
}

/// "`a`, `b (a symbolic link)` and 3 more".
pub fn describe_entries(entries: &[Unlisted]) -> String {
    let shown: Vec<String> = entries
        .iter()
        .take(NAMED_AT_MOST)
        .map(ToString::to_string)
        .collect();
    let mut text = shown.join(", ");
    if entries.len() > NAMED_AT_MOST {
        text.push_str(&format!(" and {} more", entries.len() - NAMED_AT_MOST));
    }
    text
}

#[cfg(test)]
mod tests {
    use super::*;

    fn names(list: &[&str]) -> BTreeSet<String> {
        list.iter().map(|s| s.to_string()).collect()
    }

    #[test]
    fn only_named_files_and_their_folders_belong() {
        let dir = tempfile::tempdir().unwrap();
        let d = dir.path();
        fs::create_dir_all(d.join("plots")).unwrap();
        fs::create_dir_all(d.join("extra/deep")).unwrap();
        for f in [
            "manifest.json",
            "scores.csv",
            "plots/scree.svg",
            "notes.txt",
        ] {
            fs::write(d.join(f), "x").unwrap();
        }
        fs::write(d.join(".hidden"), "x").unwrap();
        std::os::unix::fs::symlink("/etc", d.join("model.json")).unwrap();
        let found =
            unlisted_entries(d, &names(&["scores.csv", "plots/scree.svg", "model.json"])).unwrap();
        let shown: Vec<String> = found.iter().map(ToString::to_string).collect();
        assert_eq!(
            shown,
            [
                "`.hidden`",
                "`extra` (a folder)",
                "`model.json` (a symbolic link)",
                "`notes.txt`"
            ]
        );
        // A folder of named files that only appears as a folder prefix.
        let found = unlisted_entries(d, &names(&["scores.csv"])).unwrap();
        assert!(found.iter().any(|u| u.path == "plots"), "{found:?}");
    }
}
