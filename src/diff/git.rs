//! Recipes as committed at a git revision: `main:recipes/x.toml`, or
//! `--rev main recipes/x.toml` for the same file at `main` and in the working
//! tree.
//!
//! The recipe text comes from `git show REV:PATH`, and it is read as if it were
//! the file at PATH in the working tree, so its relative paths start from its
//! own folder. Its input is what that revision would have read:
//! - the file as committed at the revision, when git has it there (written to a
//!   temporary file when the working-tree file differs or is gone);
//! - else the file in the working tree (git never had it: data kept out of the
//!   repository), with a note;
//! - else, when neither exists any more, the other side's input, with a note
//!   that says so: only the recipe changes are then compared.
//!
//! A path in `REV:PATH` is from the repository's top folder, as git reads it,
//! unless it starts with `./` or `../` (from the current folder).

use super::{Side, Source};
use crate::error::{Error, InputError};
use std::path::{Path, PathBuf};
use std::process::Command;

/// A recipe at a revision.
#[derive(Debug, Clone)]
pub struct Revision {
    /// The revision, as given (`main`, `HEAD~2`, a commit).
    pub rev: String,
    /// The path as given after the colon, or the working-tree path of `--rev`.
    pub path: String,
    /// Whether `path` is relative to the current folder (else to the top folder).
    pub from_current: bool,
}

impl Revision {
    fn label(&self) -> String {
        format!("{}:{}", self.rev, self.path)
    }
}

/// The two sides a request names.
pub(super) fn sides(request: &super::DiffRequest) -> Result<(Source, Source), Error> {
    match (&request.rev, &request.b) {
        (Some(rev), None) => {
            let mut path = request.a.to_string_lossy().into_owned();
            // Shown as git reads it: from the current folder.
            if !path.starts_with("./") && !path.starts_with("../") && !path.starts_with('/') {
                path = format!("./{path}");
            }
            let a = Source::Revision(Revision {
                rev: rev.clone(),
                path,
                from_current: true,
            });
            Ok((a, Source::Path(request.a.clone())))
        }
        (Some(_), Some(_)) => Err(InputError::GitRevision {
            spec: "--rev".into(),
            reason: "--rev compares one recipe at that revision with the same file in the working tree: give one path, not two".into(),
        }
        .into()),
        (None, Some(b)) => Ok((source_of(&request.a), source_of(b))),
        (None, None) => Err(InputError::GitRevision {
            spec: request.a.display().to_string(),
            reason: "diff needs two analyses, or one recipe and --rev REV to compare it with its committed version".into(),
        }
        .into()),
    }
}

/// A path on disk, or `REV:PATH` when no file or folder has that name.
fn source_of(arg: &Path) -> Source {
    let text = arg.to_string_lossy();
    if !arg.exists()
        && let Some((rev, path)) = text.split_once(':')
        && !rev.is_empty()
        && !path.is_empty()
    {
        return Source::Revision(Revision {
            rev: rev.to_string(),
            path: path.to_string(),
            from_current: path.starts_with("./") || path.starts_with("../"),
        });
    }
    Source::Path(arg.to_path_buf())
}

/// Runs git in the current folder; its standard output, or what it said.
fn git(args: &[&str]) -> Result<Vec<u8>, String> {
    let out = Command::new("git")
        .args(args)
        .output()
        .map_err(|e| format!("git could not be started ({e})"))?;
    if out.status.success() {
        Ok(out.stdout)
    } else {
        Err(String::from_utf8_lossy(&out.stderr).trim().to_string())
    }
}

/// The repository's top folder and the current folder, both as git sees them
/// (links resolved), so a path can be turned into one git knows.
fn folders(spec: &str) -> Result<(PathBuf, PathBuf), Error> {
    let fail = |reason: String| -> Error {
        InputError::GitRevision {
            spec: spec.to_string(),
            reason,
        }
        .into()
    };
    let top = git(&["rev-parse", "--show-toplevel"]).map_err(|e| {
        fail(format!(
            "the current folder is not in a git repository ({e})"
        ))
    })?;
    let top = PathBuf::from(String::from_utf8_lossy(&top).trim());
    let here = std::env::current_dir()
        .and_then(std::fs::canonicalize)
        .map_err(|e| fail(format!("the current folder cannot be read ({e})")))?;
    Ok((top, here))
}

/// `path` (lexically tidied) relative to the repository's top folder, `/`-separated.
fn in_repository(path: &Path, top: &Path) -> Option<String> {
    let rel = crate::paths::tidy(path);
    let rel = rel.strip_prefix(top).ok()?;
    Some(
        rel.components()
            .map(|c| c.as_os_str().to_string_lossy().into_owned())
            .collect::<Vec<_>>()
            .join("/"),
    )
}

/// Loads the side of a recipe at a revision. `other_input` is the other
/// side's input file and label, used when this recipe's input is gone.
pub(super) fn load_revision(
    revision: &Revision,
    other_input: Option<(&Path, &str)>,
) -> Result<Side, Error> {
    let spec = revision.label();
    let fail = |reason: String| -> Error {
        InputError::GitRevision {
            spec: spec.clone(),
            reason,
        }
        .into()
    };
    // git would read `-…` as an option of its own (`--output=…` writes a file).
    if revision.rev.starts_with('-') {
        return Err(fail("a revision cannot start with `-`".into()));
    }
    let (top, here) = folders(&spec)?;
    let own_path = if revision.from_current || Path::new(&revision.path).is_absolute() {
        crate::paths::tidy(&here.join(&revision.path))
    } else {
        top.join(&revision.path)
    };
    let in_git = in_repository(&own_path, &top)
        .ok_or_else(|| fail("the recipe is outside the repository".into()))?;
    let bytes = git(&["show", &format!("{}:{in_git}", revision.rev)]).map_err(fail)?;
    let text = String::from_utf8(bytes)
        .map_err(|_| fail("the committed recipe is not UTF-8 text".into()))?;
    let recipe = crate::recipe::parse(&own_path, text.clone())?;
    let input = crate::recipe::plan::input_plan(&recipe);
    let shown_input = input.display.clone();
    let committed = in_repository(&input.file, &top)
        .and_then(|rel| git(&["show", &format!("{}:{rel}", revision.rev)]).ok());
    let on_disk = std::fs::read(&input.file).ok();
    let scratch = tempfile::Builder::new()
        .prefix("sextant-diff-")
        .tempdir()
        .map_err(|e| crate::error::OutputError::io(&std::env::temp_dir(), e))?;
    let mut notes = Vec::new();
    let (read_from, keep_pin) = match (committed, on_disk) {
        (Some(old), Some(now)) if old == now => (None, true),
        (Some(old), now) => {
            let name = input.file.file_name().unwrap_or_default();
            let copy = scratch.path().join(name);
            std::fs::write(&copy, &old).map_err(|e| crate::error::OutputError::io(&copy, e))?;
            notes.push(format!(
                "input `{shown_input}` was read as committed at {}, since the file in the working tree {}",
                revision.rev,
                if now.is_some() { "differs" } else { "is gone" }
            ));
            (Some(copy), true)
        }
        (None, Some(_)) => {
            notes.push(format!(
                "input `{shown_input}` is not in git at {}: the file in the working tree was read, which may not be the one that revision analysed",
                revision.rev
            ));
            (None, true)
        }
        (None, None) => {
            let Some((other, label)) = other_input else {
                return Err(fail(format!(
                    "its input `{shown_input}` is no longer present (not in the working tree, not in git at {}), and the other side is not a recipe whose input could stand in",
                    revision.rev
                )));
            };
            notes.push(format!(
                "input `{shown_input}` is no longer present (not in the working tree, not in git at {}): this side was computed on the input of {label}, `{}`, instead, so only the recipe's changes are compared",
                revision.rev,
                crate::paths::relative(&here, other)
            ));
            (Some(other.to_path_buf()), false)
        }
    };
    let recipe = match &read_from {
        Some(file) => crate::recipe::parse(&own_path, with_input(&text, file, keep_pin))?,
        None => recipe,
    };
    let label = spec.clone();
    let mut side = super::side_of_recipe(label, recipe, &|name| {
        format!("{name} computed from {spec}")
    })?;
    if read_from.is_some() {
        restore_recorded_input(&mut side, &shown_input, &text);
    }
    side.notes = notes;
    drop(scratch);
    Ok(side)
}

/// The recipe text with `input.file` set to `file` (and the pin removed
/// unless `keep_pin`: another side's input cannot match it).
fn with_input(text: &str, file: &Path, keep_pin: bool) -> String {
    let Ok(mut doc) = text.parse::<toml_edit::DocumentMut>() else {
        return text.to_string();
    };
    if let Some(input) = doc.get_mut("input").and_then(|i| i.as_table_like_mut()) {
        input.insert(
            "file",
            toml_edit::value(file.to_string_lossy().into_owned()),
        );
        if !keep_pin {
            input.remove("sha256");
        }
    }
    doc.to_string()
}

/// Puts back, in the side's manifest, the input path (and pin) its recipe
/// names, so the comparison of settings shows the recipe as committed.
fn restore_recorded_input(side: &mut Side, shown_input: &str, text: &str) {
    let pin = text
        .parse::<toml::Table>()
        .ok()
        .and_then(|t| t.get("input")?.get("sha256")?.as_str().map(str::to_string));
    if let Some(input) = side.manifest.pointer_mut("/recipe/resolved/input") {
        input["file"] = serde_json::Value::String(shown_input.to_string());
        input["sha256"] = pin.map_or(serde_json::Value::Null, serde_json::Value::String);
    }
    if let Some(record) = side.manifest.pointer_mut("/inputs/0") {
        record["path"] = serde_json::Value::String(shown_input.to_string());
    }
}
