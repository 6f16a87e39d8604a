//! `sextant new`: inspect a table and write a commented starter recipe.
//!
//! Every cell is read as text once, and each column gets one role with a reason:
//!
//! - **id**: a column with a non-empty, different value in every row. It is text
//!   that is not a date, or whole numbers whose name says it is a label (a word
//!   such as `id`, `sample`, `name`, `code`) or that run 1, 2, …, n without gaps.
//!   A column with a label-like name wins; otherwise the first text column does,
//!   then the first run of row numbers.
//! - **group**: a text column (not dates) with between 2 and
//!   max(2, min(20, rows / 5)) distinct non-empty values, so each value has about
//!   five rows or more. Whole numbers whose name says they are a grouping code
//!   (`group`, `class`, `batch`, …) and that have no empty cell count too.
//! - **feature**: every other numeric column. Features are not listed in the
//!   recipe; the recipe relies on the default "every numeric column that is not
//!   the id, a group or excluded".
//! - **excluded**: everything else, each with its reason: dates and times, other
//!   text, a second label column, row numbers, numeric codes, constant columns,
//!   empty columns, numbers written with a decimal comma, and numbers with stray
//!   text (which `check` would otherwise reject).
//!
//! Missing cells: the reader's default texts (`""`, `NA`, `N/A`, `-`) plus common
//! stand-ins for a missing number (`NaN`, `n/a`, `?`, `ND`, `<LOD`, …) when they
//! appear in an otherwise numeric column; those are added to `input.missing`.
//!
//! Rules of thumb, said as such in the recipe: a feature missing more than 30 %
//! of its cells is dropped by `max_feature_missing`; a log10 transform is
//! suggested (commented out) for a feature whose values are all above zero, whose
//! skewness is above 1 and whose log10 has less than half that skewness.
//!
//! The recipe is written to a temporary file beside its target, checked with the
//! same code as `sextant check`, and only then renamed into place; an existing
//! file is replaced only with `--force`. The text depends only on the table and
//! the relative position of recipe and table: no time, host or absolute path.
//!
//! `inspect` gives each column its role; `recipe_text` writes the recipe
//! from the inspection; this module reads the table, writes the checked file and
//! prints the summary.

mod inspect;
mod recipe_text;

use crate::error::{Error, InputError, OutputError};
use crate::recipe::raw::DEFAULT_MISSING_TOKENS;
use crate::table::{ColumnData, ReadOptions, read_header, read_table_parallel};
use inspect::{Inspection, Role, inspect};
use recipe_text::{counted, delimiter_text, plain, recipe_text, results_folder, toml_str};
use std::collections::BTreeSet;
use std::fmt::Write as _;
use std::io::Write as _;
use std::path::{Path, PathBuf};

/// The `max_feature_missing` the starter recipe writes (the recipe default).
pub const MAX_FEATURE_MISSING: f64 = 0.3;
/// A group column has at most this many distinct values…
pub const MAX_GROUP_VALUES: usize = 20;
/// …and at most one distinct value per this many rows (but 2 values are always allowed).
pub const ROWS_PER_GROUP_VALUE: usize = 5;
/// Skewness above this marks a right-skewed feature (rule of thumb).
pub const SKEWNESS_LIMIT: f64 = 1.0;
/// Fewer observed values than this give no skewness worth quoting.
pub const MIN_VALUES_FOR_SKEWNESS: usize = 8;
/// The `compute` the starter recipe writes, lowered to the number of usable features.
pub const COMPUTE: usize = 10;

/// Inspects `data`, writes a starter recipe to `output` (default: `<data stem>.toml`
/// in the current folder; an existing folder gets that name inside it) and returns
/// the summary for standard output.
pub fn run_new(data: &Path, output: Option<&Path>, force: bool) -> Result<String, Error> {
    let target = recipe_path(data, output);
    let shown_target = target.display().to_string();
    let refuse = |reason: String| OutputError::Refused {
        path: shown_target.clone(),
        reason,
    };
    if crate::paths::normalize(&target) == crate::paths::normalize(data) {
        return Err(
            refuse("this is the table itself; choose another recipe path with -o".into()).into(),
        );
    }
    let existed = std::fs::symlink_metadata(&target).is_ok();
    if existed && !force {
        return Err(refuse(already_exists()).into());
    }

    let table = read(data)?;
    let inspection = inspect(&table)?;
    let recipe_dir = folder_of(&target);
    let input_file = crate::paths::relative(&recipe_dir, data);
    let results = results_folder(&recipe_dir, data);
    let text = recipe_text(&table, &inspection, &input_file, &results);
    write_checked(&target, &recipe_dir, text.as_bytes(), force)?;
    Ok(summary(&table, &inspection, &target, existed && force))
}

fn already_exists() -> String {
    "the file already exists; sextant new does not overwrite it unless --force is given (or choose another path with -o)".into()
}

/// The recipe path: `-o` as given, `<stem>.toml` inside `-o` when it is a folder,
/// or `<stem>.toml` in the current folder.
fn recipe_path(data: &Path, output: Option<&Path>) -> PathBuf {
    let stem = data
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .filter(|s| !s.is_empty())
        .unwrap_or_else(|| "table".into());
    let name = format!("{stem}.toml");
    match output {
        None => PathBuf::from(name),
        Some(p) => {
            let as_text = p.as_os_str().to_string_lossy();
            if p.is_dir() || as_text.ends_with('/') || as_text.ends_with(std::path::MAIN_SEPARATOR)
            {
                p.join(name)
            } else {
                p.to_path_buf()
            }
        }
    }
}

fn folder_of(path: &Path) -> PathBuf {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    }
}

// ---------------------------------------------------------------------------
// Reading

/// The table with every cell as trimmed text, and how it was read.
struct Loaded {
    display: String,
    file_name: String,
    delimiter: u8,
    /// Whether `delimiter` differs from the one the file's extension implies.
    delimiter_written: bool,
    /// The decimal mark the numbers are written with.
    decimal: u8,
    names: Vec<String>,
    cells: Vec<Vec<String>>,
    lines: Vec<u64>,
}

impl Loaded {
    fn n_rows(&self) -> usize {
        self.lines.len()
    }
}

fn extension_delimiter(path: &Path) -> u8 {
    let ext = path
        .extension()
        .map(|e| e.to_string_lossy().to_ascii_lowercase());
    match ext.as_deref() {
        Some("tsv") | Some("tab") => b'\t',
        _ => b',',
    }
}

fn read(data: &Path) -> Result<Loaded, Error> {
    let display = data.display().to_string();
    let bytes = crate::paths::read_regular(data).map_err(|source| InputError::Io {
        path: display.clone(),
        source,
    })?;
    let default = extension_delimiter(data);
    let mut delimiter = default;
    let header = read_header(&bytes, &display, default)?;
    if let [only] = header.names.as_slice() {
        // One column whose name holds another delimiter: the file most likely uses it.
        let mut best: Option<(usize, u8)> = None;
        for d in [b';', b'\t', b',', b'|'] {
            let count = only.bytes().filter(|&b| b == d).count();
            if d != default && count > 0 && best.is_none_or(|(c, _)| count > c) {
                best = Some((count, d));
            }
        }
        if let Some((_, d)) = best
            && read_header(&bytes, &display, d).is_ok_and(|h| h.names.len() > 1)
        {
            delimiter = d;
        }
    }
    let header = read_header(&bytes, &display, delimiter)?;
    let options = ReadOptions::new(
        delimiter,
        DEFAULT_MISSING_TOKENS
            .iter()
            .map(|s| s.to_string())
            .collect(),
        header.names.clone(),
    );
    let table = read_table_parallel(&bytes, &display, &options)?;
    let mut names = Vec::new();
    let mut cells = Vec::new();
    for column in table.columns {
        let ColumnData::Text(values) = column.data else {
            unreachable!("every column is read as text")
        };
        names.push(column.name);
        cells.push(std::sync::Arc::unwrap_or_clone(values));
    }
    let decimal = inspect::decimal_mark(&cells, delimiter);
    if table.lines.len() < 2 {
        return Err(InputError::TooFewRows {
            path: display,
            rows: table.lines.len(),
            why: String::new(),
        }
        .into());
    }
    Ok(Loaded {
        file_name: data
            .file_name()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_else(|| display.clone()),
        display,
        delimiter,
        delimiter_written: delimiter != default,
        decimal,
        names,
        cells,
        lines: table.lines,
    })
}
// ---------------------------------------------------------------------------
// Writing the file

/// Writes `bytes` to a temporary file in `dir`, checks it as `sextant check`
/// would, and renames it to `target` (refusing an existing file unless `force`).
fn write_checked(target: &Path, dir: &Path, bytes: &[u8], force: bool) -> Result<(), Error> {
    let io = |e: std::io::Error| OutputError::io(target, e);
    std::fs::create_dir_all(dir).map_err(io)?;
    let mut builder = tempfile::Builder::new();
    builder.prefix(".sextant-new-").suffix(".toml");
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        // Like any new file: read-write for all, less what the umask takes away.
        builder.permissions(std::fs::Permissions::from_mode(0o666));
    }
    // Checking the recipe reads the whole table: an interruption removes it.
    let (mut file, _on_signal) =
        crate::cleanup::create_registered(|| builder.tempfile_in(dir), |file| file.path())
            .map_err(io)?;
    file.write_all(bytes).map_err(io)?;
    file.as_file().sync_all().map_err(io)?;

    let checked =
        crate::run::prepare(file.path()).and_then(|p| crate::run::preprocess(&p).map(|_| ()));
    if let Err(e) = checked {
        return Err(OutputError::Refused {
            path: target.display().to_string(),
            reason: format!(
                "the starter recipe did not pass the check, so it was not written; this is a fault in `sextant new`, please report it with the table's header. The check said: {e}"
            ),
        }
        .into());
    }
    let persisted = if force {
        file.persist(target)
    } else {
        file.persist_noclobber(target)
    };
    persisted.map_err(|e| {
        if e.error.kind() == std::io::ErrorKind::AlreadyExists {
            OutputError::Refused {
                path: target.display().to_string(),
                reason: already_exists(),
            }
        } else {
            OutputError::io(target, e.error)
        }
    })?;
    Ok(())
}

// ---------------------------------------------------------------------------
// The summary

/// A path as a shell argument: quoted when it holds anything but plain characters.
fn shell_word(s: &str) -> String {
    let plain_chars = |c: char| {
        c.is_ascii_alphanumeric() || matches!(c, '_' | '-' | '.' | '/' | '+' | ',' | ':' | '@')
    };
    if !s.is_empty() && s.chars().all(plain_chars) {
        s.to_string()
    } else {
        format!("'{}'", s.replace('\'', "'\\''"))
    }
}

fn summary(table: &Loaded, inspection: &Inspection, target: &Path, replaced: bool) -> String {
    let rows = table.n_rows();
    let mut out = String::new();
    let _ = writeln!(
        out,
        "table      {}: {}, {}, delimiter {}{}",
        table.display,
        counted(rows, "row"),
        counted(table.names.len(), "column"),
        delimiter_text(table.delimiter),
        if table.decimal == b',' {
            ", decimal comma"
        } else {
            ""
        }
    );
    let width = inspection
        .columns
        .iter()
        .map(|d| plain(&d.name).chars().count())
        .max()
        .unwrap_or(0)
        .min(28);
    let skewed: BTreeSet<&str> = inspection
        .skewed(rows)
        .iter()
        .map(|(d, _)| d.name.as_str())
        .collect();
    for d in &inspection.columns {
        let role = match d.role {
            Role::Id => "id",
            Role::Group => "group",
            Role::Feature => "feature",
            Role::Excluded => "exclude",
        };
        let mut reason = d.reason.clone();
        if skewed.contains(d.name.as_str()) {
            reason.push_str("; right-skewed: a log10 transform is suggested, not enabled");
        }
        let _ = writeln!(
            out,
            "{role:<10} {:width$}  {}",
            plain(&d.name),
            plain(&reason)
        );
    }
    for (token, columns) in &inspection.extra_missing {
        let _ = writeln!(
            out,
            "missing    {} is read as missing (seen in {})",
            toml_str(token),
            crate::text::count(columns.len(), "numeric column", "numeric columns")
        );
    }
    let usable = inspection.usable(rows).len();
    let features = inspection.features(rows).len();
    let _ = writeln!(
        out,
        "features   {}, {usable} kept after max_feature_missing = {MAX_FEATURE_MISSING}",
        crate::text::count(features, "numeric column", "numeric columns")
    );
    let shown = target.display().to_string();
    let _ = writeln!(
        out,
        "recipe     {shown} written{}",
        if replaced {
            " (the old file was replaced)"
        } else {
            ""
        }
    );
    let _ = writeln!(out, "next       sextant check {}", shell_word(&shown));
    out
}
