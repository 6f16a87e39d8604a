//! A dense row-major matrix: the one layout every kernel here works on.

/// A dense matrix of `rows × cols` values stored row by row.
#[derive(Debug, Clone, PartialEq)]
pub struct Matrix {
    pub rows: usize,
    pub cols: usize,
    pub data: Vec<f64>,
}

impl Matrix {
    pub fn zeros(rows: usize, cols: usize) -> Matrix {
        Matrix {
            rows,
            cols,
            data: vec![0.0; rows * cols],
        }
    }

    /// Builds a row-major matrix from columns of equal length. Rows are filled in
    /// blocks, with one parallel task per block, so that writes stay within a
    /// cache-sized stretch of memory (a plain column-by-column copy strides
    /// through the whole matrix for every value).
    pub fn from_columns(columns: &[Vec<f64>]) -> Matrix {
        use rayon::prelude::*;
        const BLOCK: usize = 256;
        let cols = columns.len();
        let rows = columns.first().map_or(0, Vec::len);
        let mut data = vec![0.0; rows * cols];
        if cols > 0 {
            data.par_chunks_mut(BLOCK * cols)
                .enumerate()
                .for_each(|(b, block)| {
                    let first = b * BLOCK;
                    for (j, column) in columns.iter().enumerate() {
                        for (r, &v) in column[first..first + block.len() / cols].iter().enumerate()
                        {
                            block[r * cols + j] = v;
                        }
                    }
                });
        }
        Matrix { rows, cols, data }
    }

    pub fn get(&self, i: usize, j: usize) -> f64 {
        self.data[i * self.cols + j]
    }

    pub fn set(&mut self, i: usize, j: usize, v: f64) {
        self.data[i * self.cols + j] = v;
    }

    pub fn row(&self, i: usize) -> &[f64] {
        &self.data[i * self.cols..(i + 1) * self.cols]
    }

    pub fn column(&self, j: usize) -> Vec<f64> {
        (0..self.rows).map(|i| self.get(i, j)).collect()
    }

    /// Columns `from..to` as a matrix of their own.
    pub fn columns(&self, from: usize, to: usize) -> Matrix {
        let data = (0..self.rows)
            .flat_map(|i| self.row(i)[from..to].iter().copied())
            .collect();
        Matrix {
            rows: self.rows,
            cols: to - from,
            data,
        }
    }

    pub fn transpose(&self) -> Matrix {
        let mut t = Matrix::zeros(self.cols, self.rows);
        for i in 0..self.rows {
            for j in 0..self.cols {
                t.set(j, i, self.get(i, j));
            }
        }
        t
    }
}
