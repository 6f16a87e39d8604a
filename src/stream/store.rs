//! Where the passes engine keeps the table's numbers between passes: in memory
//! while they fit the memory budget, otherwise in a scratch file beside the
//! results folder that each pass reads back in order.

use std::fs::File;
use std::io::{self, Read, Seek, SeekFrom, Write};
use std::path::Path;

/// A run of consecutive table rows: `rows` × the store's width, row by row.
pub struct Chunk {
    pub rows: usize,
    pub values: Vec<f64>,
}

/// The table's numeric columns, chunk by chunk, in file order.
pub struct Store {
    width: usize,
    /// Bytes of values allowed in memory.
    limit: u64,
    held: Vec<Chunk>,
    held_bytes: u64,
    spill: Option<Spill>,
    rows: usize,
    /// Whether the recipe's transforms have been applied to the values (after
    /// the first pass checked them), so later passes read them as they are.
    pub transformed: bool,
}

/// The scratch file: chunks written one after the other, removed when dropped.
struct Spill {
    file: tempfile::NamedTempFile,
    /// Removes the scratch file if the process is interrupted.
    _registered: crate::cleanup::Registration,
    /// Rows of each chunk, in order.
    chunks: Vec<usize>,
}

impl Store {
    /// An empty store for rows of `width` values that keeps up to `limit` bytes
    /// in memory; beyond that every chunk goes to a scratch file made in `dir`.
    pub fn new(width: usize, limit: u64) -> Store {
        Store {
            width,
            limit,
            held: Vec::new(),
            held_bytes: 0,
            spill: None,
            rows: 0,
            transformed: false,
        }
    }

    pub fn width(&self) -> usize {
        self.width
    }

    pub fn rows(&self) -> usize {
        self.rows
    }

    /// Whether the values went to the scratch file.
    pub fn spilled(&self) -> bool {
        self.spill.is_some()
    }

    /// Adds the next rows; moves everything to a scratch file in `dir` once the
    /// values held would pass the limit.
    pub fn push(&mut self, chunk: Chunk, dir: &Path) -> io::Result<()> {
        debug_assert_eq!(chunk.values.len(), chunk.rows * self.width);
        self.rows += chunk.rows;
        let bytes = (chunk.values.len() * 8) as u64;
        if self.spill.is_none() && self.held_bytes + bytes <= self.limit {
            self.held_bytes += bytes;
            self.held.push(chunk);
            return Ok(());
        }
        if self.spill.is_none() {
            let file = tempfile::Builder::new()
                .prefix(".sextant-scratch-")
                .tempfile_in(dir)?;
            let mut spill = Spill {
                _registered: crate::cleanup::register(file.path()),
                file,
                chunks: Vec::new(),
            };
            for held in self.held.drain(..) {
                spill.write(&held)?;
            }
            self.held_bytes = 0;
            self.spill = Some(spill);
        }
        self.spill.as_mut().expect("made above").write(&chunk)
    }

    /// Calls `f` with every chunk in order (a pass over the table).
    pub fn pass<E: From<io::Error>>(
        &self,
        mut f: impl FnMut(&Chunk) -> Result<(), E>,
    ) -> Result<(), E> {
        match &self.spill {
            None => self.held.iter().try_for_each(f),
            Some(spill) => {
                let mut file: &File = spill.file.as_file();
                file.seek(SeekFrom::Start(0))?;
                let mut reader = io::BufReader::with_capacity(1 << 20, file);
                let mut bytes = Vec::new();
                for &rows in &spill.chunks {
                    bytes.resize(rows * self.width * 8, 0);
                    reader.read_exact(&mut bytes)?;
                    f(&Chunk {
                        rows,
                        values: decode(&bytes),
                    })?;
                }
                Ok(())
            }
        }
    }
}

impl Store {
    /// Changes every chunk in place with `f` (in the scratch file, each chunk is
    /// read, changed and written back where it was).
    pub fn update(&mut self, mut f: impl FnMut(&mut Chunk)) -> io::Result<()> {
        let width = self.width;
        match &mut self.spill {
            None => {
                self.held.iter_mut().for_each(f);
                Ok(())
            }
            Some(spill) => {
                let file = spill.file.as_file_mut();
                let mut at = 0u64;
                let mut bytes = Vec::new();
                for &rows in &spill.chunks {
                    bytes.resize(rows * width * 8, 0);
                    file.seek(SeekFrom::Start(at))?;
                    file.read_exact(&mut bytes)?;
                    let mut chunk = Chunk {
                        rows,
                        values: decode(&bytes),
                    };
                    f(&mut chunk);
                    encode(&chunk.values, &mut bytes);
                    file.seek(SeekFrom::Start(at))?;
                    file.write_all(&bytes)?;
                    at += bytes.len() as u64;
                }
                Ok(())
            }
        }
    }
}

impl Spill {
    fn write(&mut self, chunk: &Chunk) -> io::Result<()> {
        let mut bytes = vec![0; chunk.values.len() * 8];
        encode(&chunk.values, &mut bytes);
        let file: &mut File = self.file.as_file_mut();
        file.seek(SeekFrom::End(0))?;
        file.write_all(&bytes)?;
        self.chunks.push(chunk.rows);
        Ok(())
    }
}

/// Values as the scratch file holds them: 8 little-endian bytes each, the exact bits.
fn encode(values: &[f64], bytes: &mut [u8]) {
    for (b, v) in bytes.chunks_exact_mut(8).zip(values) {
        b.copy_from_slice(&v.to_le_bytes());
    }
}

fn decode(bytes: &[u8]) -> Vec<f64> {
    bytes
        .chunks_exact(8)
        .map(|b| f64::from_le_bytes(b.try_into().expect("8 bytes")))
        .collect()
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
        }
    }

    fn read_all(store: &Store) -> Vec<f64> {
        let mut all = Vec::new();
        store
            .pass(|c: &Chunk| -> io::Result<()> {
                all.extend_from_slice(&c.values);
                Ok(())
            })
            .unwrap();
        all
    }

    #[test]
    fn spilled_and_held_stores_give_the_same_values() {
        let dir = tempfile::tempdir().unwrap();
        let mut held = Store::new(3, u64::MAX);
        let mut spilled = Store::new(3, 100);
        let mut first = 0;
        for rows in [2, 5, 1, 7] {
            held.push(chunk(first, rows, 3), dir.path()).unwrap();
            spilled.push(chunk(first, rows, 3), dir.path()).unwrap();
            first += rows;
        }
        assert!(!held.spilled());
        assert!(spilled.spilled());
        assert_eq!(held.rows(), 15);
        let a = read_all(&held);
        let b = read_all(&spilled);
        assert_eq!(a.len(), 45);
        assert!(a.iter().zip(&b).all(|(x, y)| x.to_bits() == y.to_bits()));
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
        // The scratch file goes away with the store.
        drop(spilled);
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
    }
}
