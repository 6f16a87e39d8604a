//! The triangular factor R of a tall matrix X = QR, fed rows in order, and the
//! singular values and right singular vectors of R.
//!
//! Why: the eigenvalues of XᵀX computed from XᵀX itself carry absolute errors
//! near ε·λ₁ (forming XᵀX squares the condition number), so eigenvalues below
//! about 1e-8·λ₁ keep few correct digits. The singular values of R are those
//! of X, and a backward-stable factorisation keeps their errors near ε·σ₁
//! instead, so λ = σ² keeps its digits down to λ₁·1e-10 and beyond (Golub &
//! Van Loan 2013, "Matrix Computations", 4th ed., §5.4 and §8.6).
//!
//! The factor is built from fixed blocks of [`super::crossprod::BLOCK_ROWS`]
//! rows: each block is reduced to its own triangular factor (blocks in
//! parallel), and those are taken in block order, R ← the R of [R; R_block],
//! by Householder reflections that keep the structure (each reflection meets
//! one row of R and the rows below). So the bits depend only on the rows and
//! their order, never on how the rows arrive or on the threads (a tall-skinny
//! QR with a fixed reduction order; Demmel, Grigori, Hoemmen & Langou 2012,
//! "Communication-optimal parallel and sequential QR and LU factorizations",
//! SIAM J. Sci. Comput. 34(1):A206–A239). The singular value decomposition of the
//! p × p factor is one-sided Jacobi (Hestenes 1958; Demmel & Veselić 1992,
//! "Jacobi's method is more accurate than QR", SIAM J. Matrix Anal. Appl.
//! 13(4):1204–1245): pairs of columns rotated in a fixed cyclic order until
//! every pair is orthogonal to working precision.

use super::Matrix;
use super::crossprod::{BLOCK_ROWS, whole_blocks};
use crate::error::AnalysisError;
use rayon::prelude::*;

/// R of the rows fed so far, p × p upper triangular, and rows not yet making a
/// whole block.
#[derive(Debug, Clone)]
pub struct QrAccumulator {
    p: usize,
    /// Row-major p × p; entries below the diagonal stay zero.
    r: Vec<f64>,
    pending: Vec<f64>,
}

impl QrAccumulator {
    pub fn new(p: usize) -> QrAccumulator {
        QrAccumulator {
            p,
            r: vec![0.0; p * p],
            pending: Vec::new(),
        }
    }

    /// Adds rows (row-major, `p` values each), in table order.
    pub fn add_rows(&mut self, rows: &[f64]) {
        let mut pending = std::mem::take(&mut self.pending);
        whole_blocks(&mut pending, rows, self.p, |blocks| self.combine(blocks));
        self.pending = pending;
    }

    /// Reduces whole blocks (the last may be short) each to its own R, on any
    /// threads, then takes them into this R in block order: R ← the R of
    /// [R; R_block]. The bits depend only on the blocks and their order.
    fn combine(&mut self, rows: &[f64]) {
        let p = self.p;
        let factors: Vec<Vec<f64>> = rows
            .par_chunks(BLOCK_ROWS * p.max(1))
            .map(|block| {
                let mut own = QrAccumulator::new(p);
                own.absorb(block);
                own.r
            })
            .collect();
        for r in &factors {
            self.absorb(r);
        }
    }

    /// Adds the rows of `other`, which come after this one's: the R of
    /// [R₁; R₂] (each part's rows already reduced in its own blocks).
    pub fn merge(&mut self, other: &QrAccumulator) {
        let rest = std::mem::take(&mut self.pending);
        self.combine(&rest);
        let mut other = other.clone();
        let tail = std::mem::take(&mut other.pending);
        other.combine(&tail);
        self.absorb(&other.r);
    }

    /// R of every row added (row-major p × p, upper triangular).
    pub fn finish(mut self) -> Matrix {
        let rest = std::mem::take(&mut self.pending);
        self.combine(&rest);
        Matrix {
            rows: self.p,
            cols: self.p,
            data: self.r,
        }
    }

    /// R ← the R of [R; rows], column by column: the reflection of column j
    /// mixes row j of R with the rows' column j, so R stays triangular and the
    /// rows' column j becomes zero.
    fn absorb(&mut self, rows: &[f64]) {
        let p = self.p;
        if p == 0 || rows.is_empty() {
            return;
        }
        let m = rows.len() / p;
        // Column-major copy of the rows, so each column is contiguous.
        let mut b = vec![0.0; m * p];
        for (i, row) in rows.chunks_exact(p).enumerate() {
            for (j, &v) in row.iter().enumerate() {
                b[j * m + i] = v;
            }
        }
        for j in 0..p {
            let (done, rest) = b.split_at_mut((j + 1) * m);
            let v = &done[j * m..];
            let x0 = self.r[j * p + j];
            let tail = dot(v, v);
            if tail == 0.0 {
                continue;
            }
            let norm = (x0 * x0 + tail).sqrt();
            let beta = if x0 >= 0.0 { -norm } else { norm };
            let v0 = x0 - beta;
            // H = I − 2uuᵀ/(uᵀu) with u = [v0; v]; uᵀu = v0² + tail.
            let scale = 2.0 / (v0 * v0 + tail);
            self.r[j * p + j] = beta;
            for (c, col) in rest.chunks_exact_mut(m).enumerate() {
                let c = j + 1 + c;
                let rjc = self.r[j * p + c];
                let s = scale * (v0 * rjc + dot(v, col));
                self.r[j * p + c] = rjc - s * v0;
                for (x, &u) in col.iter_mut().zip(v) {
                    *x -= s * u;
                }
            }
        }
    }
}

/// Σ aᵢbᵢ in index order, in four interleaved partial sums added at the end
/// in a fixed order: the same bits on every CPU and thread count.
fn dot(a: &[f64], b: &[f64]) -> f64 {
    let mut s = [0.0f64; 4];
    let (a4, b4) = (a.chunks_exact(4), b.chunks_exact(4));
    let (ar, br) = (a4.remainder(), b4.remainder());
    for (x, y) in a4.zip(b4) {
        for k in 0..4 {
            s[k] += x[k] * y[k];
        }
    }
    for (k, (x, y)) in ar.iter().zip(br).enumerate() {
        s[k] += x * y;
    }
    (s[0] + s[1]) + (s[2] + s[3])
}

/// The singular values of a square matrix, descending, and its right singular
/// vectors as the columns of a matrix in the same order.
#[derive(Debug, Clone)]
pub struct Singular {
    pub values: Vec<f64>,
    pub vectors: Matrix,
}

/// Sweeps of one-sided Jacobi before giving up; a triangular factor of
/// full rank needs about ten in double precision.
const MAX_SWEEPS: usize = 60;

/// The singular value decomposition of the p × p matrix `r` (row-major) by
/// one-sided Jacobi: the columns of W = R·V are rotated pairwise, in the
/// order (0,1), (0,2), …, (p−2, p−1), until every pair is orthogonal within
/// ε of their lengths; σⱼ = ‖wⱼ‖ and V is the product of the rotations.
pub fn singular_values(r: &Matrix) -> Result<Singular, AnalysisError> {
    let p = r.cols;
    // Column-major copies: column j of W at w[j·n ..], of V at v[j·p ..].
    let n = r.rows;
    let mut w = vec![0.0; n * p];
    for i in 0..n {
        for j in 0..p {
            w[j * n + i] = r.get(i, j);
        }
    }
    let mut v = vec![0.0; p * p];
    for j in 0..p {
        v[j * p + j] = 1.0;
    }
    let mut sweeps = 0;
    loop {
        let mut rotated = false;
        for i in 0..p {
            for j in i + 1..p {
                rotated |= rotate_pair(&mut w, n, i, j, &mut v, p);
            }
        }
        sweeps += 1;
        if !rotated {
            break;
        }
        if sweeps == MAX_SWEEPS {
            return Err(AnalysisError::JacobiNoConvergence { sweeps });
        }
    }
    let norms: Vec<f64> = (0..p)
        .map(|j| {
            let c = &w[j * n..(j + 1) * n];
            dot(c, c).sqrt()
        })
        .collect();
    let mut order: Vec<usize> = (0..p).collect();
    // Descending; equal values keep the column order.
    order.sort_by(|&a, &b| norms[b].total_cmp(&norms[a]));
    let mut vectors = Matrix::zeros(p, p);
    for (k, &j) in order.iter().enumerate() {
        for i in 0..p {
            vectors.set(i, k, v[j * p + i]);
        }
    }
    Ok(Singular {
        values: order.iter().map(|&j| norms[j]).collect(),
        vectors,
    })
}

/// Makes columns `i` and `j` of W orthogonal (and applies the same rotation to
/// V) unless they already are within ε of their lengths; whether it rotated.
fn rotate_pair(w: &mut [f64], n: usize, i: usize, j: usize, v: &mut [f64], p: usize) -> bool {
    let (alpha, beta, gamma) = {
        let (a, b) = (&w[i * n..(i + 1) * n], &w[j * n..(j + 1) * n]);
        (dot(a, a), dot(b, b), dot(a, b))
    };
    if gamma == 0.0 || gamma.abs() <= f64::EPSILON * (alpha * beta).sqrt() {
        return false;
    }
    // The rotation that diagonalises [[α, γ], [γ, β]] (Golub & Van Loan
    // 2013, Algorithm 8.5.1), applied to the columns.
    let zeta = (beta - alpha) / (2.0 * gamma);
    let t = zeta.signum() / (zeta.abs() + (1.0 + zeta * zeta).sqrt());
    let c = 1.0 / (1.0 + t * t).sqrt();
    let s = c * t;
    rotate_columns(w, n, i, j, c, s);
    rotate_columns(v, p, i, j, c, s);
    true
}

/// Columns (a, b) ← (c·a − s·b, s·a + c·b) of a column-major matrix with
/// columns of length `len`.
fn rotate_columns(m: &mut [f64], len: usize, i: usize, j: usize, c: f64, s: f64) {
    let (left, right) = m.split_at_mut(j * len);
    let a = &mut left[i * len..(i + 1) * len];
    let b = &mut right[..len];
    for (x, y) in a.iter_mut().zip(b.iter_mut()) {
        let (xa, yb) = (*x, *y);
        *x = c * xa - s * yb;
        *y = s * xa + c * yb;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sample(n: usize, p: usize) -> Vec<f64> {
        (0..n * p)
            .map(|i| ((i * 7919) % 101) as f64 / 10.0 - 5.0 + (i % p) as f64)
            .collect()
    }

    /// RᵀR equals XᵀX (to rounding), and R is upper triangular.
    #[test]
    fn r_reproduces_the_cross_products() {
        let (n, p) = (2500, 5);
        let x = sample(n, p);
        let mut acc = QrAccumulator::new(p);
        acc.add_rows(&x);
        let r = acc.finish();
        for i in 0..p {
            for j in 0..p {
                if i > j {
                    assert_eq!(r.get(i, j), 0.0);
                }
                let rr: f64 = (0..p).map(|k| r.get(k, i) * r.get(k, j)).sum();
                let xx: f64 = (0..n).map(|k| x[k * p + i] * x[k * p + j]).sum();
                assert!((rr - xx).abs() <= 1e-10 * xx.abs().max(1.0), "{rr} {xx}");
            }
        }
    }

    /// Fed in chunks of any size, the same bits as fed at once.
    #[test]
    fn chunks_give_the_same_bits() {
        let (n, p) = (2100, 3);
        let x = sample(n, p);
        let mut whole = QrAccumulator::new(p);
        whole.add_rows(&x);
        let whole = whole.finish();
        for chunk in [1, 7, 1024, 1500] {
            let mut acc = QrAccumulator::new(p);
            for part in x.chunks(chunk * p) {
                acc.add_rows(part);
            }
            let r = acc.finish();
            assert!(
                r.data
                    .iter()
                    .zip(&whole.data)
                    .all(|(a, b)| a.to_bits() == b.to_bits())
            );
        }
    }

    /// One thread or several, the same bits (blocks reduced in parallel are
    /// taken in block order).
    #[test]
    fn same_bits_on_one_thread_and_many() {
        let (n, p) = (5000, 7);
        let x = sample(n, p);
        let run = || {
            let mut acc = QrAccumulator::new(p);
            acc.add_rows(&x);
            acc.finish().data
        };
        let many = run();
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(1)
            .build()
            .unwrap();
        let one = pool.install(run);
        assert!(
            many.iter()
                .zip(&one)
                .all(|(a, b)| a.to_bits() == b.to_bits())
        );
    }

    /// A matrix built from chosen singular values and rotations: the values
    /// come back to a few units of rounding, V is orthonormal and R·v = σu.
    #[test]
    fn jacobi_finds_chosen_singular_values() {
        let p = 4;
        let sigma = [3.0, 1e-2, 1e-5, 0.5];
        // R = Σ-scaled columns rotated: M = diag-free construction via a
        // Householder reflection H = I − 2hhᵀ/hᵀh, M = H·diag(σ).
        let h = [1.0, 2.0, -1.0, 0.5];
        let hh: f64 = h.iter().map(|x| x * x).sum();
        let mut m = Matrix::zeros(p, p);
        for i in 0..p {
            for j in 0..p {
                let hij = f64::from(u8::from(i == j)) - 2.0 * h[i] * h[j] / hh;
                m.set(i, j, hij * sigma[j]);
            }
        }
        let s = singular_values(&m).unwrap();
        let mut want = sigma.to_vec();
        want.sort_by(|a, b| b.total_cmp(a));
        for (got, want) in s.values.iter().zip(&want) {
            assert!((got - want).abs() <= 1e-14 * want, "{got} vs {want}");
        }
        for a in 0..p {
            for b in 0..p {
                let d: f64 = (0..p)
                    .map(|i| s.vectors.get(i, a) * s.vectors.get(i, b))
                    .sum();
                assert!((d - f64::from(u8::from(a == b))).abs() < 1e-14);
            }
        }
    }
}
