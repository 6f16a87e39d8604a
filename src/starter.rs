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

use crate::error::{Error, InputError, OutputError};
use crate::recipe::raw::DEFAULT_MISSING_TOKENS;
use crate::table::{ColumnData, ReadOptions, read_header, read_table};
use crate::text::{percent_figure as pct, three_significant as sig3};
use std::collections::{BTreeMap, BTreeSet};
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

/// Texts (compared without case) that stand in for a missing number.
const MISSING_LIKE: &[&str] = &[
    "na", "n/a", "n.a.", "nan", "?", "nd", "n.d.", "<lod", "<loq", "<dl", "<mdl", "bdl", "bql",
    "blq", "null", "none", "#n/a", "missing", ".", "--", "\u{2013}", "\u{2014}",
];
/// Name words that mark a label column (id candidates).
const LABEL_WORDS: &[&str] = &[
    "id",
    "sample",
    "name",
    "code",
    "key",
    "uid",
    "uuid",
    "barcode",
    "accession",
    "label",
    "index",
    "specimen",
    "subject",
    "patient",
    "participant",
];
/// Name words that mark a numeric column as a code rather than a measurement.
const CODE_WORDS: &[&str] = &[
    "id",
    "code",
    "key",
    "uid",
    "uuid",
    "barcode",
    "accession",
    "index",
];
/// Name words that mark whole numbers as a grouping code.
const GROUP_WORDS: &[&str] = &[
    "group",
    "class",
    "batch",
    "cluster",
    "category",
    "treatment",
    "cohort",
    "site",
    "lot",
    "plate",
    "species",
    "cultivar",
    "strain",
    "genotype",
    "condition",
    "block",
    "type",
];

/// Where comments start on a line that also holds a setting.
const COMMENT_COLUMN: usize = 33;
/// Width that comment paragraphs are wrapped to.
const WRAP: usize = 80;

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
    let options = ReadOptions {
        delimiter,
        missing_tokens: DEFAULT_MISSING_TOKENS
            .iter()
            .map(|s| s.to_string())
            .collect(),
        text_columns: header.names.clone(),
    };
    let table = read_table(&bytes, &display, &options)?;
    let mut names = Vec::new();
    let mut cells = Vec::new();
    for column in table.columns {
        let ColumnData::Text(values) = column.data else {
            unreachable!("every column is read as text")
        };
        names.push(column.name);
        cells.push(std::sync::Arc::unwrap_or_clone(values));
    }
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
        names,
        cells,
        lines: table.lines,
    })
}

// ---------------------------------------------------------------------------
// Inspection

/// What the cells of one column are.
#[derive(Debug, Clone)]
enum Kind {
    /// Every cell is empty or a missing-value text.
    Empty,
    Numeric(Numbers),
    /// Text throughout (or mostly).
    Text(Texts),
    /// Numbers, some written with a decimal comma.
    DecimalComma {
        example: String,
    },
    /// Mostly numbers, with a few texts that are not missing-value marks.
    Stray {
        texts: usize,
        first_line: u64,
        first_text: String,
    },
}

#[derive(Debug, Clone)]
struct Numbers {
    /// The observed values, in row order.
    values: Vec<f64>,
    /// Cells read as missing (default texts and `tokens`).
    missing: usize,
    /// Missing-value stand-ins beyond the default texts, with their counts.
    tokens: BTreeMap<String, usize>,
    /// Every cell is filled and its text differs from every other cell's.
    unique: bool,
    integer: bool,
    distinct: usize,
    stats: Stats,
}

#[derive(Debug, Clone)]
struct Texts {
    distinct: usize,
    empty: usize,
    dates: bool,
}

#[derive(Debug, Clone, Copy)]
struct Stats {
    min: f64,
    max: f64,
    sd: f64,
    skewness: f64,
    /// The skewness of log10 of the values, when all are above zero.
    log_skewness: Option<f64>,
}

/// The role chosen for a column, with the reason in plain words.
#[derive(Debug, Clone, PartialEq)]
enum Role {
    Id,
    Group,
    Feature,
    Excluded,
}

#[derive(Debug, Clone)]
struct Decision {
    name: String,
    kind: Kind,
    role: Role,
    reason: String,
}

/// Everything the recipe and the summary say about the table.
struct Inspection {
    columns: Vec<Decision>,
    /// Extra missing-value texts, with the feature columns they were seen in.
    extra_missing: BTreeMap<String, Vec<String>>,
    group_limit: usize,
}

impl Inspection {
    fn with_role(&self, role: Role) -> impl Iterator<Item = &Decision> {
        self.columns.iter().filter(move |d| d.role == role)
    }

    fn id(&self) -> Option<&Decision> {
        self.with_role(Role::Id).next()
    }

    /// Features with their numbers and missing share.
    fn features(&self, rows: usize) -> Vec<(&Decision, &Numbers, f64)> {
        self.with_role(Role::Feature)
            .filter_map(|d| match &d.kind {
                Kind::Numeric(n) => Some((d, n, n.missing as f64 / rows as f64)),
                _ => None,
            })
            .collect()
    }

    /// Features that survive `max_feature_missing`.
    fn usable(&self, rows: usize) -> Vec<(&Decision, &Numbers, f64)> {
        self.features(rows)
            .into_iter()
            .filter(|(_, _, share)| *share <= MAX_FEATURE_MISSING)
            .collect()
    }

    /// Usable features that look right-skewed in a way a log scale evens out.
    fn skewed(&self, rows: usize) -> Vec<(&Decision, Stats)> {
        self.usable(rows)
            .into_iter()
            .filter(|(_, n, _)| n.values.len() >= MIN_VALUES_FOR_SKEWNESS)
            .filter_map(|(d, n, _)| {
                let s = n.stats;
                let log = s.log_skewness?;
                (s.skewness > SKEWNESS_LIMIT && log.abs() < s.skewness / 2.0).then_some((d, s))
            })
            .collect()
    }
}

fn is_missing_like(cell: &str) -> bool {
    let lower = cell.to_lowercase();
    MISSING_LIKE.contains(&lower.as_str())
}

fn parse_number(cell: &str) -> Option<f64> {
    cell.parse::<f64>().ok().filter(|v| v.is_finite())
}

/// A date or time such as 2025-06-02, 02.06.2025, 6/2/25 14:05 or 14:05:30.
fn looks_like_date(cell: &str) -> bool {
    let allowed =
        |c: char| c.is_ascii_digit() || matches!(c, '-' | '/' | '.' | ':' | ' ' | 'T' | 'Z' | '+');
    let digits = cell.chars().filter(char::is_ascii_digit).count();
    let separators = cell
        .chars()
        .filter(|c| matches!(c, '-' | '/' | '.'))
        .count();
    cell.chars().all(allowed) && digits >= 3 && (separators >= 2 || cell.contains(':'))
}

/// The words of a column name: split at non-letters and at lower-to-upper changes,
/// lower-cased (`SampleID` → `sample`, `id`).
fn name_words(name: &str) -> Vec<String> {
    let mut words = Vec::new();
    let mut current = String::new();
    let mut previous_lower = false;
    for c in name.chars() {
        if !c.is_alphanumeric() {
            if !current.is_empty() {
                words.push(std::mem::take(&mut current));
            }
            previous_lower = false;
            continue;
        }
        if c.is_uppercase() && previous_lower && !current.is_empty() {
            words.push(std::mem::take(&mut current));
        }
        current.extend(c.to_lowercase());
        previous_lower = c.is_lowercase() || c.is_ascii_digit();
    }
    if !current.is_empty() {
        words.push(current);
    }
    words
}

fn name_has(name: &str, list: &[&str]) -> bool {
    name_words(name).iter().any(|w| list.contains(&w.as_str()))
}

fn kind_of(cells: &[String], lines: &[u64]) -> Kind {
    let mut values = Vec::new();
    let mut missing = 0;
    let mut tokens: BTreeMap<String, usize> = BTreeMap::new();
    let mut others: Vec<(u64, &str)> = Vec::new();
    for (cell, &line) in cells.iter().zip(lines) {
        if DEFAULT_MISSING_TOKENS.contains(&cell.as_str()) {
            missing += 1;
        } else if let Some(v) = parse_number(cell) {
            values.push(v);
        } else if is_missing_like(cell) {
            missing += 1;
            *tokens.entry(cell.clone()).or_default() += 1;
        } else {
            others.push((line, cell));
        }
    }
    if values.is_empty() && others.is_empty() {
        return Kind::Empty;
    }
    if others.is_empty() {
        let distinct_texts: BTreeSet<&str> = cells.iter().map(String::as_str).collect();
        let distinct: BTreeSet<u64> = values.iter().map(|v| v.to_bits()).collect();
        let stats = stats(&values);
        return Kind::Numeric(Numbers {
            unique: missing == 0 && distinct_texts.len() == cells.len(),
            integer: values.iter().all(|v| v.fract() == 0.0 && v.abs() < 9.0e15),
            distinct: distinct.len(),
            values,
            missing,
            tokens,
            stats,
        });
    }
    let comma = |t: &str| t.contains(',') && parse_number(&t.replacen(',', ".", 1)).is_some();
    if others.iter().all(|(_, t)| comma(t)) {
        return Kind::DecimalComma {
            example: others[0].1.to_string(),
        };
    }
    if values.len() >= others.len() {
        let (first_line, first_text) = others[0];
        return Kind::Stray {
            texts: others.len(),
            first_line,
            first_text: first_text.to_string(),
        };
    }
    let filled: Vec<&str> = cells
        .iter()
        .map(String::as_str)
        .filter(|c| !c.is_empty())
        .collect();
    let distinct: BTreeSet<&str> = filled.iter().copied().collect();
    Kind::Text(Texts {
        distinct: distinct.len(),
        empty: cells.len() - filled.len(),
        dates: !filled.is_empty() && filled.iter().all(|c| looks_like_date(c)),
    })
}

/// Minimum, maximum, standard deviation (n − 1) and skewness (the moment ratio
/// m3 / m2^1.5) of the observed values, summed in row order.
fn stats(values: &[f64]) -> Stats {
    let moments = |v: &mut dyn Iterator<Item = f64>| -> (f64, f64, f64, usize) {
        let v: Vec<f64> = v.collect();
        let n = v.len();
        let mean = v.iter().sum::<f64>() / n as f64;
        let m2 = v.iter().map(|x| (x - mean).powi(2)).sum::<f64>();
        let m3 = v.iter().map(|x| (x - mean).powi(3)).sum::<f64>();
        (mean, m2, m3, n)
    };
    let skew = |m2: f64, m3: f64, n: usize| {
        let (m2, m3) = (m2 / n as f64, m3 / n as f64);
        if m2 > 0.0 { m3 / (m2 * m2.sqrt()) } else { 0.0 }
    };
    let min = values.iter().copied().fold(f64::INFINITY, f64::min);
    let max = values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let (_, m2, m3, n) = moments(&mut values.iter().copied());
    let sd = if n > 1 {
        (m2 / (n - 1) as f64).sqrt()
    } else {
        0.0
    };
    let log_skewness = (min > 0.0).then(|| {
        let (_, l2, l3, ln) = moments(&mut values.iter().map(|&v| libm::log10(v)));
        skew(l2, l3, ln)
    });
    Stats {
        min,
        max,
        sd,
        skewness: skew(m2, m3, n),
        log_skewness,
    }
}

fn inspect(table: &Loaded) -> Result<Inspection, Error> {
    let rows = table.n_rows();
    let group_limit = (rows / ROWS_PER_GROUP_VALUE).clamp(2, MAX_GROUP_VALUES.max(2));
    let kinds: Vec<Kind> = table
        .cells
        .iter()
        .map(|cells| kind_of(cells, &table.lines))
        .collect();

    // The id: label-like name first, then the first text column, then row numbers.
    let text_label =
        |k: &Kind| matches!(k, Kind::Text(t) if !t.dates && t.empty == 0 && t.distinct == rows);
    let row_numbers = |k: &Kind| {
        matches!(k, Kind::Numeric(n) if n.unique && n.integer
            && n.stats.max - n.stats.min == (rows - 1) as f64)
    };
    let numeric_label = |name: &str, k: &Kind| {
        matches!(k, Kind::Numeric(n) if n.unique && n.integer) && name_has(name, LABEL_WORDS)
    };
    let candidate = |i: usize| {
        let k = &kinds[i];
        text_label(k) || row_numbers(k) || numeric_label(&table.names[i], k)
    };
    let all = 0..table.names.len();
    let id = all
        .clone()
        .find(|&i| candidate(i) && name_has(&table.names[i], LABEL_WORDS))
        .or_else(|| all.clone().find(|&i| text_label(&kinds[i])))
        .or_else(|| all.clone().find(|&i| row_numbers(&kinds[i])));
    let id_name = id.map(|i| table.names[i].clone());

    let mut columns = Vec::new();
    for (i, (name, kind)) in table.names.iter().zip(kinds).enumerate() {
        let (role, reason) = if Some(i) == id {
            (Role::Id, id_reason(name, &kind, rows))
        } else {
            role_of(name, &kind, rows, group_limit, id_name.as_deref())
        };
        columns.push(Decision {
            name: name.clone(),
            kind,
            role,
            reason,
        });
    }

    let mut extra_missing: BTreeMap<String, Vec<String>> = BTreeMap::new();
    for d in columns.iter().filter(|d| d.role == Role::Feature) {
        if let Kind::Numeric(n) = &d.kind {
            for token in n.tokens.keys() {
                extra_missing
                    .entry(token.clone())
                    .or_default()
                    .push(d.name.clone());
            }
        }
    }
    let inspection = Inspection {
        columns,
        extra_missing,
        group_limit,
    };
    if inspection.usable(rows).is_empty() {
        return Err(no_features(table, &inspection).into());
    }
    Ok(inspection)
}

fn no_features(table: &Loaded, inspection: &Inspection) -> InputError {
    let comma = inspection
        .columns
        .iter()
        .find(|d| matches!(d.kind, Kind::DecimalComma { .. }));
    let why = if let Some(d) = comma {
        format!(
            " for a starter recipe: column `{}` and perhaps others hold numbers with a decimal comma, and sextant reads a point as the decimal mark; convert the file first",
            plain(&d.name)
        )
    } else if inspection.features(table.n_rows()).is_empty() {
        " for a starter recipe: no column holds numbers that vary and look like measurements".into()
    } else {
        format!(
            " for a starter recipe: every numeric column misses more than {} % of its cells",
            pct(MAX_FEATURE_MISSING)
        )
    };
    InputError::NoFeatures {
        path: table.display.clone(),
        why,
    }
}

fn id_reason(name: &str, kind: &Kind, rows: usize) -> String {
    let named = if name_has(name, LABEL_WORDS) {
        "; the name says it is a label"
    } else {
        ""
    };
    match kind {
        Kind::Numeric(_) if !named.is_empty() => {
            format!("whole numbers, a different one in every row{named}")
        }
        Kind::Numeric(n) => format!(
            "whole numbers {} to {}, one per row: row numbers",
            crate::text::number(n.stats.min),
            crate::text::number(n.stats.max)
        ),
        _ if named.is_empty() => {
            format!("text, a different value in each of the {rows} rows (the first such column)")
        }
        _ => format!("text, a different value in each of the {rows} rows{named}"),
    }
}

fn role_of(
    name: &str,
    kind: &Kind,
    rows: usize,
    group_limit: usize,
    id: Option<&str>,
) -> (Role, String) {
    let excluded = |why: String| (Role::Excluded, why);
    match kind {
        Kind::Empty => excluded("every cell is empty or marks a missing value".into()),
        Kind::DecimalComma { example } => excluded(format!(
            "numbers written with a decimal comma (`{}`); sextant reads a point as the decimal mark",
            plain(example)
        )),
        Kind::Stray {
            texts,
            first_line,
            first_text,
        } => excluded(format!(
            "numbers, but {texts} cell(s) hold text, first `{}` on line {first_line}; fix them, or add the text to missing if it means missing, then take the column out of this list",
            plain(first_text)
        )),
        Kind::Text(t) if t.dates => excluded("dates or times, not measurements".into()),
        Kind::Text(t) if t.distinct <= 1 => excluded("text, the same in every row".into()),
        Kind::Text(t) if t.distinct == rows && t.empty == 0 => excluded(format!(
            "text, a different value in every row: a second label beside the id `{}`",
            plain(id.unwrap_or(""))
        )),
        Kind::Text(t) if t.distinct <= group_limit => {
            let empty = if t.empty > 0 {
                format!(", {} empty cell(s)", t.empty)
            } else {
                String::new()
            };
            (Role::Group, format!("text, {} values{empty}", t.distinct))
        }
        Kind::Text(t) => excluded(format!(
            "text with {} different values, too many for a group (at most {group_limit} here)",
            t.distinct
        )),
        Kind::Numeric(n) => {
            let s = n.stats;
            if s.min == s.max {
                excluded(format!(
                    "the same number ({}) in every row that has one: no variance to analyse",
                    crate::text::number(s.min)
                ))
            } else if n.integer
                && n.missing == 0
                && (2..=group_limit).contains(&n.distinct)
                && name_has(name, GROUP_WORDS)
            {
                (
                    Role::Group,
                    format!(
                        "whole numbers with {} values, and the name says they code a grouping",
                        n.distinct
                    ),
                )
            } else if name_has(name, CODE_WORDS) {
                excluded(
                    "numbers, but the name says they are a label or code, not a measurement".into(),
                )
            } else if n.unique && n.integer && s.max - s.min == (rows - 1) as f64 {
                excluded(format!(
                    "whole numbers {} to {}, one per row: row numbers, not a measurement",
                    crate::text::number(s.min),
                    crate::text::number(s.max)
                ))
            } else {
                (Role::Feature, feature_reason(n, rows))
            }
        }
    }
}

fn feature_reason(n: &Numbers, rows: usize) -> String {
    let share = n.missing as f64 / rows as f64;
    let mut reason = if n.missing == 0 {
        "numbers, none missing".to_string()
    } else {
        format!("numbers, {} % missing", pct(share))
    };
    if share > MAX_FEATURE_MISSING {
        let _ = write!(
            reason,
            ": above max_feature_missing = {MAX_FEATURE_MISSING}, so the analysis drops it"
        );
    }
    reason
}

// ---------------------------------------------------------------------------
// Writing the recipe

/// A TOML basic string.
fn toml_str(s: &str) -> String {
    let mut out = String::with_capacity(s.len() + 2);
    out.push('"');
    for c in s.chars() {
        match c {
            '"' => out.push_str("\\\""),
            '\\' => out.push_str("\\\\"),
            '\t' => out.push_str("\\t"),
            '\n' => out.push_str("\\n"),
            '\r' => out.push_str("\\r"),
            c if c.is_control() => {
                let _ = write!(out, "\\u{:04X}", c as u32);
            }
            c => out.push(c),
        }
    }
    out.push('"');
    out
}

/// A name as shown in comments and messages: control characters become spaces.
fn plain(s: &str) -> String {
    s.chars()
        .map(|c| if c.is_control() { ' ' } else { c })
        .collect()
}

/// `1 row`, `2 rows`.
fn counted(n: usize, noun: &str) -> String {
    if n == 1 {
        format!("1 {noun}")
    } else {
        format!("{n} {noun}s")
    }
}

/// Two decimals, without a minus sign on a value that rounds to zero.
fn two_decimals(v: f64) -> String {
    let s = format!("{v:.2}");
    if s == "-0.00" { "0.00".into() } else { s }
}

/// A setting with a comment after it, aligned to one column; a comment too long
/// for that goes on the lines above the setting instead.
fn setting(out: &mut String, code: &str, text: &str) {
    let width = COMMENT_COLUMN.saturating_sub(code.chars().count()).max(1);
    let inline = code.chars().count() + width + 2 + plain(text).chars().count();
    if text.is_empty() {
        let _ = writeln!(out, "{code}");
    } else if inline <= WRAP {
        let _ = writeln!(out, "{code}{:width$}# {}", "", plain(text));
    } else {
        let indent = code.len() - code.trim_start().len();
        indented_comment(out, &code[..indent], text);
        let _ = writeln!(out, "{code}");
    }
}

/// A comment paragraph wrapped to [`WRAP`] columns.
fn comment(out: &mut String, text: &str) {
    indented_comment(out, "", text);
}

fn indented_comment(out: &mut String, indent: &str, text: &str) {
    let start = format!("{indent}#");
    let mut line = start.clone();
    for word in plain(text).split(' ').filter(|w| !w.is_empty()) {
        if line.len() > start.len() && line.chars().count() + 1 + word.chars().count() > WRAP {
            let _ = writeln!(out, "{line}");
            line = start.clone();
        }
        line.push(' ');
        line.push_str(word);
    }
    let _ = writeln!(out, "{line}");
}

/// A list setting with one item per line, each with its reason.
fn list(out: &mut String, key: &str, items: &[(&str, &str)]) {
    let _ = writeln!(out, "{key} = [");
    for (name, why) in items {
        setting(out, &format!("    {},", toml_str(name)), why);
    }
    let _ = writeln!(out, "]");
}

fn delimiter_text(d: u8) -> String {
    match d {
        b'\t' => "tab".into(),
        other => format!("'{}'", other as char),
    }
}

/// The results folder, relative to the recipe: `results/<stem>`, or a sibling
/// name if that folder would hold the table.
fn results_folder(recipe_dir: &Path, data: &Path) -> String {
    let stem: String = data
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default()
        .chars()
        .map(|c| {
            if c.is_alphanumeric() || matches!(c, '-' | '_' | '.') {
                c
            } else {
                '-'
            }
        })
        .collect();
    let stem = if stem.trim_matches('.').is_empty() {
        "table".to_string()
    } else {
        stem
    };
    let data_abs = crate::paths::normalize(data);
    let base = crate::paths::normalize(recipe_dir);
    let mut n = 1;
    loop {
        let folder = match n {
            1 => format!("results/{stem}"),
            2 => format!("results/{stem}-pca"),
            _ => format!("results/{stem}-pca-{n}"),
        };
        if !data_abs.starts_with(base.join(&folder)) {
            return folder;
        }
        n += 1;
    }
}

fn recipe_text(table: &Loaded, inspection: &Inspection, input_file: &str, results: &str) -> String {
    let rows = table.n_rows();
    let mut out = String::new();
    comment(
        &mut out,
        &format!(
            "Starter recipe written by `sextant new` from a first look at {} ({}, {}). Each setting is a suggestion with its reason and the other choices; change what does not fit the data or the question. Paths are relative to this file's folder.",
            table.file_name,
            counted(rows, "row"),
            counted(table.names.len(), "column")
        ),
    );
    let _ = writeln!(out, "#");
    comment(
        &mut out,
        "Next: `sextant check` on this file reads the table and tries every step except the decomposition; `sextant run` on it writes the results folder.",
    );
    let _ = writeln!(out, "format = 1");
    setting(
        &mut out,
        &format!(
            "title = {}",
            toml_str(&format!("PCA of {}", table.file_name))
        ),
        "free text, carried into the manifest",
    );
    let _ = writeln!(
        out,
        "# notes = \"what the analysis is for, and what changed since the last run\""
    );

    input_section(&mut out, table, inspection, input_file);
    missing_section(&mut out, table, inspection);
    transform_section(&mut out, inspection, rows);
    scaling_section(&mut out, inspection, rows);
    components_section(&mut out, inspection, rows);

    let _ = writeln!(out, "\n[output]");
    comment(
        &mut out,
        "The results folder, relative to this file. `sextant run` writes it whole, and replaces it later only for a run of the same recipe on the same data (or with --replace).",
    );
    let _ = writeln!(out, "folder = {}", toml_str(results));
    out
}

fn input_section(out: &mut String, table: &Loaded, inspection: &Inspection, input_file: &str) {
    let rows = table.n_rows();
    let _ = writeln!(out, "\n[input]");
    let _ = writeln!(out, "file = {}", toml_str(input_file));
    if table.delimiter_written {
        setting(
            out,
            &format!(
                "delimiter = {}",
                toml_str(&(table.delimiter as char).to_string())
            ),
            &format!(
                "the header splits into columns at {}",
                delimiter_text(table.delimiter)
            ),
        );
    }
    match inspection.id() {
        Some(d) => setting(out, &format!("id = {}", toml_str(&d.name)), &d.reason),
        None => comment(
            out,
            "id: no column has a different, non-empty value in every row, so results number the rows instead. To name one: id = \"column\".",
        ),
    }
    let groups: Vec<(&str, &str)> = inspection
        .with_role(Role::Group)
        .map(|d| (d.name.as_str(), d.reason.as_str()))
        .collect();
    comment(
        out,
        &format!(
            "Groups are carried to the scores, to colour or compare rows. Rule of thumb used: a text column with at least 2 and at most max(2, min({MAX_GROUP_VALUES}, rows / {ROWS_PER_GROUP_VALUE})) different values, here {}, so that most values have several rows.",
            inspection.group_limit
        ),
    );
    if groups.is_empty() {
        comment(
            out,
            "No column fits, so there are none: groups = [\"column\", ...] adds them.",
        );
    } else {
        list(out, "groups", &groups);
    }
    let excluded: Vec<(&str, &str)> = inspection
        .with_role(Role::Excluded)
        .map(|d| (d.name.as_str(), d.reason.as_str()))
        .collect();
    if excluded.is_empty() {
        comment(
            out,
            "Nothing is excluded; exclude = [\"column\", ...] leaves columns out (names or patterns with * and ?).",
        );
    } else {
        comment(
            out,
            "Columns left out of the analysis, each with the reason. Entries are names or patterns with * and ?.",
        );
        list(out, "exclude", &excluded);
    }
    let mut missing: Vec<String> = DEFAULT_MISSING_TOKENS
        .iter()
        .map(|s| s.to_string())
        .collect();
    if inspection.extra_missing.is_empty() {
        comment(
            out,
            "Cell texts that mean \"missing\" (compared after trimming spaces). Any other text in a numeric column is an error naming the cell.",
        );
    } else {
        comment(
            out,
            "Cell texts that mean \"missing\" (compared after trimming spaces). Besides the usual ones, the table uses these in numeric columns, so they are read as missing too:",
        );
        for (token, columns) in &inspection.extra_missing {
            let shown: Vec<String> = columns.iter().take(3).map(|c| plain(c)).collect();
            let more = if columns.len() > 3 {
                format!(" and {} more", columns.len() - 3)
            } else {
                String::new()
            };
            let _ = writeln!(out, "#   {} in {}{more}", toml_str(token), shown.join(", "));
            missing.push(token.clone());
        }
        comment(
            out,
            "If one of them means \"below the detection limit\" rather than \"not measured\", filling it with the feature's mean or median overstates those cells; say so when reporting, or replace them in the data.",
        );
    }
    let quoted: Vec<String> = missing.iter().map(|m| toml_str(m)).collect();
    let _ = writeln!(out, "missing = [{}]", quoted.join(", "));
    let features = inspection.features(rows);
    comment(
        out,
        &format!(
            "Features: every numeric column not named above ({} here), in table order. To choose them yourself, list their names or patterns (such as \"*_pct\") in features = [...].",
            features.len()
        ),
    );
}

fn missing_section(out: &mut String, table: &Loaded, inspection: &Inspection) {
    let rows = table.n_rows();
    let usable = inspection.usable(rows);
    let cells = rows * usable.len();
    let empty: usize = usable.iter().map(|(_, n, _)| n.missing).sum();
    let _ = writeln!(out, "\n[missing]");
    comment(
        out,
        "What happens to a missing cell in a feature: \"mean\" fills it with the mean of the feature's observed cells, \"median\" with their median (less pulled by outliers), \"drop-rows\" leaves out every row with a missing cell. Filling pulls values to the centre and weakens correlations; preprocessing.csv in the results counts the filled cells.",
    );
    if empty == 0 {
        comment(
            out,
            "No cell of the features is missing in this table, so the method matters only for other data.",
        );
    } else {
        let columns: Vec<&Vec<String>> = usable
            .iter()
            .filter_map(|(d, _, _)| table.names.iter().position(|n| *n == d.name))
            .map(|j| &table.cells[j])
            .collect();
        let complete = (0..rows)
            .filter(|&r| columns.iter().all(|c| parse_number(&c[r]).is_some()))
            .count();
        comment(
            out,
            &format!(
                "Here {empty} of {cells} cells ({} %) of the features that are kept are missing; {complete} of {rows} rows are complete, which is what \"drop-rows\" would keep.",
                pct(empty as f64 / cells as f64)
            ),
        );
    }
    let _ = writeln!(out, "method = \"mean\"");
    let dropped: Vec<String> = inspection
        .features(rows)
        .into_iter()
        .filter(|(_, _, share)| *share > MAX_FEATURE_MISSING)
        .map(|(d, _, share)| format!("{} ({} % missing)", plain(&d.name), pct(share)))
        .collect();
    let which = if dropped.is_empty() {
        "No feature here misses that much.".to_string()
    } else {
        format!(
            "That drops {}; raise the limit to keep it, at the price of more filled cells.",
            dropped.join(", ")
        )
    };
    comment(
        out,
        &format!(
            "A feature missing a larger share of its cells than this is dropped and reported (rule of thumb: filling more than 30 % of a column invents too much of it). {which}"
        ),
    );
    let _ = writeln!(out, "max_feature_missing = {MAX_FEATURE_MISSING}");
}

fn transform_section(out: &mut String, inspection: &Inspection, rows: usize) {
    let _ = writeln!(out, "\n[transform]");
    comment(
        out,
        "log10, ln and sqrt each take a list of features (names or patterns), transformed after missing cells are filled and before scaling. A value outside the domain, such as the log of zero, is an error naming the cell. Nothing is transformed unless listed.",
    );
    let skewed = inspection.skewed(rows);
    comment(
        out,
        &format!(
            "Rule of thumb used to suggest a log scale: every value above zero, skewness above {SKEWNESS_LIMIT}, and less than half that skewness after log10."
        ),
    );
    if skewed.is_empty() {
        comment(out, "No feature here meets it.");
        let _ = writeln!(out, "# log10 = []");
        return;
    }
    comment(
        out,
        "These features meet it (skewness before and after log10):",
    );
    let width = skewed
        .iter()
        .map(|(d, _)| plain(&d.name).chars().count())
        .max()
        .unwrap_or(0);
    for (d, s) in &skewed {
        let _ = writeln!(
            out,
            "#   {:width$}  {} -> {}",
            plain(&d.name),
            two_decimals(s.skewness),
            two_decimals(s.log_skewness.unwrap_or(0.0))
        );
    }
    comment(
        out,
        "A log scale turns ratios into differences and keeps a few large values from deciding the components.",
    );
    let names: Vec<String> = skewed.iter().map(|(d, _)| toml_str(&d.name)).collect();
    let one_line = format!("# log10 = [{}]", names.join(", "));
    if one_line.chars().count() <= WRAP {
        comment(out, "Remove the # on the next line to use it:");
        let _ = writeln!(out, "{one_line}");
    } else {
        comment(
            out,
            "Remove the # at the start of the next lines to use it:",
        );
        let _ = writeln!(out, "# log10 = [");
        for name in &names {
            let _ = writeln!(out, "#     {name},");
        }
        let _ = writeln!(out, "# ]");
    }
}

fn scaling_section(out: &mut String, inspection: &Inspection, rows: usize) {
    let _ = writeln!(out, "\n[scaling]");
    let usable = inspection.usable(rows);
    let smallest = usable
        .iter()
        .min_by(|a, b| a.1.stats.sd.total_cmp(&b.1.stats.sd));
    let largest = usable
        .iter()
        .max_by(|a, b| a.1.stats.sd.total_cmp(&b.1.stats.sd));
    if let (Some(lo), Some(hi)) = (smallest, largest)
        && usable.len() > 1
    {
        let ratio = hi.1.stats.sd / lo.1.stats.sd;
        comment(
            out,
            &format!(
                "Standard deviations of the features range from {} ({}) to {} ({}), a factor of {}.",
                sig3(lo.1.stats.sd),
                lo.0.name,
                sig3(hi.1.stats.sd),
                hi.0.name,
                sig3(ratio)
            ),
        );
    }
    comment(
        out,
        "Columns of a table like this are usually in different units, and without scaling the features with the largest numbers would decide the components. \"unit-variance\" centres each feature and divides it by its standard deviation (correlation PCA), so every feature weighs the same, noisy ones included.",
    );
    comment(
        out,
        "Other choices: \"center\" (covariance PCA, for features in one common unit, where a larger spread should count more), \"pareto\" (divides by the square root of the standard deviation, between the two), \"range\" (divides by max - min), \"none\" (no centring).",
    );
    let _ = writeln!(out, "method = \"unit-variance\"");
    let constant = inspection
        .with_role(Role::Excluded)
        .any(|d| matches!(&d.kind, Kind::Numeric(n) if n.stats.min == n.stats.max));
    let here = if constant {
        "The constant columns of this table are excluded above"
    } else {
        "No numeric column of this table is constant"
    };
    comment(
        out,
        &format!(
            "A feature with the same value in every row cannot be divided by its spread: \"error\" stops and names it, \"drop\" drops and reports it. {here}, so \"error\" only guards other data."
        ),
    );
    let _ = writeln!(out, "constant_features = \"error\"");
}

fn components_section(out: &mut String, inspection: &Inspection, rows: usize) {
    let usable = inspection.usable(rows).len();
    let compute = COMPUTE.min(usable).min(rows - 1).max(1);
    let _ = writeln!(out, "\n[components]");
    comment(
        out,
        "How many components are kept for the scores. \"broken-stick\" keeps the leading components that each explain more variance than the matching piece of a stick broken at random into as many pieces as there are features, a cautious rule that adapts to the data. Other choices: a count such as 3, { variance = 0.8 } (the fewest components explaining 80 %), \"kaiser\" (eigenvalues above their mean). The rules often disagree; compare them in variance.csv.",
    );
    let _ = writeln!(out, "keep = \"broken-stick\"");
    setting(
        out,
        &format!("compute = {compute}"),
        "how many components the tables report",
    );
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
        "table      {}: {}, {}, delimiter {}",
        table.display,
        counted(rows, "row"),
        counted(table.names.len(), "column"),
        delimiter_text(table.delimiter)
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
            "missing    {} is read as missing (seen in {} numeric column(s))",
            toml_str(token),
            columns.len()
        );
    }
    let usable = inspection.usable(rows).len();
    let features = inspection.features(rows).len();
    let _ = writeln!(
        out,
        "features   {features} numeric column(s), {usable} kept after max_feature_missing = {MAX_FEATURE_MISSING}"
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn three_significant_digits() {
        assert_eq!(sig3(183.44), "183");
        assert_eq!(sig3(0.043218), "0.0432");
        assert_eq!(sig3(4312.0), "4312");
        assert_eq!(sig3(999.7), "1000");
        assert_eq!(sig3(1.0), "1.00");
    }

    #[test]
    fn toml_strings_are_escaped() {
        assert_eq!(toml_str("a\"b\\c\td"), "\"a\\\"b\\\\c\\td\"");
        assert_eq!(toml_str("x\u{1}"), "\"x\\u0001\"");
        let v: toml::Value =
            toml::from_str(&format!("k = {}", toml_str("a\"\\\t\n\u{7f}z"))).unwrap();
        assert_eq!(v["k"].as_str(), Some("a\"\\\t\n\u{7f}z"));
    }

    #[test]
    fn dates_and_words() {
        assert!(looks_like_date("2025-06-02"));
        assert!(looks_like_date("02.06.2025 14:05"));
        assert!(looks_like_date("14:05"));
        assert!(!looks_like_date("Alder Hill"));
        assert!(!looks_like_date("12"));
        assert_eq!(name_words("SampleID"), ["sample", "id"]);
        assert_eq!(name_words("fat_pct"), ["fat", "pct"]);
        assert!(!name_has("acid", LABEL_WORDS));
        assert!(name_has("Patient ID", LABEL_WORDS));
    }

    #[test]
    fn skewness_of_a_known_sample() {
        // 1, 2, 3, 10: mean 4, m2 = 50 / 4 = 12.5, m3 = 180 / 4 = 45, and 45 / 12.5^1.5 = 1.01823…
        let s = stats(&[1.0, 2.0, 3.0, 10.0]);
        assert!((s.skewness - 1.018_233_765).abs() < 1e-8);
        assert!(s.log_skewness.is_some());
        assert!(stats(&[-1.0, 2.0]).log_skewness.is_none());
    }

    #[test]
    fn missing_stand_ins_are_recognised() {
        let cells: Vec<String> = ["1.5", "ND", "2", "", "3", "nd"].map(String::from).to_vec();
        let lines: Vec<u64> = (2..8).collect();
        match kind_of(&cells, &lines) {
            Kind::Numeric(n) => {
                assert_eq!(n.missing, 3);
                assert_eq!(n.tokens.keys().collect::<Vec<_>>(), ["ND", "nd"]);
            }
            other => panic!("expected numbers, got {other:?}"),
        }
        let cells: Vec<String> = ["1.5", "2,5", "3"].map(String::from).to_vec();
        assert!(matches!(
            kind_of(&cells, &lines[..3]),
            Kind::DecimalComma { .. }
        ));
        let cells: Vec<String> = ["1.5", "oops", "3"].map(String::from).to_vec();
        assert!(matches!(
            kind_of(&cells, &lines[..3]),
            Kind::Stray { first_line: 3, .. }
        ));
    }
}
