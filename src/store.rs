//! The row store: where the passes engine keeps rows between passes (the
//! table's numbers, with its text cells and line numbers) and where every
//! analysed row's results are kept (`row_results`). In memory while they fit the
//! memory budget, otherwise in a scratch file beside the results folder that
//! each pass reads back in order. At the bottom of the crate, so that both use
//! it without either importing the other.

use std::fs::File;
use std::io::{self, Read, Seek, SeekFrom, Write};
use std::path::Path;

/// A run of consecutive rows: `rows` × the store's width of numbers, row by
/// row, and as many texts per row as the store's text width.
#[derive(Debug, Clone, Default)]
pub struct Chunk {
    pub rows: usize,
    pub values: Vec<f64>,
    /// Rows × the text width, row by row.
    pub texts: Vec<String>,
    /// The file line of each row, when the store keeps lines (else empty).
    pub lines: Vec<u64>,
}

impl Chunk {
    /// A chunk of numbers only.
    pub fn numbers(rows: usize, values: Vec<f64>) -> Chunk {
        Chunk {
            rows,
            values,
            texts: Vec::new(),
            lines: Vec::new(),
        }
    }

    /// Bytes the chunk holds in memory (texts counted with their `String`).
    fn bytes(&self) -> u64 {
        let texts: usize = self.texts.iter().map(|t| t.len() + 24).sum();
        (self.values.len() * 8 + self.lines.len() * 8 + texts) as u64
    }
}

/// Rows, chunk by chunk, in order.
pub struct Store {
    width: usize,
    text_width: usize,
    /// Bytes of values allowed in memory.
    limit: u64,
    held: Vec<Chunk>,
    held_bytes: u64,
    spill: Option<Spill>,
    rows: usize,
    /// Whether the recipe's transforms have been applied to the values (after
    /// the first pass checked them), so later passes read them as they are.
    pub transformed: bool,
    /// Whether a pass took the held chunks' texts away ([`Store::pass_taking`]).
    pub texts_taken: bool,
    /// Whether a model's fills replaced the missing cells (so the cells can
    /// no longer be counted as missing: the table is preprocessed once).
    pub cells_filled: bool,
}

/// The scratch file: chunks written one after the other, removed when dropped.
struct Spill {
    file: tempfile::NamedTempFile,
    /// Removes the scratch file if the process is interrupted.
    _registered: crate::cleanup::Registration,
    /// Each chunk's rows, where it starts and its length in bytes.
    chunks: Vec<(usize, u64, usize)>,
    end: u64,
}

impl Store {
    /// An empty store for rows of `width` numbers (and no texts) that keeps up to
    /// `limit` bytes in memory; beyond that every chunk goes to a scratch file.
    pub fn new(width: usize, limit: u64) -> Store {
        Store {
            width,
            text_width: 0,
            limit,
            held: Vec::new(),
            held_bytes: 0,
            spill: None,
            rows: 0,
            transformed: false,
            texts_taken: false,
            cells_filled: false,
        }
    }

    /// The same store with `text_width` texts per row.
    pub fn with_texts(mut self, text_width: usize) -> Store {
        self.text_width = text_width;
        self
    }

    pub fn width(&self) -> usize {
        self.width
    }

    pub fn text_width(&self) -> usize {
        self.text_width
    }

    /// Bytes the store may keep in memory.
    pub fn limit(&self) -> u64 {
        self.limit
    }

    pub fn rows(&self) -> usize {
        self.rows
    }

    /// Whether the rows went to the scratch file.
    pub fn spilled(&self) -> bool {
        self.spill.is_some()
    }

    /// Adds the next rows; moves everything to a scratch file beside the
    /// results folder `owner` (named after it) once the bytes held would pass
    /// the limit.
    pub fn push(&mut self, chunk: Chunk, owner: &Path) -> io::Result<()> {
        debug_assert_eq!(chunk.values.len(), chunk.rows * self.width);
        debug_assert_eq!(chunk.texts.len(), chunk.rows * self.text_width);
        debug_assert!(chunk.lines.is_empty() || chunk.lines.len() == chunk.rows);
        self.rows += chunk.rows;
        let bytes = chunk.bytes();
        if self.spill.is_none() && self.held_bytes + bytes <= self.limit {
            self.held_bytes += bytes;
            self.held.push(chunk);
            return Ok(());
        }
        if self.spill.is_none() {
            let (file, registered) = crate::cleanup::create_registered(
                || crate::scratch::scratch_file(owner, crate::scratch::Kind::Scratch),
                |file| file.path(),
            )?;
            let mut spill = Spill {
                _registered: registered,
                file,
                chunks: Vec::new(),
                end: 0,
            };
            for held in self.held.drain(..) {
                spill.write(&held)?;
            }
            self.held_bytes = 0;
            self.spill = Some(spill);
        }
        self.spill.as_mut().expect("made above").write(&chunk)
    }

    /// Calls `f` with every chunk in order (a pass over the rows).
    pub fn pass<E: From<io::Error>>(
        &self,
        mut f: impl FnMut(&Chunk) -> Result<(), E>,
    ) -> Result<(), E> {
        // Through a cursor: a spilled store is read with a file handle of its
        // own, so passes over one store may run at the same time (the figures
        // and the tables read the rows together).
        let mut cursor = self.cursor()?;
        while let Some(chunk) = cursor.next_chunk()? {
            f(&chunk)?;
        }
        Ok(())
    }

    /// A pass in which `f` may take things out of each chunk (the texts, to
    /// move them on instead of copying them): held chunks keep only what `f`
    /// leaves; a spilled store's file keeps everything.
    pub fn pass_taking<E: From<io::Error>>(
        &mut self,
        mut f: impl FnMut(&mut Chunk) -> Result<(), E>,
    ) -> Result<(), E> {
        if self.spill.is_none() {
            self.held_bytes = 0;
            for chunk in &mut self.held {
                f(chunk)?;
                self.held_bytes += chunk.bytes();
            }
            return Ok(());
        }
        let mut cursor = self.cursor()?;
        while let Some(chunk) = cursor.next_chunk()? {
            f(&mut chunk.into_owned())?;
        }
        Ok(())
    }

    /// Reads the chunks one at a time, when the caller asks for the next one.
    pub fn cursor(&self) -> io::Result<Cursor<'_>> {
        let reader = match &self.spill {
            None => None,
            Some(spill) => Some(io::BufReader::with_capacity(1 << 20, spill.file.reopen()?)),
        };
        Ok(Cursor {
            store: self,
            next: 0,
            reader,
            bytes: Vec::new(),
        })
    }

    /// Changes the numbers of every chunk in place with `f`, which must leave
    /// the texts and lines as they are (in the scratch file, each chunk's
    /// numbers are read, changed and written back where they were; `f` then
    /// sees no texts or lines).
    pub fn update(&mut self, mut f: impl FnMut(&mut Chunk)) -> io::Result<()> {
        let width = self.width;
        match &mut self.spill {
            None => {
                self.held.iter_mut().for_each(f);
                Ok(())
            }
            Some(spill) => {
                let file = spill.file.as_file_mut();
                let mut bytes = Vec::new();
                for &(rows, at, _) in &spill.chunks {
                    bytes.resize(rows * width * 8, 0);
                    file.seek(SeekFrom::Start(at))?;
                    file.read_exact(&mut bytes)?;
                    let mut chunk = Chunk::numbers(rows, numbers(&bytes));
                    f(&mut chunk);
                    bytes.clear();
                    put_numbers(&chunk.values, &mut bytes);
                    file.seek(SeekFrom::Start(at))?;
                    file.write_all(&bytes)?;
                }
                Ok(())
            }
        }
    }
}

/// The chunks of a store read one at a time ([`Store::cursor`]), a spilled
/// store's through a file handle of its own.
pub struct Cursor<'a> {
    store: &'a Store,
    next: usize,
    reader: Option<io::BufReader<File>>,
    bytes: Vec<u8>,
}

impl<'a> Cursor<'a> {
    /// The next chunk, or `None` after the last.
    pub fn next_chunk(&mut self) -> io::Result<Option<std::borrow::Cow<'a, Chunk>>> {
        let store = self.store;
        let at = self.next;
        self.next += 1;
        match (&store.spill, &mut self.reader) {
            (Some(spill), Some(reader)) => {
                let Some(&(rows, _, length)) = spill.chunks.get(at) else {
                    return Ok(None);
                };
                self.bytes.resize(length, 0);
                reader.read_exact(&mut self.bytes)?;
                let chunk = decode(&self.bytes, rows, store.width, store.text_width)?;
                Ok(Some(std::borrow::Cow::Owned(chunk)))
            }
            _ => Ok(store.held.get(at).map(std::borrow::Cow::Borrowed)),
        }
    }
}

impl Spill {
    fn write(&mut self, chunk: &Chunk) -> io::Result<()> {
        let bytes = encode(chunk);
        let file: &mut File = self.file.as_file_mut();
        file.seek(SeekFrom::Start(self.end))?;
        file.write_all(&bytes)?;
        self.chunks.push((chunk.rows, self.end, bytes.len()));
        self.end += bytes.len() as u64;
        Ok(())
    }
}

/// A chunk as the scratch file holds it: its numbers (8 little-endian bytes
/// each, the exact bits), a flag and its lines, then each text as its length
/// (4 bytes) and its UTF-8 bytes.
fn encode(chunk: &Chunk) -> Vec<u8> {
    let texts: usize = chunk.texts.iter().map(|t| t.len() + 4).sum();
    let mut bytes = Vec::with_capacity((chunk.values.len() + chunk.lines.len()) * 8 + 1 + texts);
    put_numbers(&chunk.values, &mut bytes);
    bytes.push(u8::from(!chunk.lines.is_empty()));
    for line in &chunk.lines {
        bytes.extend_from_slice(&line.to_le_bytes());
    }
    for text in &chunk.texts {
        let length = u32::try_from(text.len()).expect("a cell of a chunk is under 4 GB");
        bytes.extend_from_slice(&length.to_le_bytes());
        bytes.extend_from_slice(text.as_bytes());
    }
    bytes
}

fn put_numbers(values: &[f64], bytes: &mut Vec<u8>) {
    for v in values {
        bytes.extend_from_slice(&v.to_le_bytes());
    }
}

fn numbers(bytes: &[u8]) -> Vec<f64> {
    bytes
        .chunks_exact(8)
        .map(|b| f64::from_le_bytes(b.try_into().expect("8 bytes")))
        .collect()
}

/// The chunk [`encode`] wrote.
fn decode(bytes: &[u8], rows: usize, width: usize, text_width: usize) -> io::Result<Chunk> {
    let broken = || io::Error::new(io::ErrorKind::InvalidData, "a scratch file was changed");
    let (values, mut rest) = bytes.split_at(rows * width * 8);
    let (&has_lines, tail) = rest.split_first().ok_or_else(broken)?;
    rest = tail;
    let mut lines = Vec::new();
    if has_lines == 1 {
        let (raw, tail) = rest.split_at(rows * 8);
        lines = raw
            .chunks_exact(8)
            .map(|b| u64::from_le_bytes(b.try_into().expect("8 bytes")))
            .collect();
        rest = tail;
    }
    let mut texts = Vec::with_capacity(rows * text_width);
    for _ in 0..rows * text_width {
        let length = rest.get(..4).ok_or_else(broken)?;
        let length = u32::from_le_bytes(length.try_into().expect("4 bytes")) as usize;
        let text = rest.get(4..4 + length).ok_or_else(broken)?;
        texts.push(String::from_utf8(text.to_vec()).map_err(|_| broken())?);
        rest = &rest[4 + length..];
    }
    Ok(Chunk {
        rows,
        values: numbers(values),
        texts,
        lines,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn chunk(first: usize, rows: usize, width: usize) -> Chunk {
        Chunk {
            rows,
            values: (0..rows * width)
                .map(|i| (first * width + i) as f64 * 0.1 - 3.0)
                .collect(),
            // Two texts per row, one of them empty or not ASCII now and then.
            texts: (first..first + rows)
                .flat_map(|r| [format!("id-{r}"), ["", "é", "x,y"][r % 3].to_string()])
                .collect(),
            lines: (first..first + rows).map(|r| 2 + 3 * r as u64).collect(),
        }
    }

    fn read_all(store: &Store) -> Vec<f64> {
        read_rows(store).0
    }

    /// Every value, text and line, in order.
    fn read_rows(store: &Store) -> (Vec<f64>, Vec<String>, Vec<u64>) {
        let (mut values, mut texts, mut lines) = (Vec::new(), Vec::new(), Vec::new());
        store
            .pass(|c: &Chunk| -> io::Result<()> {
                values.extend_from_slice(&c.values);
                texts.extend_from_slice(&c.texts);
                lines.extend_from_slice(&c.lines);
                Ok(())
            })
            .unwrap();
        (values, texts, lines)
    }

    #[test]
    fn spilled_and_held_stores_give_the_same_values() {
        let dir = tempfile::tempdir().unwrap();
        let mut held = Store::new(3, u64::MAX).with_texts(2);
        let mut spilled = Store::new(3, 100).with_texts(2);
        let mut first = 0;
        for rows in [2, 5, 1, 7] {
            held.push(chunk(first, rows, 3), &dir.path().join("out"))
                .unwrap();
            spilled
                .push(chunk(first, rows, 3), &dir.path().join("out"))
                .unwrap();
            first += rows;
        }
        assert!(!held.spilled());
        assert!(spilled.spilled());
        assert_eq!(held.rows(), 15);
        let a = read_all(&held);
        let b = read_all(&spilled);
        assert_eq!(a.len(), 45);
        assert!(a.iter().zip(&b).all(|(x, y)| x.to_bits() == y.to_bits()));
        // The texts and lines come back as they went in.
        let (_, texts, lines) = read_rows(&spilled);
        assert_eq!((texts.clone(), lines.clone()), {
            let (_, t, l) = read_rows(&held);
            (t, l)
        });
        assert_eq!(texts.len(), 30);
        assert_eq!((texts[28].as_str(), texts[29].as_str()), ("id-14", "x,y"));
        assert_eq!(texts[3], "é");
        assert_eq!(lines[14], 44);
        // A second pass reads the same again.
        assert_eq!(read_all(&spilled), b);
        // Changed in place, both the same again.
        for store in [&mut held, &mut spilled] {
            store
                .update(|c| c.values.iter_mut().for_each(|v| *v = -*v * 2.0))
                .unwrap();
        }
        let (a, b) = (read_all(&held), read_all(&spilled));
        assert_eq!(a[44], -2.0 * (44.0 * 0.1 - 3.0));
        assert!(a.iter().zip(&b).all(|(x, y)| x.to_bits() == y.to_bits()));
        // Changing the numbers left the texts and lines where they were.
        assert_eq!(read_rows(&spilled).1, texts);
        assert_eq!(read_rows(&spilled).2, lines);
        // The scratch file goes away with the store.
        drop(spilled);
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
    }
}
