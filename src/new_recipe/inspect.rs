//! The inspection of a table for `sextant new`: what the cells of each column
//! are, and the one role (id, group, feature or excluded) each column gets, with
//! its reason.

use super::recipe_text::plain;
use super::{
    Loaded, MAX_FEATURE_MISSING, MAX_GROUP_VALUES, MIN_VALUES_FOR_SKEWNESS, ROWS_PER_GROUP_VALUE,
    SKEWNESS_LIMIT,
};
use crate::error::{Error, InputError};
use crate::recipe::raw::DEFAULT_MISSING_TOKENS;
use crate::text::percent_figure as pct;
use std::collections::{BTreeMap, BTreeSet};
use std::fmt::Write as _;

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

/// What the cells of one column are.
#[derive(Debug, Clone)]
pub(super) enum Kind {
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
pub(super) struct Numbers {
    /// The observed values, in row order.
    pub(super) values: Vec<f64>,
    /// Cells read as missing (default texts and `tokens`).
    pub(super) missing: usize,
    /// Missing-value stand-ins beyond the default texts, with their counts.
    pub(super) tokens: BTreeMap<String, usize>,
    /// Every cell is filled and its text differs from every other cell's.
    pub(super) unique: bool,
    pub(super) integer: bool,
    pub(super) distinct: usize,
    pub(super) stats: Stats,
}

#[derive(Debug, Clone)]
pub(super) struct Texts {
    pub(super) distinct: usize,
    pub(super) empty: usize,
    pub(super) dates: bool,
}

#[derive(Debug, Clone, Copy)]
pub(super) struct Stats {
    pub(super) min: f64,
    pub(super) max: f64,
    pub(super) sd: f64,
    pub(super) skewness: f64,
    /// The skewness of log10 of the values, when all are above zero.
    pub(super) log_skewness: Option<f64>,
}

/// The role chosen for a column, with the reason in plain words.
#[derive(Debug, Clone, PartialEq)]
pub(super) enum Role {
    Id,
    Group,
    Feature,
    Excluded,
}

#[derive(Debug, Clone)]
pub(super) struct Decision {
    pub(super) name: String,
    pub(super) kind: Kind,
    pub(super) role: Role,
    pub(super) reason: String,
}

/// Everything the recipe and the summary say about the table.
pub(super) struct Inspection {
    pub(super) columns: Vec<Decision>,
    /// Extra missing-value texts, with the feature columns they were seen in.
    pub(super) extra_missing: BTreeMap<String, Vec<String>>,
    pub(super) group_limit: usize,
}

impl Inspection {
    pub(super) fn with_role(&self, role: Role) -> impl Iterator<Item = &Decision> {
        self.columns.iter().filter(move |d| d.role == role)
    }

    pub(super) fn id(&self) -> Option<&Decision> {
        self.with_role(Role::Id).next()
    }

    /// The group column most likely to matter for colouring scores: the first
    /// whose name says it is a grouping, else the one with the fewest values
    /// (the first of those).
    pub(super) fn likeliest_group(&self) -> Option<&Decision> {
        let values = |d: &Decision| match &d.kind {
            Kind::Text(t) => t.distinct,
            Kind::Numeric(n) => n.distinct,
            _ => usize::MAX,
        };
        self.with_role(Role::Group)
            .find(|d| name_has(&d.name, GROUP_WORDS))
            .or_else(|| self.with_role(Role::Group).min_by_key(|d| values(d)))
    }

    /// Features with their numbers and missing share.
    pub(super) fn features(&self, rows: usize) -> Vec<(&Decision, &Numbers, f64)> {
        self.with_role(Role::Feature)
            .filter_map(|d| match &d.kind {
                Kind::Numeric(n) => Some((d, n, n.missing as f64 / rows as f64)),
                _ => None,
            })
            .collect()
    }

    /// Features that survive `max_feature_missing`.
    pub(super) fn usable(&self, rows: usize) -> Vec<(&Decision, &Numbers, f64)> {
        self.features(rows)
            .into_iter()
            .filter(|(_, _, share)| *share <= MAX_FEATURE_MISSING)
            .collect()
    }

    /// Usable features that look right-skewed in a way a log scale evens out.
    pub(super) fn skewed(&self, rows: usize) -> Vec<(&Decision, Stats)> {
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

/// The value of a cell under the table's decimal mark, if it is a finite number.
pub(super) fn parse_number(cell: &str, decimal: u8) -> Option<f64> {
    let format = crate::table::number::NumberFormat {
        decimal,
        thousands: None,
    };
    format.parse(cell).filter(|v| v.is_finite())
}

/// The decimal mark the cells use: a comma when some cell is a number only
/// when read with a decimal comma (`3,14`) and none only with a point
/// (`3.14`); a comma-separated table always has a point.
pub(super) fn decimal_mark(columns: &[Vec<String>], delimiter: u8) -> u8 {
    if delimiter == b',' {
        return b'.';
    }
    let (mut comma, mut point) = (0usize, 0usize);
    for cell in columns.iter().flatten() {
        let as_comma = parse_number(cell, b',').is_some();
        let as_point = parse_number(cell, b'.').is_some();
        comma += usize::from(as_comma && !as_point);
        point += usize::from(as_point && !as_comma);
    }
    if comma > 0 && point == 0 { b',' } else { b'.' }
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

fn kind_of(cells: &[String], lines: &[u64], decimal: u8) -> Kind {
    let mut values = Vec::new();
    let mut missing = 0;
    let mut tokens: BTreeMap<String, usize> = BTreeMap::new();
    let mut others: Vec<(u64, &str)> = Vec::new();
    for (cell, &line) in cells.iter().zip(lines) {
        if DEFAULT_MISSING_TOKENS.contains(&cell.as_str()) {
            missing += 1;
        } else if let Some(v) = parse_number(cell, decimal) {
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
    let comma = |t: &str| t.contains(',') && parse_number(t, b',').is_some();
    if decimal == b'.' && others.iter().all(|(_, t)| comma(t)) {
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

pub(super) fn inspect(table: &Loaded) -> Result<Inspection, Error> {
    let rows = table.n_rows();
    let group_limit = (rows / ROWS_PER_GROUP_VALUE).clamp(2, MAX_GROUP_VALUES.max(2));
    let kinds: Vec<Kind> = table
        .cells
        .iter()
        .map(|cells| kind_of(cells, &table.lines, table.decimal))
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
            "numbers written with a decimal comma (`{}`) while the table's other numbers use a point; input.decimal sets one mark for the whole table",
            plain(example)
        )),
        Kind::Stray {
            texts,
            first_line,
            first_text,
        } => excluded(format!(
            "numbers, but {} text, first `{}` on line {first_line}; fix them, or add the text to missing if it means missing, then take the column out of this list",
            crate::text::count(*texts, "cell holds", "cells hold"),
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
                format!(
                    ", {}",
                    crate::text::count(t.empty, "empty cell", "empty cells")
                )
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
                    crate::text::readable(s.min)
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

#[cfg(test)]
mod tests {
    use super::*;

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
        match kind_of(&cells, &lines, b'.') {
            Kind::Numeric(n) => {
                assert_eq!(n.missing, 3);
                assert_eq!(n.tokens.keys().collect::<Vec<_>>(), ["ND", "nd"]);
            }
            other => panic!("expected numbers, got {other:?}"),
        }
        let cells: Vec<String> = ["1.5", "2,5", "3"].map(String::from).to_vec();
        assert!(matches!(
            kind_of(&cells, &lines[..3], b'.'),
            Kind::DecimalComma { .. }
        ));
        let cells: Vec<String> = ["1.5", "oops", "3"].map(String::from).to_vec();
        assert!(matches!(
            kind_of(&cells, &lines[..3], b'.'),
            Kind::Stray { first_line: 3, .. }
        ));
    }
}
