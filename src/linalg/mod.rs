//! Our own deterministic numeric kernels.
//!
//! Passes over the data (cross-products, scores) are plain Rust loops in a fixed
//! order, split into fixed-size row blocks whose partial results are combined in
//! block order. The result therefore does not depend on the number of threads or
//! on which CPU features are detected at run time. Only the small p × p (or n × n)
//! symmetric eigenproblem goes to nalgebra, built without its runtime-dispatched
//! matrix product.

pub mod crossprod;
pub mod eigen;
pub mod matrix;
pub mod random;

pub use matrix::Matrix;
