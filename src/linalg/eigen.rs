//! The symmetric eigenproblem, sorted and signed by our documented rules.

use super::Matrix;
use crate::error::AnalysisError;
use nalgebra::{DMatrix, SymmetricEigen};

/// Eigenvalues in descending order and their unit eigenvectors (as columns).
#[derive(Debug, Clone)]
pub struct Eigen {
    pub values: Vec<f64>,
    /// `vectors.get(i, a)` is entry `i` of eigenvector `a`.
    pub vectors: Matrix,
}

/// Eigendecomposition of a symmetric matrix by nalgebra (Householder
/// tridiagonalisation and implicit symmetric QR), sorted by descending eigenvalue;
/// equal eigenvalues keep nalgebra's order, which is itself deterministic.
pub fn symmetric_eigen(m: &Matrix) -> Result<Eigen, AnalysisError> {
    let n = m.rows;
    let dm = DMatrix::from_row_slice(n, n, &m.data);
    let eig = SymmetricEigen::try_new(dm, f64::EPSILON, 0).ok_or(AnalysisError::NotFinite)?;
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&a, &b| {
        eig.eigenvalues[b]
            .total_cmp(&eig.eigenvalues[a])
            .then(a.cmp(&b))
    });
    let values: Vec<f64> = order.iter().map(|&i| eig.eigenvalues[i]).collect();
    if values.iter().any(|v| !v.is_finite()) {
        return Err(AnalysisError::NotFinite);
    }
    let mut vectors = Matrix::zeros(n, n);
    for (a, &src) in order.iter().enumerate() {
        for i in 0..n {
            vectors.set(i, a, eig.eigenvectors[(i, src)]);
        }
    }
    Ok(Eigen { values, vectors })
}

/// Entries whose magnitudes differ by less than this share of the largest count
/// as tied for the sign rule. Exact ties are common (any two-feature correlation
/// matrix has loadings ±1/√2), and rounding must not decide them.
pub const SIGN_TIE: f64 = 1e-9;

/// The sign rule: in each column, the entry of largest magnitude is made positive;
/// among entries tied within [`SIGN_TIE`] the first (lowest index) decides.
pub fn fix_signs(vectors: &mut Matrix) {
    for a in 0..vectors.cols {
        let largest = (0..vectors.rows)
            .map(|i| vectors.get(i, a).abs())
            .fold(0.0, f64::max);
        let lead =
            (0..vectors.rows).find(|&i| vectors.get(i, a).abs() >= largest * (1.0 - SIGN_TIE));
        if let Some(lead) = lead {
            if vectors.get(lead, a) < 0.0 {
                for i in 0..vectors.rows {
                    vectors.set(i, a, -vectors.get(i, a));
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn diagonal_matrix_sorted_and_signed() {
        let m = Matrix {
            rows: 3,
            cols: 3,
            data: vec![1.0, 0.0, 0.0, 0.0, 3.0, 0.0, 0.0, 0.0, 2.0],
        };
        let mut e = symmetric_eigen(&m).unwrap();
        fix_signs(&mut e.vectors);
        assert_eq!(e.values, vec![3.0, 2.0, 1.0]);
        assert_eq!(e.vectors.column(0), vec![0.0, 1.0, 0.0]);
        assert_eq!(e.vectors.column(1), vec![0.0, 0.0, 1.0]);
    }

    #[test]
    fn sign_rule_ties_go_to_the_first_entry() {
        let mut v = Matrix {
            rows: 2,
            cols: 1,
            data: vec![-0.5, 0.5],
        };
        fix_signs(&mut v);
        assert_eq!(v.data, vec![0.5, -0.5]);
        // A tie broken only by rounding still goes to the first entry.
        let mut v = Matrix {
            rows: 2,
            cols: 1,
            data: vec![-0.7071067811865475, 0.7071067811865477],
        };
        fix_signs(&mut v);
        assert!(v.data[0] > 0.0);
    }
}
