//! Reads the input once, in chunks of whole records: each chunk is hashed and
//! parsed at the same time, its text columns are kept and its numbers go to the
//! [`Store`]. Cells are parsed by the same code as the in-memory reader, so the
//! values are the same bits.

use crate::error::{Error, InputError};
use crate::store::{Chunk, Store};
use crate::table::parallel::{RecordFormat, header_end, last_record_end};
use crate::table::{Header, NumericColumn, ReadOptions, Table, read_header};
use sha2::{Digest, Sha256};
use std::io::Read;
use std::path::Path;

/// Bytes read per chunk (a record longer than this makes its chunk longer).
const CHUNK_BYTES: usize = 32 << 20;

/// The table read in passes: its columns' names and counts, and its cells in
/// a store.
pub struct Ingested {
    /// The columns with no cells (numeric columns with their counts): the
    /// values, texts and line numbers are in the store.
    pub table: Table,
    /// Table column index of each of the store's columns.
    pub numeric: Vec<usize>,
    /// Table column index of each of the store's texts.
    pub texts: Vec<usize>,
    pub store: Store,
    pub sha256: String,
    pub bytes: u64,
}

/// Reads `file`. `check_header` sees the header before any record is parsed.
/// On a parse error the rest of the file is still hashed, so the caller can
/// report a changed pinned file first: the result is (hash, bytes, table).
pub fn ingest(
    file: &Path,
    display: &str,
    options: &ReadOptions,
    check_header: impl FnOnce(&Header) -> Result<(), Error>,
    keep_in_memory: u64,
    scratch: &Path,
) -> (String, u64, Result<Ingested, Error>) {
    let mut reader = Reader::open(file, display);
    let result = read_all(
        &mut reader,
        display,
        options,
        check_header,
        keep_in_memory,
        scratch,
    );
    let (sha256, bytes) = reader.finish_hash();
    let result = result.map(|(table, numeric, texts, store)| Ingested {
        table,
        numeric,
        texts,
        store,
        sha256: sha256.clone(),
        bytes,
    });
    (sha256, bytes, result)
}

/// The file, read forward once and hashed as it goes.
struct Reader {
    file: Option<std::fs::File>,
    hasher: Sha256,
    bytes: u64,
    display: String,
    error: Option<std::io::Error>,
    eof: bool,
}

impl Reader {
    fn open(path: &Path, display: &str) -> Reader {
        let (file, error) = match std::fs::File::open(path) {
            Ok(f) => (Some(f), None),
            Err(e) => (None, Some(e)),
        };
        Reader {
            file,
            hasher: Sha256::new(),
            bytes: 0,
            display: display.to_string(),
            error,
            eof: false,
        }
    }

    fn io_error(&mut self) -> Option<InputError> {
        self.error.take().map(|source| InputError::Io {
            path: self.display.clone(),
            source,
        })
    }

    /// Appends up to `want` more bytes to `buf`; returns where they start.
    fn fill(&mut self, buf: &mut Vec<u8>, want: usize) -> Result<usize, InputError> {
        let start = buf.len();
        if let Some(e) = self.io_error() {
            return Err(e);
        }
        let Some(file) = self.file.as_mut() else {
            self.eof = true;
            return Ok(start);
        };
        // Read into the vector's spare room (no zeroing of 32 MB first);
        // fewer bytes than asked for means the file has ended.
        buf.reserve(want);
        match file.take(want as u64).read_to_end(buf) {
            Ok(n) => {
                if n < want {
                    self.eof = true;
                }
                self.bytes += n as u64;
                Ok(start)
            }
            Err(source) => Err(InputError::Io {
                path: self.display.clone(),
                source,
            }),
        }
    }

    /// Hashes whatever was not read yet and returns the file's hash and size.
    fn finish_hash(mut self) -> (String, u64) {
        let mut buf = Vec::new();
        while !self.eof && self.file.is_some() {
            buf.clear();
            if self.fill(&mut buf, CHUNK_BYTES).is_err() {
                break;
            }
            self.hasher.update(&buf);
        }
        let digest = self.hasher.finalize();
        (
            digest.iter().map(|b| format!("{b:02x}")).collect(),
            self.bytes,
        )
    }
}

fn read_all(
    reader: &mut Reader,
    display: &str,
    options: &ReadOptions,
    check_header: impl FnOnce(&Header) -> Result<(), Error>,
    keep_in_memory: u64,
    scratch: &Path,
) -> Result<(Table, Vec<usize>, Vec<usize>, Store), Error> {
    let delimiter = options.delimiter;
    let mut buf = Vec::new();
    // The header: read until its record ends (or the file does).
    let mut want = CHUNK_BYTES;
    loop {
        let start = reader.fill(&mut buf, want)?;
        reader.hasher.update(&buf[start..]);
        if reader.eof || last_record_end(&buf, delimiter).is_some() {
            break;
        }
        want *= 2;
    }
    let header = read_header(&buf, display, delimiter)?;
    check_header(&header)?;
    let layout = RecordFormat::new(header.names, display, options);
    let (body_start, header_lines) = header_end(&buf, delimiter);
    buf.drain(..body_start);
    let width = layout.names.len();
    let numeric: Vec<usize> = (0..width).filter(|&j| !layout.is_text[j]).collect();
    let text_columns: Vec<usize> = (0..width).filter(|&j| layout.is_text[j]).collect();
    let mut store = Store::new(numeric.len(), keep_in_memory).with_texts(text_columns.len());
    let mut counts: Vec<NumericColumn> = vec![NumericColumn::default(); width];
    let mut rows_read = 0usize;
    let mut next_line = 1 + header_lines;
    let pieces = 4 * rayon::current_num_threads().max(1);
    // `buf[hashed..]` was read but not hashed yet: it is hashed while the
    // records before it are parsed.
    let mut hashed = buf.len();
    // Seconds spent parsing (and hashing) and waiting for reads, for SEXTANT_TIMING.
    let (mut parsing, mut reading) = (0.0, 0.0);
    loop {
        let t = std::time::Instant::now();
        let end = if reader.eof {
            buf.len()
        } else {
            match last_record_end(&buf, delimiter) {
                Some(end) => end,
                None => {
                    // No whole record yet: read on.
                    reader.fill(&mut buf, CHUNK_BYTES)?;
                    continue;
                }
            }
        };
        let hasher = &mut reader.hasher;
        let (_, chunk) = rayon::join(
            || hasher.update(&buf[hashed..]),
            || layout.parse_rows(&buf[..end], next_line, pieces),
        );
        hashed = buf.len();
        let chunk = chunk?;
        parsing += t.elapsed().as_secs_f64();
        next_line += chunk.newlines;
        rows_read += chunk.lines.len();
        crate::progress::current().add_bytes(end as u64);
        crate::progress::current().set_rows(rows_read as u64);
        for (j, n) in chunk.counts.into_iter().enumerate() {
            if !layout.is_text[j] {
                counts[j].append(n);
            }
        }
        // Each run of rows goes to the store with its text cells (row by row)
        // and its line numbers.
        let mut texts: Vec<std::vec::IntoIter<String>> = chunk
            .texts
            .into_iter()
            .enumerate()
            .filter(|(j, _)| layout.is_text[*j])
            .map(|(_, t)| t.into_iter())
            .collect();
        let mut lines = chunk.lines.into_iter();
        for (rows, values) in chunk.runs {
            if rows == 0 {
                continue;
            }
            let mut row_texts = Vec::with_capacity(rows * texts.len());
            for _ in 0..rows {
                row_texts.extend(texts.iter_mut().map(|t| t.next().expect("a text per row")));
            }
            let chunk = Chunk {
                rows,
                values,
                texts: row_texts,
                lines: lines.by_ref().take(rows).collect(),
            };
            store
                .push(chunk, scratch)
                // Writing our own scratch file failed (a full disk, say): a
                // failure of the run, not a bad input.
                .map_err(|source| crate::error::OutputError::Io {
                    path: format!("a scratch file in {}", shown_folder(scratch).display()),
                    source,
                })?;
        }
        buf.drain(..end);
        hashed -= end;
        if reader.eof {
            break;
        }
        let t = std::time::Instant::now();
        reader.fill(&mut buf, CHUNK_BYTES)?;
        reading += t.elapsed().as_secs_f64();
    }
    crate::timing::total("parse and hash", parsing);
    crate::timing::total("read", reading);
    let mut table = Table::from_parts(
        display,
        layout.names.clone(),
        vec![Vec::new(); width],
        counts,
        &layout.is_text,
        Vec::new(),
    );
    table.rows = rows_read;
    Ok((table, numeric, text_columns, store))
}

/// A folder as shown in a message: `.` rather than nothing for the current one.
fn shown_folder(folder: &Path) -> &Path {
    if folder.as_os_str().is_empty() {
        Path::new(".")
    } else {
        folder
    }
}
