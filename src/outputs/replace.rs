//! Whether an existing folder may be replaced by new results.
//!
//! A folder is replaced only if it holds sextant results of the same recipe and
//! inputs, or when the caller says `replace`; a folder that is not a sextant
//! results folder is never replaced.

use super::manifest::fingerprint;
use crate::error::OutputError;
use serde_json::Value;
use std::fs;
use std::path::Path;

/// Decides whether `target` may be replaced by results with `new_fingerprint`.
pub fn check_replaceable(
    target: &Path,
    new_fingerprint: &(String, Vec<String>),
    replace: bool,
) -> Result<(), OutputError> {
    if !target.exists() {
        return Ok(());
    }
    let refuse = |reason: String| OutputError::Refused {
        path: target.display().to_string(),
        reason,
    };
    if !target.is_dir() {
        return Err(refuse(
            "exists and is not a folder; choose another output.folder".into(),
        ));
    }
    let manifest = target.join("manifest.json");
    let old: Option<Value> = fs::read(&manifest)
        .ok()
        .and_then(|b| serde_json::from_slice(&b).ok());
    let old = match old {
        Some(v) if v.pointer("/tool/name").and_then(Value::as_str) == Some("sextant") => v,
        _ => {
            let empty = fs::read_dir(target)
                .map(|mut d| d.next().is_none())
                .unwrap_or(false);
            if empty {
                return Ok(());
            }
            return Err(refuse(
                "exists and is not a sextant results folder (no manifest.json); sextant will not replace it".into(),
            ));
        }
    };
    if replace || fingerprint(&old).as_ref() == Some(new_fingerprint) {
        return Ok(());
    }
    Err(refuse(
        "holds results of a different recipe or input; pass --replace to replace them, or choose another output.folder"
            .into(),
    ))
}
