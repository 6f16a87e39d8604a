//! Our own deterministic numeric kernels.
//!
//! Passes over the data (cross-products, scores) are plain Rust loops in a fixed
//! order, split into fixed-size row blocks whose partial results are combined in
//! block order. The result therefore does not depend on the number of threads or
//! on which CPU features are detected at run time. The p × p (or n × n) symmetric
//! eigenproblem is ours too ([`eigen`]): Householder tridiagonalisation, every
//! eigenvalue by the implicit QL method, and eigenvectors only for the eigenvalues
//! wanted, each computed on its own in a fixed order.

pub mod crossprod;
pub mod eigen;
pub mod matrix;
pub mod qr;
pub mod random;
pub mod sum;

pub use matrix::Matrix;

/// The value a float `sum()` starts from (the standard library's choice; −0 in
/// current Rust). Sums carried across chunks start here so that they give the
/// same bits as `iter().sum()` over the whole column.
pub const SUM_START: f64 = -0.0;

#[cfg(test)]
mod tests {
    #[test]
    fn sum_start_is_the_standard_librarys() {
        let empty: f64 = std::iter::empty::<f64>().sum();
        assert_eq!(super::SUM_START.to_bits(), empty.to_bits());
        let one_zero: f64 = [0.0f64].iter().sum();
        assert_eq!((super::SUM_START + 0.0).to_bits(), one_zero.to_bits());
    }
}
