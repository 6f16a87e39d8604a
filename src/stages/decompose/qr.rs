//! The accurate route (`components.method = "qr"`): the eigenvalues and
//! loadings from the singular values of the scaled data itself rather than
//! from its cross-products.
//!
//! Z = QR (a tall-skinny QR in fixed row blocks, [`crate::linalg::qr`]), then
//! R = U Σ Vᵀ by one-sided Jacobi: the eigenvalues of ZᵀZ / (n − 1) are
//! σ² / (n − 1) and the loadings are the columns of V (Golub & Van Loan 2013,
//! §5.4 and §8.6). Forming ZᵀZ squares the condition number, so the exact
//! route's eigenvalues carry absolute errors near ε·λ₁; here the errors are
//! near ε·σ₁ on each σ, so an eigenvalue 1e-10·λ₁ keeps about six more
//! digits, and with them the SPE limits of low-noise tables, which depend on
//! the discarded eigenvalues. Both engines feed the one accumulator
//! ([`QrAccumulator`]) the rows in table order and finish here
//! ([`from_triangular`]), so they give the same bits.
//!
//! With fewer rows than features the QR is of Zᵀ instead (its R is n × n):
//! Zᵀ = QR = (QU)ΣVᵀ gives Z = VΣ(QU)ᵀ, so the loadings are QU, computed as
//! Zᵀvₐ / σₐ (as the samples route does).

use super::{Decomposition, Route, finish, rank};
use crate::error::AnalysisError;
use crate::linalg::Matrix;
use crate::linalg::crossprod::{GramAccumulator, transpose_times};
use crate::linalg::qr::{QrAccumulator, singular_values};

/// The accurate route of a table held in memory.
pub fn decompose_qr(z: &Matrix, centred: bool) -> Result<Decomposition, AnalysisError> {
    let (n, p) = (z.rows, z.cols);
    let squares = crate::stages::scale::Squares::of(z);
    if n >= p {
        let mut qr = QrAccumulator::new(p);
        qr.add_rows(&z.data);
        return from_triangular(&qr.finish(), &squares, n, centred);
    }
    let mut qr = QrAccumulator::new(n);
    qr.add_rows(&z.transpose().data);
    let svd = singular_values(&qr.finish())?;
    let divisor = (n - 1) as f64;
    let mut values: Vec<f64> = svd.values.iter().map(|s| s * s / divisor).collect();
    values.resize(p, 0.0);
    let bound = if centred { n - 1 } else { n }.min(p);
    let r = rank(&values, n, p, bound);
    // vₐ / σₐ for the non-zero singular values; Zᵀ times them are the loadings.
    let mut scaled = Matrix::zeros(n, r);
    for a in 0..r {
        for i in 0..n {
            scaled.set(i, a, svd.vectors.get(i, a) / svd.values[a]);
        }
    }
    let total_variance = squares.iter().sum::<f64>() / divisor;
    Ok(finish(
        values,
        total_variance,
        r,
        &transpose_times(z, &scaled),
        Route::Qr,
    ))
}

/// The eigenvalues and loadings from the triangular factor R of the n scaled
/// rows (p × p) and each column's Σ z²: the same arithmetic whichever engine
/// fed the rows.
pub fn from_triangular(
    r: &Matrix,
    squares: &[f64],
    n: usize,
    centred: bool,
) -> Result<Decomposition, AnalysisError> {
    let p = r.cols;
    let divisor = (n - 1) as f64;
    let svd = singular_values(r)?;
    let values: Vec<f64> = svd.values.iter().map(|s| s * s / divisor).collect();
    let bound = if centred { n - 1 } else { n }.min(p);
    let rank = rank(&values, n, p, bound);
    let total_variance = squares.iter().sum::<f64>() / divisor;
    Ok(finish(
        values,
        total_variance,
        rank,
        &svd.vectors,
        Route::Qr,
    ))
}

/// What the passes engine accumulates over the scaled rows for the
/// decomposition: the cross-products ZᵀZ, or R of the accurate route.
pub enum RowsSummary {
    CrossProducts(GramAccumulator),
    Triangular(QrAccumulator),
}

/// A finished [`RowsSummary`]: ZᵀZ or R (p × p).
pub enum SummaryMatrix {
    CrossProducts(Matrix),
    Triangular(Matrix),
}

impl RowsSummary {
    /// The summary the recipe's method needs (`accurate`: the QR route).
    pub fn new(accurate: bool, p: usize) -> RowsSummary {
        if accurate {
            RowsSummary::Triangular(QrAccumulator::new(p))
        } else {
            RowsSummary::CrossProducts(GramAccumulator::new(p))
        }
    }

    /// Adds rows (row-major, `p` values each), in table order.
    pub fn add_rows(&mut self, rows: &[f64]) {
        match self {
            RowsSummary::CrossProducts(g) => g.add_rows(rows),
            RowsSummary::Triangular(r) => r.add_rows(rows),
        }
    }

    pub fn finish(self) -> SummaryMatrix {
        match self {
            RowsSummary::CrossProducts(g) => SummaryMatrix::CrossProducts(g.finish()),
            RowsSummary::Triangular(r) => SummaryMatrix::Triangular(r.finish()),
        }
    }
}

impl SummaryMatrix {
    /// The decomposition from the summary of the n scaled rows and each
    /// column's Σ z², with the loadings of at most `want` components on the
    /// cross-products route (the QR route computes them all).
    pub fn decompose(
        &self,
        squares: &[f64],
        n: usize,
        centred: bool,
        want: usize,
    ) -> Result<Decomposition, AnalysisError> {
        match self {
            SummaryMatrix::CrossProducts(g) => {
                super::from_cross_products(g, squares, n, centred, want)
            }
            SummaryMatrix::Triangular(r) => from_triangular(r, squares, n, centred),
        }
    }
}
