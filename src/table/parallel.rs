//! The parallel table reader used by runs: the file's body is cut into pieces at
//! record boundaries, the pieces are parsed at the same time, and their columns
//! are joined in order.
//!
//! Cutting is quote-aware: a newline inside a quoted field does not end a record.
//! When the body holds no quote at all (the common case), a piece simply ends at
//! the first newline after its nominal end; otherwise one sequential pass tracks
//! the quote state. Every cell is parsed on its own by the same code whatever the
//! piece it falls in, so the table does not depend on how the file was cut or on
//! the number of threads; [`super::read::read_table`] (on the `csv` crate) is the
//! reference it is tested against.
//!
//! A record without quotes takes the quick path (`plain_record`): the field
//! count and UTF-8 are checked once, and each number is read while its field's
//! end is looked for (`super::scan`). [`RecordFormat`] is what parsing a run of
//! records needs to know; the passes engine uses it to parse rows chunk by chunk.

use super::number::NumberFormat;
use super::read::{CellRules, MissingCode, ReadOptions, number_cell, read_header};
use super::scan::{field_end, scan_number};
use super::{NumericColumn, Table};
use crate::error::InputError;
use rayon::prelude::*;

/// Bytes per piece when the piece count is chosen automatically.
const PIECE_BYTES: usize = 4 << 20;

/// Reads the whole table with the pieces chosen from the file size.
pub fn read_table_parallel(
    bytes: &[u8],
    display: &str,
    options: &ReadOptions,
) -> Result<Table, InputError> {
    let pieces = (bytes.len() / PIECE_BYTES).clamp(1, 4 * rayon::current_num_threads().max(1));
    read_table_in_pieces(bytes, display, options, pieces)
}

/// Reads the whole table, cutting its body into (at most) `pieces` pieces.
pub fn read_table_in_pieces(
    bytes: &[u8],
    display: &str,
    options: &ReadOptions,
    pieces: usize,
) -> Result<Table, InputError> {
    let (layout, body, first_line) = layout_and_body(bytes, display, options)?;
    let columns = layout.parse(body, first_line, pieces)?;
    Ok(Table::from_parts(
        display,
        layout.names,
        columns.texts,
        columns.numbers,
        &layout.is_text,
        columns.lines,
    ))
}

/// The layout the header gives, the body after it and the line the body starts on.
fn layout_and_body<'a>(
    bytes: &'a [u8],
    display: &str,
    options: &ReadOptions,
) -> Result<(RecordFormat, &'a [u8], u64), InputError> {
    let header = read_header(bytes, display, options.delimiter)?;
    let layout = RecordFormat::new(header.names, display, options);
    let (body_start, header_lines) = header_end(bytes, options.delimiter);
    Ok((layout, &bytes[body_start..], 1 + header_lines))
}

/// Reads the whole table the way the passes engine does (numbers row by row,
/// in runs, see [`RecordFormat::parse_rows`]) and lays it out as a [`Table`] again, so
/// that tests can hold both ways of parsing to the same reference.
pub fn read_table_by_rows(
    bytes: &[u8],
    display: &str,
    options: &ReadOptions,
    pieces: usize,
) -> Result<Table, InputError> {
    let (layout, body, first_line) = layout_and_body(bytes, display, options)?;
    let chunk = layout.parse_rows(body, first_line, pieces)?;
    let numeric: Vec<usize> = (0..layout.names.len())
        .filter(|&j| !layout.is_text[j])
        .collect();
    let mut counts = chunk.counts;
    for (rows, values) in &chunk.runs {
        for r in 0..*rows {
            for (jj, &j) in numeric.iter().enumerate() {
                counts[j].values.push(values[r * numeric.len() + jj]);
            }
        }
    }
    Ok(Table::from_parts(
        display,
        layout.names,
        chunk.texts,
        counts,
        &layout.is_text,
        chunk.lines,
    ))
}

/// Where the header record of a file ends (after a byte-order mark, if any) and
/// how many lines it spans.
pub fn header_end(bytes: &[u8], delimiter: u8) -> (usize, u64) {
    let start = if bytes.starts_with(b"\xef\xbb\xbf") {
        3
    } else {
        0
    };
    record_end(bytes, start, delimiter)
}

/// Just past the last whole record of `bytes`, which start at a record start;
/// `None` when no record ends inside them.
pub fn last_record_end(bytes: &[u8], delimiter: u8) -> Option<usize> {
    if memchr::memchr(b'"', bytes).is_none() {
        return memchr::memrchr(b'\n', bytes).map(|i| i + 1);
    }
    let mut last = None;
    scan_record_ends(bytes, delimiter, |end, _| {
        last = Some(end);
        true
    });
    last
}

/// What parsing a run of whole records needs to know about the table.
pub struct RecordFormat {
    pub display: String,
    pub names: Vec<String>,
    pub is_text: Vec<bool>,
    delimiter: u8,
    missing: Vec<String>,
    /// Each column's own missing codes.
    codes: Vec<Vec<MissingCode>>,
    format: NumberFormat,
}

/// The cells of a run of records, column by column, with each record's line.
pub struct Columns {
    pub texts: Vec<Vec<String>>,
    pub numbers: Vec<NumericColumn>,
    pub lines: Vec<u64>,
    /// Newlines in the run (inside quoted fields too).
    pub newlines: u64,
}

impl RecordFormat {
    pub fn new(names: Vec<String>, display: &str, options: &ReadOptions) -> RecordFormat {
        let is_text = names
            .iter()
            .map(|n| options.text_columns.iter().any(|t| t == n))
            .collect();
        let codes = names.iter().map(|n| options.codes_of(n).to_vec()).collect();
        RecordFormat {
            display: display.to_string(),
            names,
            is_text,
            delimiter: options.delimiter,
            missing: options.missing_tokens.clone(),
            codes,
            format: options.number_format(),
        }
    }

    /// Cuts a run of whole records (the first on line `first_line`) into at
    /// most `pieces` pieces and parses them at the same time; also returns the
    /// newlines in the run.
    fn parse_pieces(
        &self,
        body: &[u8],
        first_line: u64,
        pieces: usize,
        row_major: bool,
    ) -> (Vec<Piece>, u64) {
        let cuts = cut(body, pieces, self.delimiter);
        // The file line each piece starts on: every newline (inside quotes too,
        // as editors count them) in the pieces before it.
        let newlines: Vec<u64> = cuts
            .par_windows(2)
            .map(|w| memchr::memchr_iter(b'\n', &body[w[0]..w[1]]).count() as u64)
            .collect();
        let mut first_lines = Vec::with_capacity(newlines.len());
        let mut line = first_line;
        for n in &newlines {
            first_lines.push(line);
            line += n;
        }
        let spec = Spec {
            display: &self.display,
            width: self.names.len(),
            is_text: &self.is_text,
            delimiter: self.delimiter,
            missing: &self.missing,
            codes: &self.codes,
            format: self.format,
            row_major,
        };
        let parsed = cuts
            .par_windows(2)
            .zip(first_lines)
            .zip(&newlines)
            .map(|((w, line), &n)| parse_piece(&body[w[0]..w[1]], line, &spec, n))
            .collect();
        (parsed, newlines.iter().sum())
    }

    /// Parses a run of whole records whose first starts on line `first_line`,
    /// cut into (at most) `pieces` pieces parsed at the same time.
    pub fn parse(
        &self,
        body: &[u8],
        first_line: u64,
        pieces: usize,
    ) -> Result<Columns, InputError> {
        let (parsed, newlines) = self.parse_pieces(body, first_line, pieces, false);
        let mut columns = join(parsed, &self.is_text)?;
        columns.newlines = newlines;
        Ok(columns)
    }
}

/// Record ends (just past a newline that is not inside a quoted field), found
/// with the same rules as [`split_record`]: a quote opens a quoted field only at
/// the start of a field, and `""` inside one is an escaped quote. Calls `at_end`
/// with each end and the count of newlines up to it; stops when it returns false.
/// Returns the offset of the quote that opened a field still open when the
/// bytes ran out (a quote never closed), if one is.
fn scan_record_ends(
    bytes: &[u8],
    delimiter: u8,
    mut at_end: impl FnMut(usize, u64) -> bool,
) -> Option<usize> {
    let mut quoted = false;
    let mut opened = 0;
    let mut field_start = 0;
    let mut newlines = 0;
    let mut skip_next = false;
    for i in memchr::memchr3_iter(delimiter, b'"', b'\n', bytes) {
        if skip_next {
            skip_next = false;
            continue;
        }
        match bytes[i] {
            b'"' if quoted => {
                if bytes.get(i + 1) == Some(&b'"') {
                    skip_next = true;
                } else {
                    quoted = false;
                }
            }
            b'"' => {
                quoted = i == field_start;
                opened = i;
            }
            b'\n' => {
                newlines += 1;
                if !quoted {
                    field_start = i + 1;
                    if !at_end(i + 1, newlines) {
                        return None;
                    }
                }
            }
            _ if !quoted => field_start = i + 1,
            _ => {}
        }
    }
    quoted.then_some(opened)
}

/// The offset of a quote that opens a field and is never closed, by the rules
/// that cut records. With `first_record_only`, only the record at the start of
/// `bytes` is looked at.
pub fn unclosed_quote(bytes: &[u8], delimiter: u8, first_record_only: bool) -> Option<usize> {
    memchr::memchr(b'"', bytes)?;
    scan_record_ends(bytes, delimiter, |_, _| !first_record_only)
}

/// The file line of byte `offset`: the header starts line 1 and every
/// newline counts, inside a quoted field too, as an editor shows them. Every
/// line number a message gives for a table's record or cell is this one.
pub fn line_of(bytes: &[u8], offset: usize) -> u64 {
    1 + memchr::memchr_iter(b'\n', &bytes[..offset]).count() as u64
}

/// Where the record starting at `from` ends (just past its newline, or the end of
/// the bytes), and how many newlines it spans.
fn record_end(bytes: &[u8], from: usize, delimiter: u8) -> (usize, u64) {
    let mut found = (bytes.len(), 0);
    let mut lines_seen = 0;
    scan_record_ends(&bytes[from..], delimiter, |end, lines| {
        found = (from + end, lines);
        lines_seen = lines;
        false
    });
    if found.0 == bytes.len() {
        found.1 = memchr::memchr_iter(b'\n', &bytes[from..]).count() as u64;
    }
    let _ = lines_seen;
    found
}

/// Byte offsets that cut `body` into at most `pieces` runs of whole records:
/// `[0, …, body.len()]`.
fn cut(body: &[u8], pieces: usize, delimiter: u8) -> Vec<usize> {
    let pieces = pieces.max(1);
    let len = body.len();
    let mut cuts = vec![0];
    if memchr::memchr(b'"', body).is_none() {
        // No quotes: every newline ends a record.
        for k in 1..pieces {
            let target = (len * k / pieces).max(*cuts.last().expect("non-empty"));
            if let Some(nl) = memchr::memchr(b'\n', &body[target..]) {
                let at = target + nl + 1;
                if at < len && at > *cuts.last().expect("non-empty") {
                    cuts.push(at);
                }
            }
        }
    } else if pieces > 1 {
        let mut next = 1;
        scan_record_ends(body, delimiter, |end, _| {
            if end >= len * next / pieces && end < len {
                cuts.push(end);
                while next < pieces && len * next / pieces <= end {
                    next += 1;
                }
            }
            next < pieces
        });
    }
    cuts.push(len);
    cuts.dedup();
    cuts
}

/// What every piece needs to know about the table.
struct Spec<'a> {
    display: &'a str,
    width: usize,
    is_text: &'a [bool],
    delimiter: u8,
    missing: &'a [String],
    codes: &'a [Vec<MissingCode>],
    format: NumberFormat,
    /// Numbers go row by row into [`Piece::rows`] instead of into their columns.
    row_major: bool,
}

impl Spec<'_> {
    /// How column `j`'s cells are read.
    fn rules(&self, j: usize) -> CellRules<'_> {
        CellRules {
            missing: self.missing,
            codes: &self.codes[j],
            format: self.format,
        }
    }

    /// Whether column `j`'s cells may take a fast path: a numeric column
    /// without codes of its own (a code such as `-999` reads as a number).
    fn quick(&self, j: usize) -> bool {
        !self.is_text[j] && self.codes[j].is_empty()
    }
}

/// One piece's rows: text and counts column by column; the numbers by column,
/// or row by row when the spec asks for that.
struct Piece {
    texts: Vec<Vec<String>>,
    numbers: Vec<NumericColumn>,
    /// The numeric cells row after row, in column order (row-major mode only).
    rows: Vec<f64>,
    lines: Vec<u64>,
    error: Option<InputError>,
}

impl Piece {
    /// Keeps the value of numeric column `j`'s cell in the current row.
    fn put(&mut self, row_major: bool, j: usize, v: f64) {
        if row_major {
            self.rows.push(v);
        } else {
            self.numbers[j].values.push(v);
        }
    }

    /// Reads a numeric cell that is not a plain decimal (see [`number_cell`]).
    fn put_cell(&mut self, spec: &Spec, j: usize, cell: &str, line: u64) {
        let v = number_cell(&mut self.numbers[j], cell, line, spec.rules(j));
        self.put(spec.row_major, j, v);
    }
}

/// One field of a record: a stretch of the piece's bytes, or (for a quoted
/// field with escaped quotes or text after its closing quote) bytes of its own.
enum Field {
    Slice(usize, usize),
    Owned(Vec<u8>),
}

impl Field {
    fn bytes<'a>(&'a self, buf: &'a [u8]) -> &'a [u8] {
        match self {
            Field::Slice(a, b) => &buf[*a..*b],
            Field::Owned(v) => v,
        }
    }
}

/// Parses the records of one piece; stops at its first error.
fn parse_piece(buf: &[u8], first_line: u64, spec: &Spec, newlines: u64) -> Piece {
    // About one record per newline: room for them all at once.
    let rows = newlines as usize + 1;
    let numeric = spec.is_text.iter().filter(|&&t| !t).count();
    let by_column = if spec.row_major { 0 } else { rows };
    let mut piece = Piece {
        texts: (0..spec.width)
            .map(|j| Vec::with_capacity(if spec.is_text[j] { rows } else { 0 }))
            .collect(),
        numbers: (0..spec.width)
            .map(|j| NumericColumn {
                values: Vec::with_capacity(if spec.is_text[j] { 0 } else { by_column }),
                ..NumericColumn::default()
            })
            .collect(),
        rows: Vec::with_capacity(if spec.row_major { rows * numeric } else { 0 }),
        lines: Vec::with_capacity(rows),
        error: None,
    };
    let mut pos = 0;
    let mut line = first_line;
    let mut fields: Vec<Field> = Vec::with_capacity(spec.width);
    // Without quotes a record is one line, and most lines take the short way.
    let plain = spec.width > 1 && memchr::memchr(b'"', buf).is_none();
    let numeric_tokens = spec
        .missing
        .iter()
        .any(|m| super::number::plain_decimal_with(m.as_bytes(), spec.format.decimal).is_some());
    while pos < buf.len() {
        let record_line = line;
        if plain
            && let Some((next, spanned)) =
                plain_record(buf, pos, record_line, spec, numeric_tokens, &mut piece)
        {
            line += spanned;
            pos = next;
            continue;
        }
        fields.clear();
        let (next, spanned) = match split_record(buf, pos, spec.delimiter, &mut fields) {
            Ok(found) => found,
            Err(quote) => {
                let before = memchr::memchr_iter(b'\n', &buf[pos..quote]).count() as u64;
                piece.error = Some(InputError::UnclosedQuote {
                    path: spec.display.to_string(),
                    line: record_line + before,
                });
                return piece;
            }
        };
        pos = next;
        line += spanned;
        if fields.len() == 1
            && fields[0].bytes(buf).iter().all(u8::is_ascii_whitespace)
            && spec.width > 1
        {
            continue; // a blank line
        }
        if fields.len() != spec.width {
            piece.error = Some(InputError::Ragged {
                path: spec.display.to_string(),
                line: record_line,
                expected: spec.width,
                found: fields.len(),
            });
            return piece;
        }
        for (j, field) in fields.iter().enumerate() {
            let bytes = field.bytes(buf);
            if spec.quick(j) && !spec.missing.iter().any(|m| m.as_bytes() == bytes) {
                // Most cells are plain decimals: read them without the general
                // parser (same value; see `number`).
                if let Some(v) = super::number::plain_decimal_with(bytes, spec.format.decimal) {
                    piece.put(spec.row_major, j, v);
                    continue;
                }
            }
            let Ok(text) = std::str::from_utf8(bytes) else {
                piece.error = Some(InputError::Csv {
                    path: spec.display.to_string(),
                    line: record_line,
                    message: format!("the text is not valid UTF-8 (field {})", j + 1),
                });
                return piece;
            };
            let cell = text.trim();
            if spec.is_text[j] {
                piece.texts[j].push(cell.to_string());
            } else {
                piece.put_cell(spec, j, cell, record_line);
            }
        }
        piece.lines.push(record_line);
    }
    piece
}

/// The short way through a record without quotes whose line has exactly one
/// field per column and is valid UTF-8: each cell is read where it lies, and a
/// number is parsed while its end is searched for. Returns where the next
/// record starts, or `None` (nothing done) for the general way, which gives
/// the same cells and reports any problem. Also returns the newlines it spans.
fn plain_record(
    buf: &[u8],
    pos: usize,
    line: u64,
    spec: &Spec,
    numeric_tokens: bool,
    piece: &mut Piece,
) -> Option<(usize, u64)> {
    let line_end = memchr::memchr(b'\n', &buf[pos..]).map_or(buf.len(), |e| pos + e);
    let mut content_end = line_end;
    if content_end > pos && buf[content_end - 1] == b'\r' {
        content_end -= 1;
    }
    let record = &buf[pos..content_end];
    if memchr::memchr_iter(spec.delimiter, record).count() + 1 != spec.width
        || std::str::from_utf8(record).is_err()
    {
        return None;
    }
    let mut start = 0;
    for j in 0..spec.width {
        let (end, value) = if !spec.quick(j) || numeric_tokens {
            (field_end(record, start, spec.delimiter), None)
        } else {
            scan_number(record, start, spec.delimiter, spec.format.decimal)
        };
        let cell = &record[start..end];
        match value {
            Some(v) => piece.put(spec.row_major, j, v),
            None => {
                let text = std::str::from_utf8(cell)
                    .expect("the record is valid UTF-8")
                    .trim();
                if spec.is_text[j] {
                    piece.texts[j].push(text.to_string());
                } else {
                    piece.put_cell(spec, j, text, line);
                }
            }
        }
        start = end + 1;
    }
    piece.lines.push(line);
    Some(if line_end < buf.len() {
        (line_end + 1, 1)
    } else {
        (line_end, 0)
    })
}

/// Splits the record starting at `pos` into `fields` (quotes removed, `""`
/// unescaped, a trailing `\r` dropped); returns where the next record starts and
/// how many newlines this one spans, or `Err` with the offset of a quote that
/// opens a field and is never closed (the rest of the bytes would otherwise
/// become one field, and the error a wrong count of fields).
fn split_record(
    buf: &[u8],
    mut pos: usize,
    delimiter: u8,
    fields: &mut Vec<Field>,
) -> Result<(usize, u64), usize> {
    let mut newlines = 0;
    loop {
        let mut owned: Option<Vec<u8>> = None;
        let mut start = pos;
        if buf.get(pos) == Some(&b'"') {
            pos += 1;
            start = pos;
            let opened = pos - 1;
            loop {
                let Some(q) = memchr::memchr(b'"', &buf[pos..]) else {
                    return Err(opened);
                };
                newlines += memchr::memchr_iter(b'\n', &buf[pos..pos + q]).count() as u64;
                if buf.get(pos + q + 1) == Some(&b'"') {
                    // An escaped quote: keep one.
                    owned
                        .get_or_insert_with(Vec::new)
                        .extend_from_slice(&buf[start..pos + q + 1]);
                    pos += q + 2;
                    start = pos;
                } else {
                    let inner = &buf[start..pos + q];
                    pos += q + 1;
                    match &mut owned {
                        Some(v) => v.extend_from_slice(inner),
                        None => owned = Some(inner.to_vec()),
                    }
                    break;
                }
            }
        }
        // Unquoted text, or what follows a closing quote, up to the field's end.
        // A plain loop: most fields are a few bytes long, shorter than what a
        // vectorised search needs to pay for its set-up.
        let end = buf[pos..]
            .iter()
            .position(|&b| b == delimiter || b == b'\n')
            .map_or(buf.len(), |e| pos + e);
        let at_line_end = buf.get(end).is_none_or(|&b| b == b'\n' && b != delimiter);
        let mut field = match owned {
            Some(mut v) => {
                v.extend_from_slice(&buf[pos..end]);
                Field::Owned(v)
            }
            None => Field::Slice(start, end),
        };
        if at_line_end {
            match &mut field {
                Field::Slice(a, b) if *b > *a && buf[*b - 1] == b'\r' => *b -= 1,
                Field::Owned(v) if v.last() == Some(&b'\r') => {
                    v.pop();
                }
                _ => {}
            }
            fields.push(field);
            return Ok(if end < buf.len() {
                (end + 1, newlines + 1)
            } else {
                (end, newlines)
            });
        }
        fields.push(field);
        pos = end + 1;
    }
}

/// A run of records with its numeric columns laid out row by row.
pub struct RowChunk {
    /// The text columns' cells (empty vectors for numeric columns).
    pub texts: Vec<Vec<String>>,
    /// The numeric columns' counts (missing, bad, first bad), without values.
    pub counts: Vec<NumericColumn>,
    /// The rows in runs, in order: each run's row count and its values,
    /// rows × (numeric columns), row by row, in table column order.
    pub runs: Vec<(usize, Vec<f64>)>,
    pub lines: Vec<u64>,
    pub newlines: u64,
}

impl RecordFormat {
    /// Like [`RecordFormat::parse`], but with the numbers laid out row by row: each
    /// piece writes its rows straight into a run of its own, which is what the
    /// passes engine stores (no copy from columns to rows, and no second
    /// buffer per chunk).
    pub fn parse_rows(
        &self,
        body: &[u8],
        first_line: u64,
        pieces: usize,
    ) -> Result<RowChunk, InputError> {
        let (mut parsed, newlines) = self.parse_pieces(body, first_line, pieces, true);
        if let Some(e) = parsed.iter_mut().find_map(|p| p.error.take()) {
            return Err(e);
        }
        let rows: usize = parsed.iter().map(|p| p.lines.len()).sum();
        let mut texts: Vec<Vec<String>> = vec![Vec::new(); self.names.len()];
        let mut counts: Vec<NumericColumn> = vec![NumericColumn::default(); self.names.len()];
        let mut lines = Vec::with_capacity(rows);
        let mut runs = Vec::with_capacity(parsed.len());
        for piece in parsed {
            runs.push((piece.lines.len(), piece.rows));
            lines.extend(piece.lines);
            for (j, (t, n)) in piece.texts.into_iter().zip(piece.numbers).enumerate() {
                texts[j].extend(t);
                counts[j].append(n);
            }
        }
        Ok(RowChunk {
            texts,
            counts,
            runs,
            lines,
            newlines,
        })
    }
}

/// Joins the pieces in order; the first error in file order wins.
fn join(parsed: Vec<Piece>, is_text: &[bool]) -> Result<Columns, InputError> {
    let rows: usize = parsed.iter().map(|p| p.lines.len()).sum();
    let width = is_text.len();
    let mut texts: Vec<Vec<String>> = (0..width)
        .map(|j| Vec::with_capacity(if is_text[j] { rows } else { 0 }))
        .collect();
    let mut numbers: Vec<NumericColumn> = (0..width)
        .map(|j| NumericColumn {
            values: Vec::with_capacity(if is_text[j] { 0 } else { rows }),
            ..NumericColumn::default()
        })
        .collect();
    let mut lines = Vec::with_capacity(rows);
    for piece in parsed {
        if let Some(e) = piece.error {
            return Err(e);
        }
        lines.extend(piece.lines);
        for (j, (t, n)) in piece.texts.into_iter().zip(piece.numbers).enumerate() {
            texts[j].extend(t);
            numbers[j].append(n);
        }
    }
    Ok(Columns {
        texts,
        numbers,
        lines,
        newlines: 0,
    })
}
