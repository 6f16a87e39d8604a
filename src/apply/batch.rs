//! How a new batch is read: its delimiter and decimal mark (given on the
//! command line, or found in the file when only one reading fits), the
//! features as numbers, and the order of its rows for the control chart.
//!
//! A batch often comes from another export than the training table (a
//! European LIMS writes `3,14` with `;` between fields). The analysis' own
//! delimiter is tried first, so a batch read as before is read exactly as
//! before; another delimiter is taken only when it alone gives every feature
//! of the model. A decimal comma is taken only when the features' cells read
//! as numbers with it and never hold a point.

use super::ScoreSettings;
use crate::error::{Error, InputError};
use crate::outputs::model::Model;
use crate::table::number::NumberFormat;
use crate::table::{ColumnData, ReadOptions, Table, read_header, read_table_parallel};

/// Delimiters tried when the analysis' own gives none of the model's features.
const CANDIDATES: [u8; 4] = [b',', b';', b'\t', b'|'];

/// How many header fields an error shows.
const FIELDS_SHOWN: usize = 6;

/// What the command line says about the batch (`None`: find it in the file).
#[derive(Debug, Clone, Default)]
pub struct BatchOptions {
    pub delimiter: Option<u8>,
    pub decimal: Option<u8>,
    /// The column that orders the rows on the control chart (file order without).
    pub order: Option<String>,
}

/// The batch as read: its table, the model's features as numbers (before any
/// transform, in the model's order), how it was read and what was found.
pub struct Batch {
    pub table: Table,
    pub features: Vec<Vec<f64>>,
    pub delimiter: u8,
    pub decimal: u8,
    pub notes: Vec<String>,
}

/// "`;`", or "tab".
pub fn delimiter_name(d: u8) -> String {
    match d {
        b'\t' => "tab".into(),
        d => format!("`{}`", char::from(d)),
    }
}

/// A delimiter given on the command line: one ASCII character, `tab` or `\t`.
pub fn parse_delimiter(text: &str) -> Result<u8, String> {
    match text {
        "tab" | "\\t" => Ok(b'\t'),
        _ => crate::recipe::raw::Delimiter::try_from(text.to_string()).map(|d| d.0),
    }
}

/// A decimal mark given on the command line: `.` or `,`.
pub fn parse_decimal(text: &str) -> Result<u8, String> {
    match text {
        "." => Ok(b'.'),
        "," => Ok(b','),
        _ => Err(format!(
            "decimal mark `{text}` is not `.` or `,`; pass --decimal , for 3,14"
        )),
    }
}

/// The delimiter to read the batch with, and a note when it was found in the
/// file rather than given or recorded by the analysis (`usual`).
pub fn choose_delimiter(
    bytes: &[u8],
    shown: &str,
    model: &Model,
    asked: Option<u8>,
    usual: u8,
) -> Result<(u8, Option<String>), Error> {
    let found = |d: u8| -> Result<(Vec<String>, usize), InputError> {
        let names = read_header(bytes, shown, d)?.names;
        let hits = model
            .features
            .iter()
            .filter(|f| names.contains(&f.name))
            .count();
        Ok((names, hits))
    };
    let first = asked.unwrap_or(usual);
    let (names, hits) = found(first)?;
    if asked.is_some() || hits == model.features.len() {
        return check_some_found(shown, model, first, &names, hits).map(|()| (first, None));
    }
    let fits: Vec<u8> = CANDIDATES
        .into_iter()
        .filter(|&d| d != first)
        .filter(|&d| found(d).is_ok_and(|(_, h)| h == model.features.len()))
        .collect();
    if let [only] = fits[..] {
        let note = format!(
            "the table was read with the delimiter {} found in its header (the analysis used {}); pass --delimiter to choose",
            delimiter_name(only),
            delimiter_name(first)
        );
        return Ok((only, Some(note)));
    }
    check_some_found(shown, model, first, &names, hits).map(|()| (first, None))
}

/// The error when none of the model's features is among `names`: the
/// delimiter may be wrong, and this is what was read.
fn check_some_found(
    shown: &str,
    model: &Model,
    delimiter: u8,
    names: &[String],
    hits: usize,
) -> Result<(), Error> {
    if hits > 0 {
        return Ok(());
    }
    let mut fields: Vec<String> = names
        .iter()
        .take(FIELDS_SHOWN)
        .map(|n| format!("`{}`", clip(n, 60)))
        .collect();
    if names.len() > FIELDS_SHOWN {
        fields.push(format!("{} more", names.len() - FIELDS_SHOWN));
    }
    Err(InputError::NoModelFeatures {
        path: shown.to_string(),
        features: crate::text::count(model.features.len(), "feature", "features"),
        delimiter: delimiter_name(delimiter),
        fields: format!(
            "{}: {}",
            crate::text::count(names.len(), "field", "fields"),
            fields.join(", ")
        ),
    }
    .into())
}

fn clip(text: &str, max: usize) -> String {
    if text.chars().count() <= max {
        text.to_string()
    } else {
        let mut s: String = text.chars().take(max - 1).collect();
        s.push('…');
        s
    }
}

/// Reads the batch with `delimiter`: the model's features as numbers with the
/// decimal mark given, else the training table's, else a comma found in the
/// file (only when the delimiter is not a comma and a feature cell that fails
/// with a point holds a comma, and every feature cell then reads); the
/// training table's thousands separator only under its own decimal mark;
/// `text_columns` kept as text.
pub fn read_batch(
    bytes: &[u8],
    shown: &str,
    model: &Model,
    delimiter: u8,
    asked_decimal: Option<u8>,
    settings: &ScoreSettings,
    text_columns: Vec<String>,
) -> Result<Batch, Error> {
    let read = |decimal: u8| {
        read_table_parallel(
            bytes,
            shown,
            &ReadOptions {
                delimiter,
                decimal,
                thousands: settings.thousands.filter(|_| decimal == settings.decimal),
                missing_tokens: settings.missing_tokens.clone(),
                missing_per_column: settings.missing_per_column.clone(),
                text_columns: text_columns.clone(),
            },
        )
    };
    let names: Vec<String> = model.features.iter().map(|f| f.name.clone()).collect();
    let first = asked_decimal.unwrap_or(settings.decimal);
    let table = read(first)?;
    let bad = match numeric_features(&table, &names) {
        Ok(features) => return Ok(batch(table, features, delimiter, first, Vec::new())),
        Err(bad) => bad,
    };
    if asked_decimal.is_none() && first == b'.' && delimiter != b',' && bad.text.contains(',') {
        let table = read(b',')?;
        if let Ok(features) = numeric_features(&table, &names) {
            let note =
                "the table writes decimal commas (3,14 is read as 3.14); pass --decimal to choose"
                    .to_string();
            return Ok(batch(table, features, delimiter, b',', vec![note]));
        }
    }
    Err(if asked_decimal.is_some() || first != b'.' {
        InputError::DecimalMark {
            path: shown.to_string(),
            line: bad.line,
            column: bad.column,
            text: bad.text,
            decimal: char::from(first),
        }
    } else {
        InputError::bad_cell(shown, bad.line, &bad.column, bad.text)
    }
    .into())
}

fn batch(
    table: Table,
    features: Vec<Vec<f64>>,
    delimiter: u8,
    decimal: u8,
    notes: Vec<String>,
) -> Batch {
    Batch {
        table,
        features,
        delimiter,
        decimal,
        notes,
    }
}

/// The first cell of a feature that is not a number in the batch's format.
struct BadCell {
    line: u64,
    column: String,
    text: String,
}

/// The features as numbers, or the first bad cell.
fn numeric_features(table: &Table, names: &[String]) -> Result<Vec<Vec<f64>>, BadCell> {
    let mut out = Vec::with_capacity(names.len());
    for name in names {
        // The model's check keeps the id and groups (read as text) apart from the features.
        let Some(ColumnData::Numeric(column)) = table.column(name).map(|c| &c.data) else {
            unreachable!("a checked model's features are numeric columns of the table")
        };
        if let Some((line, text)) = column.first_bad.clone() {
            return Err(BadCell {
                line,
                column: name.clone(),
                text,
            });
        }
        out.push(column.values.clone());
    }
    Ok(out)
}

/// A finite number written with a decimal comma (`-3,14`, `2`, `1,5e3`), by
/// the table reader's own rule; a point is never read, since with a decimal
/// comma it may group thousands.
fn comma_number(cell: &str) -> Option<f64> {
    let comma = NumberFormat {
        decimal: b',',
        thousands: None,
    };
    comma.parse(cell).filter(|v| v.is_finite())
}

/// The order of the rows on the control chart: by `column`'s values (as
/// numbers when every filled cell is one, else as text), ties and empty cells
/// in file order, empty cells last. Also each row's value.
pub fn order_rows(values: &[String]) -> Vec<usize> {
    let numbers: Option<Vec<Option<f64>>> = values
        .iter()
        .map(|v| {
            let v = v.trim();
            if v.is_empty() {
                Some(None)
            } else {
                comma_or_point(v).map(Some)
            }
        })
        .collect();
    let mut order: Vec<usize> = (0..values.len()).collect();
    match numbers {
        Some(n) => order.sort_by(|&a, &b| match (n[a], n[b]) {
            (Some(x), Some(y)) => x.total_cmp(&y),
            (Some(_), None) => std::cmp::Ordering::Less,
            (None, Some(_)) => std::cmp::Ordering::Greater,
            (None, None) => std::cmp::Ordering::Equal,
        }),
        None => order.sort_by(|&a, &b| {
            let (x, y) = (values[a].trim(), values[b].trim());
            x.is_empty().cmp(&y.is_empty()).then_with(|| x.cmp(y))
        }),
    }
    order
}

fn comma_or_point(v: &str) -> Option<f64> {
    v.parse::<f64>()
        .ok()
        .filter(|x| x.is_finite())
        .or_else(|| comma_number(v))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn decimal_commas_read_and_points_refused() {
        assert_eq!(comma_number("2,75"), Some(2.75));
        assert_eq!(comma_number("-2"), Some(-2.0));
        assert_eq!(comma_number("1.234,5"), None);
        assert_eq!(comma_number("1,2,3"), None);
        assert_eq!(comma_number("inf"), None);
    }

    #[test]
    fn rows_ordered_by_numbers_or_text_with_empty_cells_last() {
        let v = |s: &[&str]| s.iter().map(|x| x.to_string()).collect::<Vec<_>>();
        assert_eq!(order_rows(&v(&["10", "9", "", "9"])), [1, 3, 0, 2]);
        assert_eq!(order_rows(&v(&["2026-04-03", "", "2026-04-01"])), [2, 0, 1]);
    }

    #[test]
    fn delimiters_from_the_command_line() {
        assert_eq!(parse_delimiter("tab"), Ok(b'\t'));
        assert_eq!(parse_delimiter(";"), Ok(b';'));
        assert!(parse_delimiter(";;").is_err());
        assert_eq!(parse_decimal(","), Ok(b','));
        assert!(parse_decimal("x").is_err());
    }
}
