//! `sextant verify`: re-hash what a manifest names, and optionally recompute it.
//!
//! Without `--rerun`, every input, the recipe file and every output is hashed
//! again and compared with the manifest, and the manifest's own digest is
//! recomputed. With `--rerun`, the resolved recipe stored in the manifest is run
//! again into a scratch folder and every output is compared byte for byte; for
//! CSV tables the largest absolute difference between numbers is reported.

use crate::error::{Error, InputError};
use crate::outputs::hashing::sha256_hex;
use crate::recipe::resolved::recipe_text;
use crate::run::{compute, prepare_recipe};
use serde_json::Value;
use std::fmt::Write;
use std::fs;
use std::path::{Path, PathBuf};

/// The state of one file named in a manifest.
#[derive(Debug, Clone, PartialEq)]
pub enum FileState {
    Unchanged,
    Changed { found: String },
    Missing,
}

/// One checked file.
#[derive(Debug, Clone)]
pub struct Checked {
    pub role: &'static str,
    pub path: String,
    pub state: FileState,
}

/// What `verify` found.
#[derive(Debug, Clone, Default)]
pub struct Verification {
    pub files: Vec<Checked>,
    pub digest_ok: bool,
    pub notes: Vec<String>,
    /// With `--rerun`: files whose recomputed bytes differ, with a description.
    pub rerun_differences: Vec<String>,
    pub rerun_done: bool,
    pub scratch: Option<PathBuf>,
}

impl Verification {
    pub fn passed(&self) -> bool {
        self.digest_ok
            && self.files.iter().all(|f| f.state == FileState::Unchanged)
            && self.rerun_differences.is_empty()
    }
}

/// Reads a results folder's manifest.
pub fn read_manifest(folder: &Path) -> Result<Value, Error> {
    let path = folder.join("manifest.json");
    let not_results = |reason: String| InputError::NotResults {
        path: folder.display().to_string(),
        reason,
    };
    let bytes =
        fs::read(&path).map_err(|e| not_results(format!("cannot read manifest.json ({e})")))?;
    let value: Value = serde_json::from_slice(&bytes)
        .map_err(|e| not_results(format!("manifest.json is not valid JSON ({e})")))?;
    if value.pointer("/tool/name").and_then(Value::as_str) != Some("sextant") {
        return Err(not_results("manifest.json was not written by sextant".into()).into());
    }
    Ok(value)
}

/// The folder the recipe's relative paths start from, as recorded in the manifest.
pub fn recipe_path(folder: &Path, manifest: &Value) -> PathBuf {
    let rel = manifest
        .pointer("/recipe/path")
        .and_then(Value::as_str)
        .unwrap_or("recipe.toml");
    crate::paths::tidy(&folder.join(rel))
}

fn check_file(role: &'static str, shown: String, path: &Path, expected: &str) -> Checked {
    let state = match fs::read(path) {
        Err(_) => FileState::Missing,
        Ok(bytes) => {
            let found = sha256_hex(&bytes);
            if found == expected {
                FileState::Unchanged
            } else {
                FileState::Changed { found }
            }
        }
    };
    Checked {
        role,
        path: shown,
        state,
    }
}

/// Verifies a results folder.
pub fn verify(folder: &Path, rerun: bool) -> Result<Verification, Error> {
    // First what a killed run left beside the folder (it may put the earlier
    // results back into place).
    let tidied = crate::outputs::debris::tidy(folder);
    let manifest = read_manifest(folder)?;
    let mut report = Verification::default();
    report.notes.extend(tidied);
    let text = |v: &Value, key: &str| {
        v.get(key)
            .and_then(Value::as_str)
            .unwrap_or_default()
            .to_string()
    };
    let recipe = recipe_path(folder, &manifest);
    // A run's inputs are named relative to its recipe; the scores of `apply`
    // name their table and model relative to their own folder.
    let scored = manifest.get("model").is_some() && manifest.get("recipe").is_none();
    let inputs_dir = if scored {
        folder.to_path_buf()
    } else {
        recipe.parent().map(Path::to_path_buf).unwrap_or_default()
    };
    if scored {
        let model = crate::paths::tidy(
            &folder
                .join(text(&manifest["model"], "results"))
                .join("model.json"),
        );
        report.files.push(check_file(
            "model",
            model.display().to_string(),
            &model,
            &text(&manifest["model"], "sha256"),
        ));
    } else {
        report.files.push(check_file(
            "recipe",
            recipe.display().to_string(),
            &recipe,
            &text(&manifest["recipe"], "sha256"),
        ));
    }
    for input in manifest["inputs"].as_array().into_iter().flatten() {
        let path = crate::paths::tidy(&inputs_dir.join(text(input, "path")));
        report.files.push(check_file(
            "input",
            path.display().to_string(),
            &path,
            &text(input, "sha256"),
        ));
    }
    for output in manifest["outputs"].as_array().into_iter().flatten() {
        let name = text(output, "path");
        report.files.push(check_file(
            "output",
            name.clone(),
            &folder.join(&name),
            &text(output, "sha256"),
        ));
    }
    report.digest_ok =
        manifest_digest(&manifest).as_deref() == manifest.get("digest").and_then(Value::as_str);
    if !report.digest_ok {
        report
            .notes
            .push("manifest.json was edited: its digest no longer matches its contents".into());
    }
    let made_by = manifest
        .pointer("/tool/version")
        .and_then(Value::as_str)
        .unwrap_or("?");
    if made_by != env!("CARGO_PKG_VERSION") {
        report.notes.push(format!(
            "the results were made by sextant {made_by}; this is sextant {}, so a difference on rerun may come from the version",
            env!("CARGO_PKG_VERSION")
        ));
    }
    if rerun && scored {
        report.notes.push(
            "--rerun recomputes analyses; to recompute these scores, run `sextant apply` again"
                .into(),
        );
    } else if rerun {
        rerun_and_compare(folder, &manifest, &recipe, &mut report)?;
    }
    Ok(report)
}

/// The digest a manifest should carry: SHA-256 of its compact JSON without
/// `digest` and `run`.
pub fn manifest_digest(manifest: &Value) -> Option<String> {
    let mut body = manifest.clone();
    let map = body.as_object_mut()?;
    map.remove("digest");
    map.remove("run");
    Some(sha256_hex(&serde_json::to_vec(&body).ok()?))
}

fn rerun_and_compare(
    folder: &Path,
    manifest: &Value,
    recipe: &Path,
    report: &mut Verification,
) -> Result<(), Error> {
    // The recipe file itself when it is unchanged; otherwise the resolved recipe
    // recorded in the manifest, rebuilt as recipe text.
    let loaded = if report
        .files
        .first()
        .is_some_and(|f| f.state == FileState::Unchanged)
    {
        crate::recipe::load(recipe)?
    } else {
        let resolved = manifest
            .pointer("/recipe/resolved")
            .cloned()
            .unwrap_or(Value::Null);
        let text = recipe_text(&resolved).map_err(|reason| InputError::NotResults {
            path: folder.display().to_string(),
            reason: format!("the manifest's resolved recipe cannot be read back ({reason})"),
        })?;
        report.notes.push(
            "the recipe file changed since the run; the rerun uses the recipe recorded in the manifest, so report.html, which shows the recipe file's hash, differs".into(),
        );
        crate::recipe::parse(recipe, text)?
    };
    let prepared = prepare_recipe(loaded)?;
    let (_, _, computed) = compute(&prepared)?;
    report.rerun_done = true;

    let scratch = tempfile::Builder::new()
        .prefix("sextant-rerun-")
        .tempdir()
        .map_err(|e| crate::error::OutputError::io(&std::env::temp_dir(), e))?;
    for (name, bytes) in &computed.files {
        let path = scratch.path().join(name);
        if let Some(dir) = path.parent() {
            fs::create_dir_all(dir).map_err(|e| crate::error::OutputError::io(dir, e))?;
        }
        fs::write(&path, bytes).map_err(|e| crate::error::OutputError::io(&path, e))?;
        let old = fs::read(folder.join(name)).unwrap_or_default();
        if old != *bytes {
            report
                .rerun_differences
                .push(describe_difference(name, &old, bytes));
        }
    }
    let recorded_body = {
        let mut m = manifest.clone();
        let map = m.as_object_mut().expect("a manifest is an object");
        map.remove("digest");
        map.remove("run");
        m
    };
    let (rerun_text, _) =
        crate::outputs::manifest::render(&computed.body, &computed.outputs, &placeholder_run());
    let mut rerun_body: Value = serde_json::from_str(&rerun_text).expect("our own JSON");
    let map = rerun_body.as_object_mut().expect("an object");
    map.remove("digest");
    map.remove("run");
    // The rerun reads the recipe back from the manifest, so only the recorded
    // file's hash can stand for it.
    if let (Some(slot), Some(recorded)) = (
        rerun_body.pointer_mut("/recipe/sha256"),
        recorded_body.pointer("/recipe/sha256"),
    ) {
        *slot = recorded.clone();
    }
    if rerun_body != recorded_body && report.rerun_differences.is_empty() {
        report.rerun_differences.push(first_json_difference(
            "manifest.json",
            &recorded_body,
            &rerun_body,
        ));
    }
    if report.rerun_differences.is_empty() {
        drop(scratch);
    } else {
        report.scratch = Some(scratch.keep());
    }
    Ok(())
}

fn placeholder_run() -> crate::outputs::manifest::RunInfo {
    crate::outputs::manifest::RunInfo {
        started_utc: String::new(),
        seconds: 0.0,
        host: String::new(),
        threads: 0,
        platform: String::new(),
    }
}

/// Names the first difference between two JSON values by its path.
fn first_json_difference(name: &str, a: &Value, b: &Value) -> String {
    fn walk(path: String, a: &Value, b: &Value) -> Option<String> {
        match (a, b) {
            (Value::Object(x), Value::Object(y)) => {
                let keys: std::collections::BTreeSet<&String> = x.keys().chain(y.keys()).collect();
                keys.into_iter().find_map(|k| {
                    walk(
                        format!("{path}/{k}"),
                        x.get(k).unwrap_or(&Value::Null),
                        y.get(k).unwrap_or(&Value::Null),
                    )
                })
            }
            (Value::Array(x), Value::Array(y)) if x.len() == y.len() => x
                .iter()
                .zip(y)
                .enumerate()
                .find_map(|(i, (p, q))| walk(format!("{path}/{i}"), p, q)),
            _ if a == b => None,
            _ => Some(format!("{path}: {a} then, {b} now")),
        }
    }
    format!(
        "{name}: {}",
        walk(String::new(), a, b).unwrap_or_else(|| "differs".into())
    )
}

/// Describes how two versions of a result file differ: for CSV tables, the first
/// differing line and the largest absolute difference between numeric cells.
pub fn describe_difference(name: &str, old: &[u8], new: &[u8]) -> String {
    if old.is_empty() {
        return format!("{name}: missing from the results folder");
    }
    if !name.ends_with(".csv") {
        return format!("{name}: bytes differ");
    }
    let old_text = String::from_utf8_lossy(old);
    let new_text = String::from_utf8_lossy(new);
    let (old_lines, new_lines): (Vec<&str>, Vec<&str>) =
        (old_text.lines().collect(), new_text.lines().collect());
    let first = old_lines
        .iter()
        .zip(&new_lines)
        .position(|(a, b)| a != b)
        .map(|i| i + 1);
    let mut largest: Option<f64> = None;
    for (a, b) in old_lines.iter().zip(&new_lines) {
        for (x, y) in a.split(',').zip(b.split(',')) {
            if let (Ok(x), Ok(y)) = (x.parse::<f64>(), y.parse::<f64>()) {
                let d = (x - y).abs();
                if d > 0.0 && largest.is_none_or(|l| d > l) {
                    largest = Some(d);
                }
            }
        }
    }
    let mut out = format!("{name}: differs");
    if let Some(line) = first {
        let _ = write!(out, " from line {line}");
    }
    if old_lines.len() != new_lines.len() {
        let _ = write!(
            out,
            "; {} lines then, {} now",
            old_lines.len(),
            new_lines.len()
        );
    }
    if let Some(d) = largest {
        let _ = write!(out, "; largest absolute difference between numbers {d:e}");
    }
    out
}

/// The text `verify` prints.
pub fn describe(folder: &Path, v: &Verification) -> String {
    let mut out = String::new();
    for f in &v.files {
        let state = match &f.state {
            FileState::Unchanged => "unchanged".to_string(),
            FileState::Changed { found } => format!("CHANGED (now sha256 {found})"),
            FileState::Missing => "MISSING".to_string(),
        };
        let _ = writeln!(out, "{:<7} {:<40} {state}", f.role, f.path);
    }
    let _ = writeln!(
        out,
        "digest  {:<40} {}",
        "manifest.json",
        if v.digest_ok {
            "matches"
        } else {
            "DOES NOT MATCH"
        }
    );
    if v.rerun_done {
        if v.rerun_differences.is_empty() {
            let _ = writeln!(
                out,
                "rerun   every output recomputed byte for byte identical"
            );
        } else {
            for d in &v.rerun_differences {
                let _ = writeln!(out, "rerun   {d}");
            }
            if let Some(s) = &v.scratch {
                let _ = writeln!(
                    out,
                    "rerun   the recomputed files are kept in {}",
                    s.display()
                );
            }
        }
    }
    for n in &v.notes {
        let _ = writeln!(out, "note    {n}");
    }
    let verdict = if v.passed() {
        "verified"
    } else {
        "NOT verified"
    };
    let _ = writeln!(out, "{}: {verdict}", folder.display());
    out
}
