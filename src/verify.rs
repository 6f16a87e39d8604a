//! `sextant verify`: re-hash what a manifest names, and optionally recompute it.
//!
//! Without `--rerun`, every input, the recipe file and every output is hashed
//! again and compared with the manifest, and the manifest's own digest is
//! recomputed. With `--rerun`, the resolved recipe stored in the manifest is run
//! again into a scratch folder and every output is compared byte for byte; for
//! CSV tables the largest absolute difference between numbers is reported.
//!
//! A manifest is not trusted for what it names:
//! - The digest is checked first. When it does not match, the outputs inside
//!   the folder are still checked, but nothing the manifest names outside the
//!   folder (recipe, inputs, model) is opened: those are reported as not
//!   checked, and the verification fails.
//! - Outputs must be plain relative paths inside the folder, and regular files
//!   (no links). Files in the folder that the manifest does not name are
//!   reported, and fail the verification.
//! - The recipe (or, for scores of `apply`, the results folder of the model) is
//!   reached by its relative path: leading `..` then plain names, never an
//!   absolute path. The folder those `..` climb to is the only place outside the
//!   results folder that is opened: inputs must lie inside it (a link that
//!   leaves it is refused).
//! - Only regular files are opened (never a fifo or device) and each is hashed
//!   a block at a time. A refused file is reported with the reason.

use crate::error::{Error, InputError};
use crate::outputs::manifest::{digest_matches, is_plain_relative};
use crate::outputs::reading::{self, Links, Unopened};
use crate::outputs::replace::{Unlisted, unlisted_entries};
use crate::recipe::resolved::recipe_text;
use crate::run::{compute, prepare_recipe};
use serde_json::Value;
use std::collections::BTreeSet;
use std::fmt::Write;
use std::fs;
use std::path::{Path, PathBuf};

/// The largest manifest.json read; a real one is a few kilobytes per output.
const MANIFEST_LIMIT: u64 = 64 << 20;

/// The state of one file named in a manifest.
#[derive(Debug, Clone, PartialEq)]
pub enum FileState {
    Unchanged,
    Changed {
        found: String,
    },
    Missing,
    /// Not opened: the path or the file is not one verify reads.
    Refused {
        reason: String,
    },
    /// Not opened because the manifest's digest does not match.
    NotChecked,
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
    /// Entries of the folder the manifest does not name.
    pub unlisted: Vec<Unlisted>,
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
            && self.unlisted.is_empty()
            && self.rerun_differences.is_empty()
    }
}

fn not_results(folder: &Path, reason: String) -> Error {
    InputError::NotResults {
        path: folder.display().to_string(),
        reason,
    }
    .into()
}

/// Reads a results folder's manifest (a regular file in the folder, written
/// by sextant). Its digest is not checked: see [`read_trusted_manifest`].
pub fn read_manifest(folder: &Path) -> Result<Value, Error> {
    let path = folder.join("manifest.json");
    let file = match reading::open_regular(&path, &crate::paths::resolve(folder), Links::Refuse) {
        Ok(file) => file,
        Err(Unopened::Missing) => {
            return Err(not_results(folder, "there is no manifest.json".into()));
        }
        Err(Unopened::Refused(why)) => {
            return Err(not_results(folder, format!("manifest.json is {why}")));
        }
    };
    let bytes = reading::read_at_most(file, MANIFEST_LIMIT)
        .map_err(|e| not_results(folder, format!("cannot read manifest.json ({e})")))?
        .ok_or_else(|| not_results(folder, "manifest.json is too large to be one".into()))?;
    manifest_from_bytes(folder, &bytes)
}

/// The manifest in `bytes` (of `folder`): JSON that says sextant wrote it.
pub fn manifest_from_bytes(folder: &Path, bytes: &[u8]) -> Result<Value, Error> {
    let value: Value = serde_json::from_slice(bytes)
        .map_err(|e| not_results(folder, format!("manifest.json is not valid JSON ({e})")))?;
    if value.pointer("/tool/name").and_then(Value::as_str) != Some("sextant") {
        return Err(not_results(
            folder,
            "manifest.json was not written by sextant".into(),
        ));
    }
    Ok(value)
}

/// Reads a results folder's manifest and refuses it unless its digest
/// matches its contents (for `apply` and `diff`, which act on what it says).
pub fn read_trusted_manifest(folder: &Path) -> Result<Value, Error> {
    let manifest = read_manifest(folder)?;
    check_trusted(folder, &manifest)?;
    Ok(manifest)
}

/// Refuses a manifest whose digest does not match its contents.
pub fn check_trusted(folder: &Path, manifest: &Value) -> Result<(), Error> {
    if digest_matches(manifest) {
        return Ok(());
    }
    Err(not_results(
        folder,
        "manifest.json was edited: its digest does not match its contents, so nothing it records can be trusted; rerun the analysis (`sextant verify` shows what changed)".into(),
    ))
}

/// The folder the recipe's relative paths start from, as recorded in the manifest.
pub fn recipe_path(folder: &Path, manifest: &Value) -> PathBuf {
    let rel = manifest
        .pointer("/recipe/path")
        .and_then(Value::as_str)
        .unwrap_or("recipe.toml");
    crate::paths::tidy(&folder.join(rel))
}

/// A path the manifest names relative to `from`: leading `..` then plain
/// names. Returns the lexical absolute path and how many folders it climbs.
fn reach(from: &Path, rel: &str) -> Result<(PathBuf, usize), String> {
    if rel.starts_with('/') {
        return Err("an absolute path; a manifest names files by relative paths only".into());
    }
    let climbs = rel.split('/').take_while(|p| *p == "..").count();
    let rest = rel.split('/').skip(climbs).collect::<Vec<_>>().join("/");
    if !is_plain_relative(&rest) {
        return Err("not a relative path of the form `../folder/file`".into());
    }
    let mut base = crate::paths::normalize(from);
    for _ in 0..climbs {
        if !base.pop() {
            return Err("climbs above the root folder".into());
        }
    }
    Ok((base.join(rest), climbs))
}

/// `path` with its last `climbs` names removed (lexically).
fn climb(path: &Path, climbs: usize) -> PathBuf {
    let mut base = crate::paths::normalize(path);
    for _ in 0..climbs {
        base.pop();
    }
    base
}

/// Hashes `path` if it may be opened and compares it with `expected`.
fn check_file(path: &Path, within: &Path, links: Links, expected: &str) -> FileState {
    let file = match reading::open_regular(path, within, links) {
        Ok(file) => file,
        Err(Unopened::Missing) => return FileState::Missing,
        Err(Unopened::Refused(reason)) => return FileState::Refused { reason },
    };
    match reading::sha256_of(file) {
        Ok(found) if found == expected => FileState::Unchanged,
        Ok(found) => FileState::Changed { found },
        Err(e) => FileState::Refused {
            reason: format!("cannot be read ({e})"),
        },
    }
}

/// Where the files named outside the results folder are, once their paths
/// passed [`reach`]: (role, shown path, absolute path or why it was refused,
/// expected hash), and the folder they must all lie in.
struct Outside {
    files: Vec<(&'static str, String, Result<PathBuf, String>, String)>,
    root: PathBuf,
}

fn text(v: &Value, key: &str) -> String {
    v.get(key)
        .and_then(Value::as_str)
        .unwrap_or_default()
        .to_string()
}

/// Resolves the recipe (or model) and inputs a manifest names.
fn outside_files(folder: &Path, manifest: &Value, scored: bool) -> Outside {
    let mut files = Vec::new();
    // A run's inputs are named relative to its recipe; the scores of `apply`
    // name their table and model relative to their own folder.
    let (inputs_dir, root) = if scored {
        let rel = text(&manifest["model"], "results");
        let shown = crate::paths::tidy(&folder.join(&rel).join("model.json"));
        let reached = reach(folder, &rel);
        let root = match &reached {
            Ok((results, climbs)) => {
                let own = climb(folder, *climbs);
                let theirs = analysis_root(results).filter(|r| own.starts_with(r));
                theirs.unwrap_or(own)
            }
            Err(_) => crate::paths::normalize(folder),
        };
        files.push((
            "model",
            shown.display().to_string(),
            reached.map(|(p, _)| p.join("model.json")),
            text(&manifest["model"], "sha256"),
        ));
        (crate::paths::normalize(folder), root)
    } else {
        let rel = manifest
            .pointer("/recipe/path")
            .and_then(Value::as_str)
            .unwrap_or("recipe.toml");
        let shown = crate::paths::tidy(&folder.join(rel));
        let reached = reach(folder, rel);
        let root = match &reached {
            Ok((_, climbs)) => climb(folder, *climbs),
            Err(_) => crate::paths::normalize(folder),
        };
        let dir = reached
            .as_ref()
            .ok()
            .and_then(|(p, _)| p.parent().map(Path::to_path_buf))
            .unwrap_or_else(|| root.clone());
        files.push((
            "recipe",
            shown.display().to_string(),
            reached.map(|(p, _)| p),
            text(&manifest["recipe"], "sha256"),
        ));
        (dir, root)
    };
    let shown_dir = if scored {
        folder.to_path_buf()
    } else {
        recipe_path(folder, manifest)
            .parent()
            .map(Path::to_path_buf)
            .unwrap_or_default()
    };
    for input in manifest["inputs"].as_array().into_iter().flatten() {
        let rel = text(input, "path");
        let shown = crate::paths::tidy(&shown_dir.join(&rel));
        let at = reach(&inputs_dir, &rel).and_then(|(p, _)| {
            if p.starts_with(&root) {
                Ok(p)
            } else {
                Err(format!(
                    "outside {}, the folder the manifest's own paths reach",
                    root.display()
                ))
            }
        });
        files.push((
            "input",
            shown.display().to_string(),
            at,
            text(input, "sha256"),
        ));
    }
    Outside { files, root }
}

/// The folder an analysis' recipe path climbs to, from its own manifest (if it
/// is readable and its digest matches).
fn analysis_root(results: &Path) -> Option<PathBuf> {
    let manifest = read_trusted_manifest(results).ok()?;
    let rel = manifest.pointer("/recipe/path")?.as_str()?;
    let (_, climbs) = reach(results, rel).ok()?;
    Some(climb(results, climbs))
}

/// Verifies a results folder.
pub fn verify(folder: &Path, rerun: bool) -> Result<Verification, Error> {
    // First what a killed run left beside the folder (it may put the earlier
    // results back into place).
    let tidied = crate::outputs::debris::tidy(folder);
    let manifest = read_manifest(folder)?;
    let mut report = Verification {
        digest_ok: digest_matches(&manifest),
        ..Verification::default()
    };
    report.notes.extend(tidied);
    if !report.digest_ok {
        report.notes.push(
            "manifest.json was edited: its digest no longer matches its contents, so the files it names outside the results folder were not opened".into(),
        );
    }
    let scored = manifest.get("model").is_some() && manifest.get("recipe").is_none();
    let outside = outside_files(folder, &manifest, scored);
    let root = crate::paths::resolve(&outside.root);
    for (role, shown, at, expected) in outside.files {
        let state = match at {
            _ if !report.digest_ok => FileState::NotChecked,
            Ok(path) => check_file(&path, &root, Links::FollowInside, &expected),
            Err(reason) => FileState::Refused { reason },
        };
        report.files.push(Checked {
            role,
            path: shown,
            state,
        });
    }
    let inside = crate::paths::resolve(folder);
    let mut named = BTreeSet::new();
    for output in manifest["outputs"].as_array().into_iter().flatten() {
        let name = text(output, "path");
        let state = if is_plain_relative(&name) {
            named.insert(name.clone());
            check_file(
                &folder.join(&name),
                &inside,
                Links::Refuse,
                &text(output, "sha256"),
            )
        } else {
            FileState::Refused {
                reason: "not a plain relative path inside the results folder".into(),
            }
        };
        report.files.push(Checked {
            role: "output",
            path: name,
            state,
        });
    }
    report.unlisted =
        unlisted_entries(folder, &named).map_err(|e| crate::error::OutputError::io(folder, e))?;
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
        match rerun_refusal(&manifest, &report) {
            Some(why) => report.notes.push(format!("not rerun: {why}")),
            None => {
                let recipe = recipe_path(folder, &manifest);
                rerun_and_compare(folder, &manifest, &recipe, &mut report)?;
            }
        }
    }
    Ok(report)
}

/// Why `--rerun` must not run what the manifest records: a rerun reads the
/// recorded input, so it must be the file just verified.
fn rerun_refusal(manifest: &Value, report: &Verification) -> Option<String> {
    if !report.digest_ok {
        return Some("the manifest's digest does not match".into());
    }
    // An audit reports a changed input; it never suggests re-pinning it.
    if let Some(f) = report
        .files
        .iter()
        .find(|f| f.role == "input" && f.state != FileState::Unchanged)
    {
        let how = match f.state {
            FileState::Changed { .. } => "changed since the analysis",
            FileState::Missing => "is missing",
            _ => "could not be checked",
        };
        return Some(format!(
            "input {} {how}, so a rerun would not read the data these results came from",
            f.path
        ));
    }
    let recorded = manifest.pointer("/inputs/0/path").and_then(Value::as_str);
    let resolved = manifest
        .pointer("/recipe/resolved/input/file")
        .and_then(Value::as_str);
    if recorded.is_none() || recorded != resolved {
        return Some("the recorded recipe reads another input than the one recorded".into());
    }
    None
}

/// The digest a manifest should carry: SHA-256 of its compact JSON without
/// `digest` and `run`.
pub fn manifest_digest(manifest: &Value) -> Option<String> {
    crate::outputs::manifest::digest_of(manifest)
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

    // An interruption removes the rerun's files too.
    let (scratch, _on_signal) = crate::cleanup::create_registered(
        || tempfile::Builder::new().prefix("sextant-rerun-").tempdir(),
        |dir| dir.path(),
    )
    .map_err(|e| crate::error::OutputError::io(&std::env::temp_dir(), e))?;
    for (name, bytes) in &computed.files {
        let path = crate::paths::make_subfolders(scratch.path(), name)
            .map_err(|e| crate::error::OutputError::io(&scratch.path().join(name), e))?;
        fs::write(&path, bytes).map_err(|e| crate::error::OutputError::io(&path, e))?;
        let old = read_output(folder, name, bytes.len() as u64);
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

/// An output's bytes for comparison, if it is a regular file of the folder no
/// longer than `expected` + 1 bytes (longer means different; empty when absent).
fn read_output(folder: &Path, name: &str, expected: u64) -> Vec<u8> {
    reading::open_regular(
        &folder.join(name),
        &crate::paths::resolve(folder),
        Links::Refuse,
    )
    .ok()
    .and_then(|f| {
        let mut bytes = Vec::new();
        std::io::Read::read_to_end(&mut std::io::Read::take(f, expected + 1), &mut bytes).ok()?;
        Some(bytes)
    })
    .unwrap_or_default()
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
            FileState::Refused { reason } => format!("REFUSED, not opened: {reason}"),
            FileState::NotChecked => {
                "NOT CHECKED (outside the results folder, named by an edited manifest)".to_string()
            }
        };
        let _ = writeln!(out, "{:<7} {:<40} {state}", f.role, f.path);
    }
    for u in &v.unlisted {
        let what = u.what.map_or(String::new(), |w| format!(" ({w})"));
        let _ = writeln!(out, "extra   {:<40} NOT IN THE MANIFEST{what}", u.path);
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
