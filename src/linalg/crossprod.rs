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

/// Feeds `rows` (row-major, `p` values each) after the rows in `pending` to
/// `combine` as runs of whole `BLOCK_ROWS`-row blocks, and keeps in `pending`
/// the rows that do not make a whole block yet. So the blocks are the same
/// whatever runs the rows arrive in (the accumulators' bits depend only on
/// the blocks and their order).
pub fn whole_blocks(
    pending: &mut Vec<f64>,
    rows: &[f64],
    p: usize,
    mut combine: impl FnMut(&[f64]),
) {
    let block = BLOCK_ROWS * p.max(1);
    let mut rows = rows;
    if !pending.is_empty() {
        let take = (block - pending.len()).min(rows.len());
        pending.extend_from_slice(&rows[..take]);
        rows = &rows[take..];
        if pending.len() < block {
            return;
        }
        combine(pending);
        pending.clear();
    }
    let whole = rows.len() / block * block;
    combine(&rows[..whole]);
    pending.extend_from_slice(&rows[whole..]);
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
        let mut pending = std::mem::take(&mut self.pending);
        whole_blocks(&mut pending, rows, self.p, |blocks| self.combine(blocks));
        self.pending = pending;
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
/// Every entry (i, j), j ≥ i, is `((0 + x₀ᵢx₀ⱼ) + x₁ᵢx₁ⱼ) + …` over the block's
/// rows in order: one fixed sequence of roundings, however the work below is
/// tiled or split across threads.
///
/// Our own kernel rather than a BLAS product, because a library's product
/// changes its summation order (and its use of FMA) with the CPU it detects.
/// The speed comes from the layout instead: the block is copied into panels of
/// `TILE` columns, `ROWS_AT_ONCE` rows at a time, so that a `TILE × TILE` tile
/// of sums stays in registers while the rows stream past, and a group of
/// `GROUP` panels stays in cache while every later panel meets it. Groups of
/// the triangle's rows run in parallel: each writes only its own rows.
fn block_upper(block: &[f64], p: usize) -> Vec<f64> {
    let mut acc = vec![0.0; p * p];
    if p == 0 {
        return acc;
    }
    let panels = p.div_ceil(TILE);
    let mut packed = vec![0.0; ROWS_AT_ONCE * panels * TILE];
    for rows in block.chunks(ROWS_AT_ONCE * p) {
        let m = rows.len() / p;
        pack_panels(rows, p, m, &mut packed);
        let packed = &packed[..m * panels * TILE];
        acc.par_chunks_mut(GROUP * TILE * p)
            .enumerate()
            .for_each(|(g, band)| {
                let first_panel = g * GROUP;
                let last_panel = (first_panel + GROUP).min(panels);
                for jp in first_panel..panels {
                    let b = &packed[jp * m * TILE..(jp + 1) * m * TILE];
                    for ip in first_panel..last_panel.min(jp + 1) {
                        let a = &packed[ip * m * TILE..(ip + 1) * m * TILE];
                        add_tile(
                            a,
                            b,
                            band,
                            p,
                            (ip - first_panel) * TILE,
                            ip * TILE,
                            jp * TILE,
                        );
                    }
                }
            });
    }
    acc
}

/// Columns per panel, and the side of a tile of sums held in registers.
const TILE: usize = 4;
/// Rows copied into panels at once (the panels of a group then fit in cache).
const ROWS_AT_ONCE: usize = 256;
/// Panels per group of the triangle's rows.
const GROUP: usize = 8;

/// Copies `m` rows of width `p` into panels of `TILE` columns: panel `c` holds,
/// row after row, the row's values in columns `c·TILE ..`, padded with zeros.
fn pack_panels(rows: &[f64], p: usize, m: usize, packed: &mut [f64]) {
    let panels = p.div_ceil(TILE);
    for c in 0..panels {
        let panel = &mut packed[c * m * TILE..(c + 1) * m * TILE];
        let from = c * TILE;
        let width = TILE.min(p - from);
        for (r, out) in panel.chunks_exact_mut(TILE).enumerate() {
            let row = &rows[r * p + from..r * p + from + width];
            out[..width].copy_from_slice(row);
            out[width..].fill(0.0);
        }
    }
}

/// Adds the products of panel `a` (columns `i0..`) and panel `b` (columns
/// `j0..`) over all their rows, in row order, to the tile of sums at rows
/// `i0..` (row `local_i` of `band`) and columns `j0..`. Entries outside the
/// matrix or below its diagonal are computed on padding and dropped.
fn add_tile(
    a: &[f64],
    b: &[f64],
    band: &mut [f64],
    p: usize,
    local_i: usize,
    i0: usize,
    j0: usize,
) {
    let rows_here = TILE.min(p - i0);
    let cols_here = TILE.min(p - j0);
    let mut sums = [[0.0f64; TILE]; TILE];
    for (ii, s) in sums.iter_mut().enumerate().take(rows_here) {
        let at = (local_i + ii) * p + j0;
        s[..cols_here].copy_from_slice(&band[at..at + cols_here]);
    }
    for (ar, br) in a.chunks_exact(TILE).zip(b.chunks_exact(TILE)) {
        for ii in 0..TILE {
            for jj in 0..TILE {
                sums[ii][jj] += ar[ii] * br[jj];
            }
        }
    }
    for (ii, s) in sums.iter().enumerate().take(rows_here) {
        // Only the upper triangle is kept (columns at or right of the diagonal).
        let i = i0 + ii;
        for (jj, &v) in s.iter().enumerate().take(cols_here) {
            if j0 + jj >= i {
                band[(local_i + ii) * p + j0 + jj] = v;
            }
        }
    }
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
                row_times(xi, &v.data, row);
            }
        });
    out
}

/// One row of X·V: `out[a] = Σⱼ xⱼ·vⱼₐ` over the features in order from +0, for
/// V row-major p × k with k = `out.len()` (the arithmetic of [`times`]).
pub fn row_times(x: &[f64], v: &[f64], out: &mut [f64]) {
    // The usual numbers of components get sums of a fixed count, which the
    // compiler keeps in registers; each sum adds the same terms in the same
    // order either way.
    match out.len() {
        0 => {}
        1 => row_times_fixed::<1>(x, v, out),
        2 => row_times_fixed::<2>(x, v, out),
        3 => row_times_fixed::<3>(x, v, out),
        4 => row_times_fixed::<4>(x, v, out),
        5 => row_times_fixed::<5>(x, v, out),
        6 => row_times_fixed::<6>(x, v, out),
        7 => row_times_fixed::<7>(x, v, out),
        8 => row_times_fixed::<8>(x, v, out),
        9 => row_times_fixed::<9>(x, v, out),
        10 => row_times_fixed::<10>(x, v, out),
        11 => row_times_fixed::<11>(x, v, out),
        12 => row_times_fixed::<12>(x, v, out),
        k => {
            out.fill(0.0);
            for (&xj, vj) in x.iter().zip(v.chunks_exact(k)) {
                for (slot, &vja) in out.iter_mut().zip(vj) {
                    *slot += xj * vja;
                }
            }
        }
    }
}

/// [`row_times`] for `K` components.
fn row_times_fixed<const K: usize>(x: &[f64], v: &[f64], out: &mut [f64]) {
    let mut sums = [0.0f64; K];
    for (&xj, vj) in x.iter().zip(v.chunks_exact(K)) {
        for a in 0..K {
            sums[a] += xj * vj[a];
        }
    }
    out.copy_from_slice(&sums);
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

    /// The plain definition of a block's triangle: each entry summed from +0
    /// over the block's rows in order.
    fn block_upper_plain(block: &[f64], p: usize) -> Vec<f64> {
        let mut acc = vec![0.0; p * p];
        for row in block.chunks_exact(p) {
            for i in 0..p {
                for j in i..p {
                    acc[i * p + j] += row[i] * row[j];
                }
            }
        }
        acc
    }

    #[test]
    fn tiled_block_has_the_plain_sums_bit_for_bit() {
        // Widths around the tile and group sizes, row counts around the rows
        // packed at once, values with many significant bits.
        for p in [1, 3, 4, 5, 31, 32, 33, 37, 70] {
            for m in [1, 255, 256, 257, 700, 1024] {
                let block: Vec<f64> = (0..m * p)
                    .map(|i| ((i as f64) * 0.618_033_988_749_894_9).sin() * 1e3 + 1.0 / 3.0)
                    .collect();
                let tiled = block_upper(&block, p);
                let plain = block_upper_plain(&block, p);
                for i in 0..p {
                    for j in i..p {
                        assert_eq!(
                            tiled[i * p + j].to_bits(),
                            plain[i * p + j].to_bits(),
                            "p {p}, m {m}, entry ({i}, {j})"
                        );
                    }
                }
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
    fn row_products_have_the_plain_sums_bit_for_bit() {
        let x = sample(3, 37);
        for k in 0..=14 {
            let v = sample(37, k.max(1));
            let v = &v.data[..37 * k];
            for row in x.data.chunks_exact(37) {
                let mut got = vec![f64::NAN; k];
                row_times(row, v, &mut got);
                let mut want = vec![0.0; k];
                for (j, &xj) in row.iter().enumerate() {
                    for a in 0..k {
                        want[a] += xj * v[j * k + a];
                    }
                }
                let bits = |s: &[f64]| s.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
                assert_eq!(bits(&got), bits(&want), "k = {k}");
            }
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
