//! The analysed rows' results: each row's table row, scores, T², SPE, id and
//! group values, in row order. Both engines hand the outputs these rows in
//! chunks, so every table, figure and list that reads all rows does it in one
//! way; a table larger than the memory budget keeps them in a scratch file
//! (the same [`Store`] the table's numbers use), so that no output holds a
//! copy of every row. Each pass reads the file through a handle of its own, so
//! several may run at once.

use crate::store::{Chunk, Store};
use std::borrow::Cow;
use std::io;
use std::path::{Path, PathBuf};
use std::sync::Mutex;

/// Rows per chunk when the results are built from whole vectors.
const CHUNK_ROWS: usize = 1 << 16;

/// The results of every analysed row.
pub struct RowResults {
    /// Per row: the table row, the scores, T² and SPE; then the id (when the
    /// table has one) and the group values as texts.
    store: Store,
    /// Scores per row (the computed components).
    cols: usize,
    /// The id column's name, if any.
    pub id: Option<String>,
    /// The group columns' names.
    pub groups: Vec<String>,
    /// The results folder a spilled store's scratch file goes beside.
    scratch: PathBuf,
    /// The first error reading the scratch file back, for [`RowResults::scan`].
    failed: Mutex<Option<io::Error>>,
}

/// What one row brings to [`RowResults::push`].
pub struct RowsIn<'a> {
    /// The table row (0-based) of each row.
    pub table_rows: &'a [usize],
    /// Rows × `cols` scores.
    pub scores: &'a [f64],
    pub t2: &'a [f64],
    pub spe: &'a [f64],
    /// Rows × (id? + groups) texts.
    pub texts: Vec<String>,
}

impl RowResults {
    /// Empty results with `cols` scores per row, keeping up to `limit` bytes in
    /// memory and the rest in a scratch file beside the results folder
    /// `scratch` (named after it).
    pub fn new(
        cols: usize,
        id: Option<String>,
        groups: Vec<String>,
        limit: u64,
        scratch: &Path,
    ) -> RowResults {
        let texts = usize::from(id.is_some()) + groups.len();
        RowResults {
            store: Store::new(RowResults::row_width(cols), limit).with_texts(texts),
            cols,
            id,
            groups,
            scratch: scratch.to_path_buf(),
            failed: Mutex::new(None),
        }
    }

    /// Results held in memory, from whole columns (for `apply` and for tests): `table_rows` holds the table row of each row, `scores` is
    /// rows × `cols`; `ids` and each group hold a text per row.
    pub fn from_parts(
        cols: usize,
        table_rows: &[usize],
        scores: &[f64],
        t2: &[f64],
        spe: &[f64],
        id: Option<(String, Vec<String>)>,
        groups: Vec<(String, Vec<String>)>,
    ) -> RowResults {
        let n = t2.len();
        assert_eq!(scores.len(), n * cols, "scores for every row");
        assert_eq!(spe.len(), n, "an SPE for every row");
        assert_eq!(table_rows.len(), n, "a table row for every row");
        let (id_name, ids) = id.map_or((None, None), |(name, ids)| (Some(name), Some(ids)));
        let names = groups.iter().map(|(name, _)| name.clone()).collect();
        let mut results = RowResults::new(cols, id_name, names, u64::MAX, Path::new("."));
        for first in (0..n).step_by(CHUNK_ROWS) {
            let last = n.min(first + CHUNK_ROWS);
            let mut texts = Vec::new();
            for i in first..last {
                texts.extend(ids.iter().map(|v| v[i].clone()));
                texts.extend(groups.iter().map(|(_, v)| v[i].clone()));
            }
            results
                .push(RowsIn {
                    table_rows: &table_rows[first..last],
                    scores: &scores[first * cols..last * cols],
                    t2: &t2[first..last],
                    spe: &spe[first..last],
                    texts,
                })
                .expect("results in memory are never written to a file");
        }
        results
    }

    /// Adds the next rows.
    pub fn push(&mut self, rows: RowsIn) -> io::Result<()> {
        let m = rows.t2.len();
        let mut values = Vec::with_capacity(m * RowResults::row_width(self.cols));
        for i in 0..m {
            values.push(rows.table_rows[i] as f64);
            values.extend_from_slice(&rows.scores[i * self.cols..(i + 1) * self.cols]);
            values.extend([rows.t2[i], rows.spe[i]]);
        }
        self.push_rows(values, rows.texts)
    }

    /// The numbers kept per row with `cols` scores: the table row, the
    /// scores, T² and SPE.
    pub fn row_width(cols: usize) -> usize {
        cols + 3
    }

    /// Adds the next rows already laid out as the results keep them: per row,
    /// [`RowResults::row_width`] numbers (the table row as a number, the
    /// scores, T², SPE) and the texts (id?, groups).
    pub fn push_rows(&mut self, values: Vec<f64>, texts: Vec<String>) -> io::Result<()> {
        let width = RowResults::row_width(self.cols);
        debug_assert_eq!(values.len() % width, 0);
        let chunk = Chunk {
            rows: values.len() / width,
            values,
            texts,
            lines: Vec::new(),
        };
        self.store.push(chunk, &self.scratch)
    }

    /// The number of rows.
    pub fn len(&self) -> usize {
        self.store.rows()
    }

    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Scores per row.
    pub fn cols(&self) -> usize {
        self.cols
    }

    /// Whether the rows are in a scratch file.
    pub fn spilled(&self) -> bool {
        self.store.spilled()
    }

    /// Calls `f` with every run of rows, in order.
    pub fn each(&self, mut f: impl FnMut(&Batch)) -> io::Result<()> {
        let mut first = 0;
        self.store.pass(|chunk: &Chunk| -> io::Result<()> {
            f(&Batch {
                first,
                chunk,
                cols: self.cols,
                texts: self.store.text_width(),
                has_id: self.id.is_some(),
            });
            first += chunk.rows;
            Ok(())
        })
    }

    /// [`RowResults::each`] for drawing code that cannot return an error: a
    /// failure to read the scratch file is kept, and the caller asks for it
    /// with [`RowResults::take_error`] once the drawing is done.
    pub fn scan(&self, f: impl FnMut(&Batch)) {
        if let Err(e) = self.each(f) {
            let mut failed = self.failed.lock().expect("no scan panicked");
            failed.get_or_insert(e);
        }
    }

    /// The first error a [`RowResults::scan`] met, if any.
    pub fn take_error(&self) -> Option<io::Error> {
        self.failed.lock().expect("no scan panicked").take()
    }

    /// The index among the group columns of the column called `name`.
    pub fn group_index(&self, name: &str) -> Option<usize> {
        self.groups.iter().position(|g| g == name)
    }
}

impl Default for RowResults {
    fn default() -> RowResults {
        RowResults::from_parts(0, &[], &[], &[], &[], None, Vec::new())
    }
}

impl std::fmt::Debug for RowResults {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("RowResults")
            .field("rows", &self.len())
            .field("cols", &self.cols)
            .field("id", &self.id)
            .field("groups", &self.groups)
            .finish()
    }
}

/// A run of consecutive rows of [`RowResults`].
pub struct Batch<'a> {
    /// The index of the run's first row among all the rows.
    pub first: usize,
    chunk: &'a Chunk,
    cols: usize,
    texts: usize,
    has_id: bool,
}

impl<'a> Batch<'a> {
    /// Rows in the run.
    pub fn len(&self) -> usize {
        self.chunk.rows
    }

    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    fn values(&self, i: usize) -> &'a [f64] {
        let width = self.cols + 3;
        &self.chunk.values[i * width..(i + 1) * width]
    }

    /// The table row (0-based) of the run's row `i`.
    pub fn table_row(&self, i: usize) -> usize {
        self.values(i)[0] as usize
    }

    /// The scores of the run's row `i`.
    pub fn scores(&self, i: usize) -> &'a [f64] {
        &self.values(i)[1..1 + self.cols]
    }

    pub fn t2(&self, i: usize) -> f64 {
        self.values(i)[1 + self.cols]
    }

    pub fn spe(&self, i: usize) -> f64 {
        self.values(i)[2 + self.cols]
    }

    /// The id of the run's row `i`, when the table has an id column.
    pub fn id(&self, i: usize) -> Option<&'a str> {
        self.has_id
            .then(|| self.chunk.texts[i * self.texts].as_str())
    }

    /// What names the row in figures and lists: its id, or "row N" (N its
    /// 1-based table row) when there is no id column.
    pub fn label(&self, i: usize) -> Cow<'a, str> {
        match self.id(i) {
            Some(id) => Cow::Borrowed(id),
            None => Cow::Owned(format!("row {}", self.table_row(i) + 1)),
        }
    }

    /// The value of group column `g` in the run's row `i`.
    pub fn group(&self, g: usize, i: usize) -> &'a str {
        &self.chunk.texts[i * self.texts + usize::from(self.has_id) + g]
    }
}

/// Every filled cell: its table row, its feature and the value filled in, in
/// row order (features in order within a row). Like [`RowResults`], held in
/// memory or in a scratch file. The row's id and groups are not repeated here:
/// imputed.csv takes them from the rows' results ([`RowResults::labels`]).
pub struct FilledCells {
    /// Per cell: the table row, the feature's index and the value.
    store: Store,
    /// The features, by index.
    pub features: Vec<String>,
    scratch: PathBuf,
}

/// A filled cell for [`FilledCells::push`].
pub struct CellIn {
    pub table_row: usize,
    pub feature: usize,
    pub value: f64,
}

impl FilledCells {
    /// No cells yet; up to `limit` bytes kept in memory, the rest in a scratch
    /// file beside the results folder `scratch` (named after it).
    pub fn new(features: Vec<String>, limit: u64, scratch: &Path) -> FilledCells {
        FilledCells {
            store: Store::new(3, limit),
            features,
            scratch: scratch.to_path_buf(),
        }
    }

    /// Cells filled all at once (by `apply`), held in memory.
    pub fn from_cells(
        cells: &[crate::stages::missing::FilledCell],
        features: &[String],
    ) -> FilledCells {
        let mut out = FilledCells::new(features.to_vec(), u64::MAX, Path::new("."));
        let index: std::collections::BTreeMap<&str, usize> = features
            .iter()
            .enumerate()
            .map(|(j, f)| (f.as_str(), j))
            .collect();
        for run in cells.chunks(CHUNK_ROWS) {
            let batch: Vec<CellIn> = run
                .iter()
                .map(|c| CellIn {
                    table_row: c.row,
                    feature: index[&*c.feature],
                    value: c.value,
                })
                .collect();
            out.push(&batch)
                .expect("cells in memory are never written to a file");
        }
        out
    }

    /// Adds the next cells, in order.
    pub fn push(&mut self, cells: &[CellIn]) -> io::Result<()> {
        if cells.is_empty() {
            return Ok(());
        }
        let values = cells
            .iter()
            .flat_map(|c| [c.table_row as f64, c.feature as f64, c.value])
            .collect();
        self.store
            .push(Chunk::numbers(cells.len(), values), &self.scratch)
    }

    /// The number of cells.
    pub fn len(&self) -> usize {
        self.store.rows()
    }

    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Every cell as (table row, feature, value), for checks on small tables.
    pub fn list(&self) -> Vec<(usize, String, f64)> {
        let mut out = Vec::with_capacity(self.len());
        self.each(|b| {
            out.extend((0..b.len()).map(|i| (b.table_row(i), b.feature(i).to_string(), b.value(i))))
        })
        .expect("the cells can be read back");
        out
    }

    /// Calls `f` with every run of cells, in order.
    pub fn each(&self, mut f: impl FnMut(&CellBatch)) -> io::Result<()> {
        self.store.pass(|chunk: &Chunk| -> io::Result<()> {
            f(&CellBatch {
                chunk,
                features: &self.features,
            });
            Ok(())
        })
    }
}

/// A run of consecutive cells of [`FilledCells`].
pub struct CellBatch<'a> {
    chunk: &'a Chunk,
    features: &'a [String],
}

impl<'a> CellBatch<'a> {
    pub fn len(&self) -> usize {
        self.chunk.rows
    }

    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The table row (0-based) of cell `i`.
    pub fn table_row(&self, i: usize) -> usize {
        self.chunk.values[3 * i] as usize
    }

    /// The name of cell `i`'s feature.
    pub fn feature(&self, i: usize) -> &'a str {
        &self.features[self.feature_index(i)]
    }

    /// The index of cell `i`'s feature in [`FilledCells::features`].
    pub fn feature_index(&self, i: usize) -> usize {
        self.chunk.values[3 * i + 1] as usize
    }

    /// The value filled into cell `i`.
    pub fn value(&self, i: usize) -> f64 {
        self.chunk.values[3 * i + 2]
    }
}

/// The id and group texts of the rows, looked up by table row in increasing
/// order while the rows are read one chunk at a time ([`RowResults::labels`]).
pub struct Labels<'a> {
    cursor: crate::store::Cursor<'a>,
    chunk: Option<std::borrow::Cow<'a, Chunk>>,
    /// The next row of `chunk` to look at.
    at: usize,
    width: usize,
    texts: usize,
}

impl Labels<'_> {
    /// The texts (id?, groups) of the row from table row `table_row`; rows must
    /// be asked for in increasing order, and must be among the rows.
    pub fn of(&mut self, table_row: usize) -> io::Result<&[String]> {
        loop {
            if let Some(chunk) = &self.chunk {
                while self.at < chunk.rows {
                    let here = chunk.values[self.at * self.width] as usize;
                    if here == table_row {
                        let from = self.at * self.texts;
                        let chunk = self.chunk.as_ref().expect("looked at above");
                        return Ok(&chunk.texts[from..from + self.texts]);
                    }
                    if here > table_row {
                        break;
                    }
                    self.at += 1;
                }
                if self.at < chunk.rows {
                    return Err(io::Error::new(
                        io::ErrorKind::InvalidData,
                        format!("table row {} is not among the analysed rows", table_row + 1),
                    ));
                }
            }
            self.chunk = self.cursor.next_chunk()?;
            self.at = 0;
            if self.chunk.is_none() {
                return Err(io::Error::new(
                    io::ErrorKind::InvalidData,
                    format!("table row {} is past the analysed rows", table_row + 1),
                ));
            }
        }
    }
}

impl RowResults {
    /// A reader of the rows' texts by table row (see [`Labels`]).
    pub fn labels(&self) -> io::Result<Labels<'_>> {
        Ok(Labels {
            cursor: self.store.cursor()?,
            chunk: None,
            at: 0,
            width: self.cols + 3,
            texts: self.store.text_width(),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every row's values and texts as the batches give them.
    fn rows_of(results: &RowResults) -> Vec<(usize, usize, Vec<f64>, String, String)> {
        let mut out = Vec::new();
        results
            .each(|b| {
                for i in 0..b.len() {
                    let mut v = b.scores(i).to_vec();
                    v.extend([b.t2(i), b.spe(i)]);
                    out.push((
                        b.first + i,
                        b.table_row(i),
                        v,
                        b.label(i).into_owned(),
                        b.group(0, i).to_string(),
                    ));
                }
            })
            .unwrap();
        out
    }

    #[test]
    fn spilled_results_read_back_the_same() {
        let dir = tempfile::tempdir().unwrap();
        let n = 50;
        let scores: Vec<f64> = (0..2 * n).map(|i| i as f64 / 7.0 - 3.0).collect();
        let t2: Vec<f64> = (0..n).map(|i| i as f64 * 0.5).collect();
        let spe: Vec<f64> = (0..n).map(|i| 1.0 / (i + 1) as f64).collect();
        let ids: Vec<String> = (0..n).map(|i| format!("s{i}")).collect();
        let group: Vec<String> = (0..n).map(|i| ["a", "", "b"][i % 3].to_string()).collect();
        let all: Vec<usize> = (0..n).collect();
        let whole = RowResults::from_parts(
            2,
            &all,
            &scores,
            &t2,
            &spe,
            Some(("id".into(), ids.clone())),
            vec![("g".into(), group.clone())],
        );
        // The same rows in runs of 7 through a store that spills at once, with
        // every table row shifted by 10 (as when rows were dropped).
        let mut spilled = RowResults::new(
            2,
            Some("id".into()),
            vec!["g".into()],
            64,
            &dir.path().join("out"),
        );
        for first in (0..n).step_by(7) {
            let last = n.min(first + 7);
            let table_rows: Vec<usize> = (first + 10..last + 10).collect();
            spilled
                .push(RowsIn {
                    table_rows: &table_rows,
                    scores: &scores[2 * first..2 * last],
                    t2: &t2[first..last],
                    spe: &spe[first..last],
                    texts: (first..last)
                        .flat_map(|i| [ids[i].clone(), group[i].clone()])
                        .collect(),
                })
                .unwrap();
        }
        assert!(spilled.spilled() && !whole.spilled());
        let (a, b) = (rows_of(&whole), rows_of(&spilled));
        assert_eq!(a.len(), n);
        for (x, y) in a.iter().zip(&b) {
            assert_eq!(x.0, y.0);
            assert_eq!(x.1 + 10, y.1);
            assert_eq!((&x.2, &x.3, &x.4), (&y.2, &y.3, &y.4));
        }
        assert_eq!(a[49].2, vec![scores[98], scores[99], 24.5, 0.02]);
        assert_eq!(a[4].4, "");
        // Without an id, rows are named by their 1-based table row.
        let unnamed =
            RowResults::from_parts(2, &all, &scores, &t2, &spe, None, vec![("g".into(), group)]);
        assert_eq!(rows_of(&unnamed)[4].3, "row 5");
        drop(spilled);
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
    }
}
