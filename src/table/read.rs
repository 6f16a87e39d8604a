//! CSV and TSV parsing into a [`Table`], with errors that name file, line and column.
//!
//! The reader works on bytes the orchestrator has already read (and hashed), so it
//! does no I/O of its own. Quoted fields and a UTF-8 byte-order mark are handled by
//! the `csv` crate; a ragged row, a duplicate or empty column name and an empty file
//! are reported here with their line.

use super::number::NumberFormat;
use super::{Header, NumericColumn, Table};
use crate::error::InputError;
use std::collections::BTreeMap;

/// How to read a table: the one place that says how its fields and numbers
/// are written (delimiter, decimal mark, thousands separator) and which cells
/// mean "missing".
#[derive(Debug, Clone)]
pub struct ReadOptions {
    pub delimiter: u8,
    /// The decimal mark, `.` or `,`.
    pub decimal: u8,
    /// The separator between groups of three digits, if the table uses one.
    pub thousands: Option<u8>,
    /// Cell texts (after trimming spaces) that mean "missing".
    pub missing_tokens: Vec<String>,
    /// Codes that mean "missing" in one column only, by column name.
    pub missing_per_column: Vec<(String, Vec<MissingCode>)>,
    /// Columns kept as text (the id and group columns).
    pub text_columns: Vec<String>,
}

impl ReadOptions {
    /// Comma-separated, decimal point, no thousands separator, no missing
    /// codes of one column: what a table is read with when nothing else is said.
    pub fn new(delimiter: u8, missing_tokens: Vec<String>, text_columns: Vec<String>) -> Self {
        ReadOptions {
            delimiter,
            decimal: b'.',
            thousands: None,
            missing_tokens,
            missing_per_column: Vec::new(),
            text_columns,
        }
    }

    /// How the table writes its numbers.
    pub fn number_format(&self) -> NumberFormat {
        NumberFormat {
            decimal: self.decimal,
            thousands: self.thousands,
        }
    }

    /// The missing codes of column `name` alone.
    pub fn codes_of(&self, name: &str) -> &[MissingCode] {
        self.missing_per_column
            .iter()
            .find(|(n, _)| n == name)
            .map_or(&[], |(_, codes)| codes.as_slice())
    }
}

/// A code that means "missing" in one column: a text compared with the
/// trimmed cell, or a number compared with the cell's value (so `-999`
/// matches `-999.0` and, under a decimal comma, `-999,0`).
#[derive(Debug, Clone, PartialEq, serde::Deserialize, serde::Serialize)]
#[serde(untagged)]
pub enum MissingCode {
    Number(f64),
    Text(String),
}

/// How the cells of one numeric column are read.
#[derive(Debug, Clone, Copy)]
pub(crate) struct CellRules<'a> {
    /// The texts that mean missing in every column.
    pub missing: &'a [String],
    /// The column's own missing codes.
    pub codes: &'a [MissingCode],
    pub format: NumberFormat,
}

fn csv_reader(bytes: &[u8], delimiter: u8) -> csv::Reader<&[u8]> {
    csv::ReaderBuilder::new()
        .delimiter(delimiter)
        .has_headers(true)
        .flexible(true)
        .from_reader(bytes)
}

fn csv_error(display: &str, err: csv::Error) -> InputError {
    let line = err.position().map_or(0, |p| p.line());
    let message = match err.kind() {
        csv::ErrorKind::Utf8 { err, .. } => {
            format!("the text is not valid UTF-8 (field {})", err.field() + 1)
        }
        _ => err.to_string(),
    };
    InputError::Csv {
        path: display.to_string(),
        line,
        message,
    }
}

/// Reads and checks the header row only.
pub fn read_header(bytes: &[u8], display: &str, delimiter: u8) -> Result<Header, InputError> {
    let empty = || InputError::Empty {
        path: display.to_string(),
    };
    if bytes.iter().all(|b| b.is_ascii_whitespace()) || bytes == b"\xef\xbb\xbf" {
        return Err(empty());
    }
    if bytes.starts_with(b"\xff\xfe") || bytes.starts_with(b"\xfe\xff") {
        return Err(InputError::Utf16 {
            path: display.to_string(),
        });
    }
    if memchr::memchr(b'\n', bytes).is_none() && memchr::memchr(b'\r', bytes).is_some() {
        return Err(InputError::CarriageReturnsOnly {
            path: display.to_string(),
        });
    }
    let start = if bytes.starts_with(b"\xef\xbb\xbf") {
        3
    } else {
        0
    };
    if let Some(q) = super::parallel::unclosed_quote(&bytes[start..], delimiter, true) {
        return Err(InputError::UnclosedQuote {
            path: display.to_string(),
            line: super::parallel::line_of(bytes, start + q),
        });
    }
    let mut reader = csv_reader(bytes, delimiter);
    let names: Vec<String> = reader
        .headers()
        .map_err(|e| csv_error(display, e))?
        .iter()
        .map(|s| s.trim().to_string())
        .collect();
    let mut seen: BTreeMap<&str, usize> = BTreeMap::new();
    for (i, name) in names.iter().enumerate() {
        if name.is_empty() {
            return Err(InputError::EmptyColumnName {
                path: display.to_string(),
                column: i + 1,
            });
        }
        if let Some(first) = seen.insert(name, i + 1) {
            return Err(InputError::DuplicateColumn {
                path: display.to_string(),
                name: name.clone(),
                first,
                second: i + 1,
            });
        }
    }
    Ok(Header { names })
}

/// Reads the whole table. Columns in `text_columns` keep their text; every other
/// column is parsed as numbers, counting cells that are not numbers.
///
/// This is the reference the tests hold the parallel reader to; commands read
/// with [`super::read_table_parallel`], whose line numbers are file lines
/// (`line_of`), while the `csv` crate's record lines skip blank lines and
/// miscount CRLF endings inside quotes.
pub fn read_table(bytes: &[u8], display: &str, options: &ReadOptions) -> Result<Table, InputError> {
    let header = read_header(bytes, display, options.delimiter)?;
    // The csv crate would read the rest of the file into the quoted field.
    let start = usize::from(bytes.starts_with(b"\xef\xbb\xbf")) * 3;
    if let Some(q) = super::parallel::unclosed_quote(&bytes[start..], options.delimiter, false) {
        return Err(InputError::UnclosedQuote {
            path: display.to_string(),
            line: super::parallel::line_of(bytes, start + q),
        });
    }
    let width = header.names.len();
    let is_text: Vec<bool> = header
        .names
        .iter()
        .map(|n| options.text_columns.iter().any(|t| t == n))
        .collect();
    let mut texts: Vec<Vec<String>> = vec![Vec::new(); width];
    let mut numbers: Vec<NumericColumn> = vec![NumericColumn::default(); width];
    let mut lines = Vec::new();

    let rules: Vec<CellRules> = header
        .names
        .iter()
        .map(|n| CellRules {
            missing: &options.missing_tokens,
            codes: options.codes_of(n),
            format: options.number_format(),
        })
        .collect();
    let mut reader = csv_reader(bytes, options.delimiter);
    let mut record = csv::StringRecord::new();
    loop {
        match reader.read_record(&mut record) {
            Ok(false) => break,
            Ok(true) => {}
            Err(e) => return Err(csv_error(display, e)),
        }
        // The `csv` crate's count, which can differ from the file line (see
        // the module comment): only the tests' reference reads tables here.
        let line = record.position().map_or(0, |p| p.line());
        if record.len() == 1 && record[0].trim().is_empty() && width > 1 {
            continue; // a blank line, e.g. at the end of the file
        }
        if record.len() != width {
            return Err(InputError::Ragged {
                path: display.to_string(),
                line,
                expected: width,
                found: record.len(),
            });
        }
        lines.push(line);
        for (j, field) in record.iter().enumerate() {
            let cell = field.trim();
            if is_text[j] {
                texts[j].push(cell.to_string());
            } else {
                push_number(&mut numbers[j], cell, line, rules[j]);
            }
        }
    }

    Ok(Table::from_parts(
        display,
        header.names,
        texts,
        numbers,
        &is_text,
        lines,
    ))
}

fn push_number(column: &mut NumericColumn, cell: &str, line: u64, rules: CellRules) {
    let v = number_cell(column, cell, line, rules);
    column.values.push(v);
}

/// The value of a numeric cell (`NaN` when it is missing or not a finite
/// number), counting missing and bad cells in `column` but not storing the value.
pub(crate) fn number_cell(
    column: &mut NumericColumn,
    cell: &str,
    line: u64,
    rules: CellRules,
) -> f64 {
    let is_code = |v: Option<f64>| {
        rules.codes.iter().any(|c| match c {
            MissingCode::Text(t) => t.trim() == cell,
            MissingCode::Number(x) => v == Some(*x),
        })
    };
    let value = rules.format.parse(cell);
    if rules.missing.iter().any(|m| m == cell) || is_code(value) {
        column.missing += 1;
        return f64::NAN;
    }
    match value {
        Some(v) if v.is_finite() => v,
        _ => {
            column.bad += 1;
            if column.first_bad.is_none() {
                column.first_bad = Some((line, cell.to_string()));
            }
            f64::NAN
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::table::ColumnData;

    fn options() -> ReadOptions {
        ReadOptions::new(b',', vec!["".into(), "NA".into()], vec!["id".into()])
    }

    #[test]
    fn quoted_fields_bom_and_missing_cells() {
        let text = "\u{feff}id,\"a\",b\n\"x,1\",1.5,NA\ny,\"2\",\n";
        let t = read_table(text.as_bytes(), "t.csv", &options()).unwrap();
        assert_eq!(t.columns[0].name, "id");
        assert_eq!(t.lines, vec![2, 3]);
        match &t.columns[0].data {
            ColumnData::Text(v) => assert_eq!(v.as_slice(), &["x,1", "y"]),
            _ => panic!("id should be text"),
        }
        match &t.columns[2].data {
            ColumnData::Numeric(c) => assert_eq!(c.missing, 2),
            _ => panic!("b should be numeric"),
        }
    }

    #[test]
    fn ragged_row_names_its_line() {
        let err = read_table(b"id,a\nx,1\ny,2,3\n", "t.csv", &options()).unwrap_err();
        assert_eq!(
            err.to_string(),
            "t.csv:3: the row has 3 fields but the header has 2"
        );
    }

    #[test]
    fn non_finite_text_is_not_data() {
        let t = read_table(b"id,a\nx,inf\ny,2\n", "t.csv", &options()).unwrap();
        match &t.columns[1].data {
            ColumnData::Numeric(c) => assert_eq!(c.first_bad, Some((2, "inf".into()))),
            _ => panic!(),
        }
    }
}
