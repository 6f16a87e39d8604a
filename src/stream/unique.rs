//! Whether an id column's values are present and unique, in memory that does not
//! grow with the row count: an external merge sort (D. E. Knuth, 1998, *The Art
//! of Computer Programming*, vol. 3, *Sorting and Searching*, 2nd ed., §5.4
//! "External sorting").
//!
//! The ids are gathered with their row numbers until they fill the run budget;
//! then they are sorted by (id, row) and written as a *run* to a scratch file.
//! At the end the runs are merged, and since a repeat shows up as two equal ids
//! next to each other in that order, the merge only keeps the previous (id, row).
//! The answer is the one sorting the whole column in memory would give (the
//! tests' `reference`).

use std::cmp::Reverse;
use std::collections::BinaryHeap;
use std::fs::File;
use std::io::{self, BufWriter, Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};

/// What is wrong with an id column: the first problem in row order.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum IdProblem {
    /// Row `row` (0-based) has an empty id.
    Empty { row: usize },
    /// Row `row` repeats the id first seen at row `first`.
    Repeat { row: usize, first: usize },
}

/// The check of one id column, fed in row order.
pub struct IdCheck {
    scratch: PathBuf,
    run_bytes: usize,
    /// The held ids' bytes, one after the other (one allocation instead of one
    /// per id, so the budget counts what is really held).
    bytes: Vec<u8>,
    /// Where each held id lies in `bytes`, and its row.
    entries: Vec<Entry>,
    /// Rows pushed so far.
    rows: usize,
    /// The first row with an empty id.
    empty: Option<usize>,
    /// The runs written so far; `None` while everything fits in memory.
    spill: Option<Spill>,
}

/// A held id: `bytes[start..start + len]` at row `row`.
struct Entry {
    start: usize,
    len: usize,
    row: usize,
}

/// What an id costs in memory besides its bytes.
const ENTRY_BYTES: usize = std::mem::size_of::<Entry>();

/// Buffered writes of one run.
const WRITE_BUFFER: usize = 1 << 16;

/// Bounds of each run's read buffer in the merge (see [`merge`]).
const READ_MIN: usize = 64;
const READ_MAX: usize = 1 << 20;

/// The scratch file of runs, removed when dropped.
struct Spill {
    // Declared before the registration so the file is removed before it is
    // forgotten by the interruption handler.
    file: tempfile::NamedTempFile,
    /// Removes the scratch file if the process is interrupted.
    _registered: crate::cleanup::Registration,
    /// The byte offset where each run starts; each ends where the next starts.
    starts: Vec<u64>,
    /// Bytes written.
    end: u64,
}

impl IdCheck {
    /// Ids are kept in memory up to about `run_bytes` bytes (their bytes plus a
    /// small fixed cost each, so many short or empty ids are bounded too);
    /// beyond that, sorted runs go to a scratch file made beside the results
    /// folder `scratch`, named after it (removed when done or dropped, and
    /// removed by an interruption too).
    pub fn new(scratch: &Path, run_bytes: usize) -> IdCheck {
        IdCheck {
            scratch: scratch.to_path_buf(),
            run_bytes,
            bytes: Vec::new(),
            entries: Vec::new(),
            rows: 0,
            empty: None,
            spill: None,
        }
    }

    /// The ids of the next rows, in row order (rows are numbered from 0 across
    /// all calls).
    pub fn push<'a>(&mut self, ids: impl IntoIterator<Item = &'a str>) -> io::Result<()> {
        for id in ids {
            if id.is_empty() && self.empty.is_none() {
                self.empty = Some(self.rows);
            }
            self.entries.push(Entry {
                start: self.bytes.len(),
                len: id.len(),
                row: self.rows,
            });
            self.bytes.extend_from_slice(id.as_bytes());
            self.rows += 1;
            if self.bytes.len() + self.entries.len() * ENTRY_BYTES > self.run_bytes {
                self.write_run()?;
            }
        }
        Ok(())
    }

    /// The problem `check_ids` would report for all the ids pushed, if any.
    pub fn finish(mut self) -> io::Result<Option<IdProblem>> {
        let repeat = if self.spill.is_none() {
            self.sort();
            held_repeat(&self.bytes, &self.entries)
        } else {
            self.write_run()?;
            // The held ids are all in the file now: free their memory for the merge.
            self.bytes = Vec::new();
            self.entries = Vec::new();
            let spill = self.spill.take().expect("checked above");
            let repeat = merge(&spill, self.run_bytes)?;
            let Spill {
                file, _registered, ..
            } = spill;
            file.close()?;
            repeat
        };
        Ok(problem(self.empty, repeat))
    }

    /// Sorts the held ids by (id, row); the key is total, as rows are distinct.
    fn sort(&mut self) {
        let bytes = &self.bytes;
        self.entries
            .sort_unstable_by(|a, b| id(bytes, a).cmp(id(bytes, b)).then(a.row.cmp(&b.row)));
    }

    /// Writes the held ids as the next sorted run and empties the buffer.
    fn write_run(&mut self) -> io::Result<()> {
        if self.entries.is_empty() {
            return Ok(());
        }
        self.sort();
        if self.spill.is_none() {
            let (file, registered) = crate::cleanup::create_registered(
                || crate::scratch::scratch_file(&self.scratch, crate::scratch::Kind::Ids),
                |file| file.path(),
            )?;
            self.spill = Some(Spill {
                _registered: registered,
                file,
                starts: Vec::new(),
                end: 0,
            });
        }
        let spill = self.spill.as_mut().expect("made above");
        spill.starts.push(spill.end);
        // Runs are only appended, and only read once writing is over, so the
        // file's position is always its end here.
        let mut out = BufWriter::with_capacity(WRITE_BUFFER, spill.file.as_file());
        for entry in &self.entries {
            let id = id(&self.bytes, entry);
            out.write_all(&(id.len() as u64).to_le_bytes())?;
            out.write_all(id)?;
            out.write_all(&(entry.row as u64).to_le_bytes())?;
            spill.end += 16 + id.len() as u64;
        }
        out.flush()?;
        self.bytes.clear();
        self.entries.clear();
        Ok(())
    }

    /// The number of runs written (for the tests' checks that runs were made).
    #[cfg(test)]
    fn runs(&self) -> usize {
        self.spill.as_ref().map_or(0, |s| s.starts.len())
    }
}

fn id<'b>(bytes: &'b [u8], entry: &Entry) -> &'b [u8] {
    &bytes[entry.start..entry.start + entry.len]
}

/// `check_ids`'s choice: the empty id if it comes no later than the repeat.
fn problem(empty: Option<usize>, repeat: Option<(usize, usize)>) -> Option<IdProblem> {
    match (empty, repeat) {
        (Some(row), r) if r.is_none_or(|(later, _)| row <= later) => Some(IdProblem::Empty { row }),
        (_, Some((row, first))) => Some(IdProblem::Repeat { row, first }),
        _ => None,
    }
}

/// Keeps the smallest (later row, earlier row) pair seen.
fn note(best: &mut Option<(usize, usize)>, pair: (usize, usize)) {
    if best.is_none_or(|b| pair < b) {
        *best = Some(pair);
    }
}

/// The repeat among held ids sorted by (id, row).
fn held_repeat(bytes: &[u8], sorted: &[Entry]) -> Option<(usize, usize)> {
    let mut best = None;
    for w in sorted.windows(2) {
        if id(bytes, &w[0]) == id(bytes, &w[1]) {
            note(&mut best, (w[1].row, w[0].row));
        }
    }
    best
}

/// The head of a run in the merge. Ordered by (id, row): rows are distinct, so
/// equal ids from different runs come out in row order and `run` never decides.
#[derive(PartialEq, Eq, PartialOrd, Ord)]
struct Head {
    id: Vec<u8>,
    row: usize,
    run: usize,
}

/// The repeat among all runs, merged in (id, row) order. Each run is read
/// through its own buffer; together they take about the run budget
/// (`run_bytes / runs` each, within [`READ_MIN`]..=[`READ_MAX`]), so memory
/// stays near the budget up to `run_bytes / READ_MIN` runs.
fn merge(spill: &Spill, run_bytes: usize) -> io::Result<Option<(usize, usize)>> {
    let file = spill.file.as_file();
    let runs = spill.starts.len();
    let capacity = (run_bytes / runs).clamp(READ_MIN, READ_MAX);
    let mut readers: Vec<RunReader> = (0..runs)
        .map(|i| {
            let end = spill.starts.get(i + 1).copied().unwrap_or(spill.end);
            RunReader::new(spill.starts[i], end, capacity)
        })
        .collect();
    let mut heap = BinaryHeap::with_capacity(runs);
    for (run, reader) in readers.iter_mut().enumerate() {
        let mut id = Vec::new();
        if let Some(row) = reader.next(file, &mut id)? {
            heap.push(Reverse(Head { id, row, run }));
        }
    }
    let mut best = None;
    let mut previous: Vec<u8> = Vec::new();
    let mut previous_row: Option<usize> = None;
    while let Some(Reverse(mut head)) = heap.pop() {
        if let Some(first) = previous_row {
            debug_assert!((previous.as_slice(), first) < (head.id.as_slice(), head.row));
            if previous == head.id {
                note(&mut best, (head.row, first));
            }
        }
        // The head's id becomes the previous one, and the previous one's
        // allocation takes the run's next id.
        std::mem::swap(&mut previous, &mut head.id);
        previous_row = Some(head.row);
        if let Some(row) = readers[head.run].next(file, &mut head.id)? {
            head.row = row;
            heap.push(Reverse(head));
        }
    }
    Ok(best)
}

/// One run of the scratch file, read in order through a buffer of its own (one
/// file handle for all runs, so the number of runs is not bounded by the
/// number of open files).
struct RunReader {
    /// The file offset of the next byte not yet buffered.
    at: u64,
    end: u64,
    buffer: Vec<u8>,
    pos: usize,
    filled: usize,
}

impl RunReader {
    fn new(start: u64, end: u64, capacity: usize) -> RunReader {
        RunReader {
            at: start,
            end,
            buffer: vec![0; capacity],
            pos: 0,
            filled: 0,
        }
    }

    /// Reads the next (id, row) into `id`; `None` at the run's end.
    fn next(&mut self, file: &File, id: &mut Vec<u8>) -> io::Result<Option<usize>> {
        if self.pos == self.filled && self.at == self.end {
            return Ok(None);
        }
        let mut word = [0u8; 8];
        self.read_exact(file, &mut word)?;
        let len = usize::try_from(u64::from_le_bytes(word))
            .map_err(|_| io::Error::new(io::ErrorKind::InvalidData, "id length"))?;
        id.resize(len, 0);
        self.read_exact(file, id)?;
        self.read_exact(file, &mut word)?;
        let row = usize::try_from(u64::from_le_bytes(word))
            .map_err(|_| io::Error::new(io::ErrorKind::InvalidData, "row number"))?;
        Ok(Some(row))
    }

    fn read_exact(&mut self, file: &File, out: &mut [u8]) -> io::Result<()> {
        let mut done = 0;
        while done < out.len() {
            if self.pos == self.filled {
                self.refill(file)?;
            }
            let n = (self.filled - self.pos).min(out.len() - done);
            out[done..done + n].copy_from_slice(&self.buffer[self.pos..self.pos + n]);
            self.pos += n;
            done += n;
        }
        Ok(())
    }

    fn refill(&mut self, mut file: &File) -> io::Result<()> {
        let n = (self.end - self.at).min(self.buffer.len() as u64) as usize;
        if n == 0 {
            return Err(io::Error::new(
                io::ErrorKind::UnexpectedEof,
                "a run of ids ends inside a record",
            ));
        }
        file.seek(SeekFrom::Start(self.at))?;
        file.read_exact(&mut self.buffer[..n])?;
        self.at += n as u64;
        self.pos = 0;
        self.filled = n;
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The check done in memory on plain strings, sorting the whole column:
    /// the reference.
    fn reference(ids: &[String]) -> Option<IdProblem> {
        let empty = ids.iter().position(String::is_empty);
        let mut order: Vec<usize> = (0..ids.len()).collect();
        order.sort_by(|&a, &b| ids[a].cmp(&ids[b]).then(a.cmp(&b)));
        let repeat = order
            .windows(2)
            .filter(|w| ids[w[0]] == ids[w[1]])
            .map(|w| (w[1], w[0]))
            .min();
        match (empty, repeat) {
            (Some(row), r) if r.is_none_or(|(j, _)| row <= j) => Some(IdProblem::Empty { row }),
            (_, Some((row, first))) => Some(IdProblem::Repeat { row, first }),
            _ => None,
        }
    }

    /// Checks `ids` pushed in batches of `batches` (cycled) with `run_bytes`;
    /// also returns the number of runs written.
    fn check(
        dir: &Path,
        ids: &[String],
        run_bytes: usize,
        batches: &[usize],
    ) -> (Option<IdProblem>, usize) {
        let mut check = IdCheck::new(dir, run_bytes);
        let mut rest = ids;
        for &size in batches.iter().cycle() {
            if rest.is_empty() {
                break;
            }
            let (now, later) = rest.split_at(size.min(rest.len()));
            check.push(now.iter().map(String::as_str)).unwrap();
            rest = later;
        }
        let runs = check.runs();
        (check.finish().unwrap(), runs)
    }

    fn strings(ids: &[&str]) -> Vec<String> {
        ids.iter().map(|s| s.to_string()).collect()
    }

    /// Run budgets: one id per run, a few per run, and all in memory.
    const BUDGETS: [usize; 5] = [1, 7, 64, 300, usize::MAX];

    #[test]
    fn hand_cases_match_check_ids() {
        // Hand-made cases with the rows each must report, under every budget and
        // batch size.
        use IdProblem::*;
        let cases: [(&[&str], Option<IdProblem>); 6] = [
            (&["a", "b", "c"], None),
            // Three of a kind: reported at the second, naming the first.
            (
                &["x", "a", "x", "b", "x"],
                Some(Repeat { row: 2, first: 0 }),
            ),
            // The earlier of two repeats wins, whatever their order by id
            // (by id the pair of `a`s comes first, (3, 1), but (2, 0) is smaller).
            (&["z", "a", "z", "a"], Some(Repeat { row: 2, first: 0 })),
            // An empty id before a repeat is reported first, and after it, second.
            (&["a", "", "a"], Some(Empty { row: 1 })),
            (&["a", "a", ""], Some(Repeat { row: 1, first: 0 })),
            // Empty ids repeat like any other; the first empty one is reported.
            (&["b", "", "", "b"], Some(Empty { row: 1 })),
        ];
        let dir = tempfile::tempdir().unwrap();
        for (ids, want) in cases {
            let ids = strings(ids);
            assert_eq!(reference(&ids), want, "reference on {ids:?}");
            for budget in BUDGETS {
                for batch in [1, 2, 5] {
                    let (got, runs) = check(&dir.path().join("out"), &ids, budget, &[batch]);
                    assert_eq!(got, want, "{ids:?}, budget {budget}, batch {batch}");
                    if budget == 1 {
                        assert_eq!(runs, ids.len(), "one run per id");
                    }
                }
            }
        }
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
    }

    #[test]
    fn equal_ids_in_different_runs_are_merged_in_row_order() {
        // One id per run: every pair of equal ids meets in the merge only.
        // Sorted by (id, row) the pairs are (3, 1), (5, 3) and (4, 0); were ties
        // between runs not broken by row, the `b`s could come out as 5, 3, 1 and
        // pair as (3, 5), (1, 3), and (0, 4) or (1, 3) would be reported.
        let ids = strings(&["c", "b", "a", "b", "c", "b"]);
        let dir = tempfile::tempdir().unwrap();
        let want = Some(IdProblem::Repeat { row: 3, first: 1 });
        assert_eq!(reference(&ids), want);
        for budget in BUDGETS {
            assert_eq!(check(&dir.path().join("out"), &ids, budget, &[1]).0, want);
            assert_eq!(check(&dir.path().join("out"), &ids, budget, &[6]).0, want);
        }
    }

    /// Knuth's MMIX linear congruential generator (D. E. Knuth, 1997, *The Art
    /// of Computer Programming*, vol. 2, 3rd ed., §3.3.4), high bits used: a
    /// fixed seed makes every run of the test the same.
    struct Lcg(u64);

    impl Lcg {
        fn below(&mut self, n: usize) -> usize {
            self.0 = self
                .0
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            ((self.0 >> 33) % n as u64) as usize
        }
    }

    /// An id of 0..=`longest` letters from the first `letters` of an alphabet
    /// with prefixes of each other and a non-ASCII letter, so byte order and
    /// lengths matter.
    fn random_id(rng: &mut Lcg, letters: usize, longest: usize) -> String {
        const ALPHABET: [&str; 5] = ["a", "b", "é", "ab", "~"];
        let len = rng.below(longest + 1);
        (0..len).map(|_| ALPHABET[rng.below(letters)]).collect()
    }

    #[test]
    fn random_columns_match_the_in_memory_reference() {
        let mut rng = Lcg(2024);
        let dir = tempfile::tempdir().unwrap();
        let mut seen = [0usize; 3]; // no problem, empty, repeat
        for case in 0..1500 {
            let rows = rng.below(if case % 10 == 0 { 400 } else { 40 });
            let letters = 1 + rng.below(5);
            let longest = 1 + rng.below(6);
            let ids: Vec<String> = (0..rows)
                .map(|_| random_id(&mut rng, letters, longest))
                .collect();
            let want = reference(&ids);
            seen[match want {
                None => 0,
                Some(IdProblem::Empty { .. }) => 1,
                Some(IdProblem::Repeat { .. }) => 2,
            }] += 1;
            let batches: Vec<usize> = (0..4).map(|_| rng.below(6)).chain([1]).collect();
            for budget in BUDGETS {
                let (got, runs) = check(&dir.path().join("out"), &ids, budget, &batches);
                assert_eq!(got, want, "case {case}, budget {budget}: {ids:?}");
                if budget == 1 {
                    assert_eq!(runs, rows);
                } else if budget == usize::MAX {
                    assert_eq!(runs, 0);
                }
            }
        }
        // Every outcome was tested often.
        assert!(seen.iter().all(|&n| n > 100), "{seen:?}");
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
    }

    #[test]
    fn long_ids_cross_the_read_buffers() {
        // Ids of hundreds to thousands of bytes, longer than the merge's read
        // buffers, and the last of them repeats the third.
        let mut rng = Lcg(7);
        let mut ids: Vec<String> = (0..60)
            .map(|i| {
                let len = 200 + rng.below(3000);
                format!("{i:03}{}", "x".repeat(len))
            })
            .collect();
        ids.push(ids[2].clone());
        let want = Some(IdProblem::Repeat { row: 60, first: 2 });
        assert_eq!(reference(&ids), want);
        let dir = tempfile::tempdir().unwrap();
        for budget in [1, 5000, 20_000, usize::MAX] {
            let (got, runs) = check(&dir.path().join("out"), &ids, budget, &[3, 1, 4]);
            assert_eq!(got, want, "budget {budget}");
            assert_eq!(
                runs > 1,
                budget < usize::MAX,
                "budget {budget}: {runs} runs"
            );
        }
    }

    #[test]
    fn the_scratch_file_is_removed_after_finish_and_on_drop() {
        let dir = tempfile::tempdir().unwrap();
        let count = || std::fs::read_dir(dir.path()).unwrap().count();
        let ids = strings(&["q", "r", "s", "t", "q"]);
        for finish in [true, false] {
            let mut check = IdCheck::new(&dir.path().join("out"), 1);
            check.push(ids.iter().map(String::as_str)).unwrap();
            assert_eq!(check.runs(), 5);
            assert_eq!(count(), 1, "the runs are in one scratch file");
            if finish {
                let got = check.finish().unwrap();
                assert_eq!(got, Some(IdProblem::Repeat { row: 4, first: 0 }));
            } else {
                drop(check);
            }
            assert_eq!(count(), 0, "finish: {finish}");
        }
        // Nothing is written while the ids fit the budget.
        let mut check = IdCheck::new(&dir.path().join("out"), 1 << 20);
        check.push(ids.iter().map(String::as_str)).unwrap();
        assert_eq!(count(), 0);
        assert!(check.finish().unwrap().is_some());
    }
}
