//! Cross-products XᵀX and products X·V in a fixed order.
//!
//! XᵀX is accumulated over fixed blocks of `BLOCK_ROWS` rows: each block sums its
//! rows in order into its own upper triangle, and the block partials are added in
//! block order. Blocks may run on any number of threads; the bits stay the same.

use super::Matrix;
use rayon::prelude::*;

/// Rows per block. Part of the numeric definition: changing it changes the last
/// bits of results, so it is a constant, not a tuning knob.
pub const BLOCK_ROWS: usize = 1024;

/// XᵀX (p × p, symmetric) of a row-major n × p matrix.
pub fn gram_of_columns(x: &Matrix) -> Matrix {
    let mut gram = GramAccumulator::new(x.cols);
    gram.add_rows(&x.data);
    gram.finish()
}

/// XᵀX of rows fed in order, a run at a time: the same blocks, the same order of
/// combination and so the same bits as [`gram_of_columns`] of all the rows at once.
pub struct GramAccumulator {
    p: usize,
    upper: Vec<f64>,
    /// Rows not yet making a whole block.
    pending: Vec<f64>,
}

impl GramAccumulator {
    pub fn new(p: usize) -> GramAccumulator {
        GramAccumulator {
            p,
            upper: vec![0.0; p * p],
            pending: Vec::new(),
        }
    }

    /// Adds rows (row-major, `p` values each), in table order.
    pub fn add_rows(&mut self, rows: &[f64]) {
        let block = BLOCK_ROWS * self.p.max(1);
        let mut rows = rows;
        if !self.pending.is_empty() {
            let take = (block - self.pending.len()).min(rows.len());
            self.pending.extend_from_slice(&rows[..take]);
            rows = &rows[take..];
            if self.pending.len() < block {
                return;
            }
            let full = std::mem::take(&mut self.pending);
            self.combine(&full);
        }
        let whole = rows.len() / block * block;
        self.combine(&rows[..whole]);
        self.pending.extend_from_slice(&rows[whole..]);
    }

    /// Adds the partials of whole blocks (the last one may be short) in order.
    fn combine(&mut self, rows: &[f64]) {
        let p = self.p;
        let partials: Vec<Vec<f64>> = rows
            .par_chunks(BLOCK_ROWS * p.max(1))
            .map(|block| block_upper(block, p))
            .collect();
        for partial in &partials {
            for (acc, v) in self.upper.iter_mut().zip(partial) {
                *acc += v;
            }
        }
    }

    /// XᵀX of every row added.
    pub fn finish(mut self) -> Matrix {
        let rest = std::mem::take(&mut self.pending);
        self.combine(&rest);
        symmetric_from_upper(self.upper, self.p)
    }
}

/// Upper triangle of Σ rowᵀrow over the rows of one block, rows taken in order.
///
/// The triangle is updated in bands of `BAND` of its rows, each band over all the
/// block's rows before the next, so that the part being updated stays in cache
/// when p is large. Every entry still sums the same products in the same (row)
/// order, so the band size changes the speed, never a bit.
fn block_upper(block: &[f64], p: usize) -> Vec<f64> {
    const BAND: usize = 32;
    let mut acc = vec![0.0; p * p];
    // Bands write disjoint rows of the triangle, so they may also run at the
    // same time (which matters when a table has few blocks and many features).
    acc.par_chunks_mut(BAND * p.max(1))
        .enumerate()
        .for_each(|(b, band)| {
            let first = b * BAND;
            let last = (first + BAND).min(p);
            for row in block.chunks_exact(p) {
                for i in first..last {
                    let xi = row[i];
                    let target = &mut band[(i - first) * p + i..(i - first + 1) * p];
                    for (a, &xj) in target.iter_mut().zip(&row[i..]) {
                        *a += xi * xj;
                    }
                }
            }
        });
    acc
}

fn symmetric_from_upper(mut m: Vec<f64>, p: usize) -> Matrix {
    for i in 0..p {
        for j in 0..i {
            m[i * p + j] = m[j * p + i];
        }
    }
    Matrix {
        rows: p,
        cols: p,
        data: m,
    }
}

/// XXᵀ (n × n) of a row-major n × p matrix: the cross-products of the columns
/// of Xᵀ, summed over features in the same fixed blocks as [`gram_of_columns`].
/// Used for tables with more features than rows.
pub fn gram_of_rows(x: &Matrix) -> Matrix {
    gram_of_columns(&x.transpose())
}

/// X·V for a row-major n × p matrix X and p × k matrix V; each entry is a dot
/// product summed in feature order, starting from +0 (as [`dot`]). The k sums of
/// a row are carried side by side, feature after feature: the same additions in
/// the same order as k separate dot products, without waiting on each other.
pub fn times(x: &Matrix, v: &Matrix) -> Matrix {
    assert_eq!(x.cols, v.rows, "inner dimensions differ");
    let k = v.cols;
    let mut out = Matrix::zeros(x.rows, k);
    if k == 0 {
        return out;
    }
    out.data
        .par_chunks_mut(k * 256)
        .zip(x.data.par_chunks(x.cols.max(1) * 256))
        .for_each(|(rows_out, rows_in)| {
            for (row, xi) in rows_out
                .chunks_exact_mut(k)
                .zip(rows_in.chunks_exact(x.cols.max(1)))
            {
                row.fill(0.0);
                for (&xj, vj) in xi.iter().zip(v.data.chunks_exact(k)) {
                    for (slot, &vja) in row.iter_mut().zip(vj) {
                        *slot += xj * vja;
                    }
                }
            }
        });
    out
}

/// Xᵀ·U for a row-major n × p matrix X and n × k matrix U; each entry summed in row order.
pub fn transpose_times(x: &Matrix, u: &Matrix) -> Matrix {
    times(&x.transpose(), u)
}

/// A dot product summed strictly left to right.
pub fn dot(a: &[f64], b: &[f64]) -> f64 {
    let mut s = 0.0;
    for (x, y) in a.iter().zip(b) {
        s += x * y;
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sample(n: usize, p: usize) -> Matrix {
        let data = (0..n * p)
            .map(|i| ((i * 7919) % 101) as f64 / 10.0 - 5.0)
            .collect();
        Matrix {
            rows: n,
            cols: p,
            data,
        }
    }

    #[test]
    fn gram_matches_naive_sum() {
        let x = sample(2500, 5);
        let g = gram_of_columns(&x);
        for i in 0..5 {
            for j in 0..5 {
                let naive: f64 = (0..x.rows).map(|r| x.get(r, i) * x.get(r, j)).sum();
                assert!((g.get(i, j) - naive).abs() <= 1e-9 * naive.abs().max(1.0));
            }
        }
    }

    #[test]
    fn gram_is_the_same_on_one_thread() {
        let x = sample(5000, 7);
        let many = gram_of_columns(&x);
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(1)
            .build()
            .unwrap();
        let one = pool.install(|| gram_of_columns(&x));
        assert_eq!(many.data, one.data);
    }

    #[test]
    fn fed_in_runs_gives_the_same_bits() {
        let x = sample(5000, 7);
        let whole = gram_of_columns(&x);
        for runs in [vec![5000], vec![1, 1023, 1, 2048, 1927], vec![999, 2, 3999]] {
            let mut acc = GramAccumulator::new(7);
            let mut at = 0;
            for r in runs {
                acc.add_rows(&x.data[at * 7..(at + r) * 7]);
                at += r;
            }
            assert_eq!(acc.finish().data, whole.data);
        }
    }

    #[test]
    fn products_agree() {
        let x = sample(30, 4);
        let u = sample(30, 2);
        let xtu = transpose_times(&x, &u);
        let naive: f64 = (0..30).map(|r| x.get(r, 3) * u.get(r, 1)).sum();
        assert!((xtu.get(3, 1) - naive).abs() < 1e-12);
    }
}
