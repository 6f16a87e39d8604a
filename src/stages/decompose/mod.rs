//! The eigendecomposition of the scaled data's covariance matrix.
//!
//! With n rows and p features the covariance is C = ZᵀZ / (n − 1) (divisor n − 1,
//! as R's `prcomp` and scikit-learn's `explained_variance_`). Under unit-variance
//! scaling C is the correlation matrix; without centring it is the second-moment
//! matrix. When the table has fewer rows than features, the n × n matrix
//! G = ZZᵀ / (n − 1) is decomposed instead: it has the same non-zero eigenvalues,
//! and each loading is v = Zᵀu / √((n − 1) μ) (the "dual" route).
//!
//! Sign rule: in each loading vector the entry of largest magnitude is positive;
//! ties go to the first feature. So reruns and other machines agree.
//!
//! Both methods live in this folder and return the types defined here
//! ([`Decomposition`], [`Route`]): the exact one in this file, the randomized one
//! (the leading components from a seeded sketch) in [`randomized`].

use crate::error::AnalysisError;
use crate::linalg::Matrix;
use crate::linalg::crossprod::{gram_of_columns, gram_of_rows, times, transpose_times};
use crate::linalg::eigen::{fix_signs, symmetric_eigen_leading};
use crate::recipe::raw::RawRandomized;
pub use randomized::RandomizedReport;
use serde::Serialize;

pub mod qr;
pub mod randomized;

pub use qr::{RowsSummary, SummaryMatrix, decompose_qr, from_triangular};

/// Which matrix was decomposed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Route {
    /// The p × p covariance matrix (tables with at least as many rows as features).
    Features,
    /// The n × n matrix of row products (tables with more features than rows).
    Samples,
    /// The leading components only, from a seeded random sketch of the data
    /// ([`decompose_randomized`]); chosen only when the recipe asks for it.
    Randomized,
    /// Every component from the singular values of the scaled data
    /// ([`decompose_qr`]); chosen only when the recipe asks for it.
    Qr,
}

/// Eigenvalues and loadings of the scaled data.
#[derive(Debug, Clone)]
pub struct Decomposition {
    /// All p eigenvalues, descending; numerically negative values are set to 0.
    /// The randomized route returns only the leading ones it computed (see
    /// [`Decomposition::has_every_eigenvalue`]).
    pub eigenvalues: Vec<f64>,
    /// The sum of the feature variances (trace of the covariance matrix).
    pub total_variance: f64,
    /// How many eigenvalues are non-zero within rounding (see [`rank_tolerance`]).
    pub rank: usize,
    /// p × min(rank, the `want` asked for): the loading vectors (unit length) as
    /// columns, sign-fixed. Read no column beyond `loadings.cols`.
    pub loadings: Matrix,
    pub route: Route,
}

/// Decomposes the scaled data, choosing the route by shape unless one is forced.
/// `centred` says whether the columns were centred, which lowers the rank bound
/// to n − 1.
pub fn decompose(
    z: &Matrix,
    centred: bool,
    route: Option<Route>,
) -> Result<Decomposition, AnalysisError> {
    decompose_keeping(z, centred, route, usize::MAX)
}

/// Like [`decompose`], but computes the loadings of at most `want` components
/// (all eigenvalues are still returned; `want` = 0 gives eigenvalues only). On
/// both routes each eigenvector is computed on its own
/// ([`symmetric_eigen_leading`]), and on the n × n route each loading also costs a
/// pass over the data, so asking only for what is used saves most of the time;
/// the loadings computed are the same bits whatever `want` is.
pub fn decompose_keeping(
    z: &Matrix,
    centred: bool,
    route: Option<Route>,
    want: usize,
) -> Result<Decomposition, AnalysisError> {
    let (n, p) = (z.rows, z.cols);
    let route = route.unwrap_or(if n < p {
        Route::Samples
    } else {
        Route::Features
    });
    let squares = crate::stages::scale::Squares::of(z);
    if route == Route::Features {
        return from_cross_products(&gram_of_columns(z), &squares, n, centred, want);
    }
    let divisor = (n - 1) as f64;
    let total_variance = squares.iter().sum::<f64>() / divisor;
    let bound = if centred { n - 1 } else { n }.min(p);

    let (values, loadings) = match route {
        Route::Features => unreachable!("returned above"),
        Route::Randomized => {
            panic!("the randomized route needs its settings: call decompose_randomized")
        }
        Route::Qr => return decompose_qr(z, centred),
        Route::Samples => {
            let mut g = gram_of_rows(z);
            g.data.iter_mut().for_each(|v| *v /= divisor);
            let eig = symmetric_eigen_leading(&g, want)?;
            let r = rank(&eig.values, n, p, bound).min(eig.vectors.cols);
            let mut u = Matrix::zeros(n, r);
            for a in 0..r {
                let norm = (divisor * eig.values[a]).sqrt();
                for i in 0..n {
                    u.set(i, a, eig.vectors.get(i, a) / norm);
                }
            }
            let mut values = eig.values;
            values.resize(p, 0.0);
            (values, transpose_times(z, &u))
        }
    };
    let values: Vec<f64> = values.into_iter().map(|v| v.max(0.0)).collect();
    let r = rank(&values, n, p, bound);
    Ok(finish(values, total_variance, r, &loadings, route))
}

impl Decomposition {
    /// Whether all p eigenvalues are known. The randomized route knows only the
    /// leading ones, so rules and limits that need the whole spectrum (Kaiser's
    /// p, the broken stick's p, Bartlett's test, the θ's of the SPE limit) must
    /// not read [`Decomposition::eigenvalues`] as if it were complete.
    /// Refuses scaled data with no variance (no eigenvalue above rounding):
    /// there is no component to keep, whichever engine found it.
    pub fn check_variance(&self, source: &str) -> Result<(), crate::error::InputError> {
        if self.rank == 0 {
            return Err(crate::error::InputError::NoFeatures {
                path: source.to_string(),
                why: " (the scaled data has no variance)".into(),
            });
        }
        Ok(())
    }

    pub fn has_every_eigenvalue(&self) -> bool {
        self.eigenvalues.len() == self.loadings.rows
    }
}

/// The leading `want` components by the randomized method of Halko, Martinsson
/// & Tropp (2011); see [`randomized`] for the steps and what is known of
/// the rest of the spectrum. Only when the recipe sets
/// `components.method = "randomized"`; never chosen by shape.
pub fn decompose_randomized(
    z: &Matrix,
    centred: bool,
    want: usize,
    settings: &RawRandomized,
) -> Result<(Decomposition, RandomizedReport), AnalysisError> {
    randomized::randomized(z, centred, want, settings)
}

/// The p × p route from the cross-products ZᵀZ (n rows) and each column's
/// Σ z² (summed in row order): the same arithmetic whether the rows were held in
/// memory or streamed in passes. Every eigenvalue, and the loadings of at most
/// `want` components (each the same bits whatever `want` is).
pub fn from_cross_products(
    cross_products: &Matrix,
    squares: &[f64],
    n: usize,
    centred: bool,
    want: usize,
) -> Result<Decomposition, AnalysisError> {
    let p = cross_products.rows;
    let divisor = (n - 1) as f64;
    let total_variance = squares.iter().sum::<f64>() / divisor;
    let bound = if centred { n - 1 } else { n }.min(p);
    let mut c = cross_products.clone();
    c.data.iter_mut().for_each(|v| *v /= divisor);
    let eig = symmetric_eigen_leading(&c, want)?;
    let values: Vec<f64> = eig.values.into_iter().map(|v| v.max(0.0)).collect();
    let r = rank(&values, n, p, bound);
    Ok(finish(
        values,
        total_variance,
        r,
        &eig.vectors,
        Route::Features,
    ))
}

/// Keeps the first `r` loadings, sign-fixed.
fn finish(
    values: Vec<f64>,
    total_variance: f64,
    r: usize,
    loadings: &Matrix,
    route: Route,
) -> Decomposition {
    let mut kept = loadings.columns(0, r.min(loadings.cols));
    fix_signs(&mut kept);
    Decomposition {
        eigenvalues: values,
        total_variance,
        rank: r,
        loadings: kept,
        route,
    }
}

/// The tolerance below which an eigenvalue counts as zero: λ₁ · max(n, p) · ε, the
/// rule numpy's `matrix_rank` applies to the eigenvalues of a symmetric matrix.
pub fn rank_tolerance(largest: f64, n: usize, p: usize) -> f64 {
    largest * n.max(p) as f64 * f64::EPSILON
}

fn rank(values: &[f64], n: usize, p: usize, bound: usize) -> usize {
    let largest = values.first().copied().unwrap_or(0.0);
    let tol = rank_tolerance(largest, n, p);
    values.iter().take_while(|&&v| v > tol).count().min(bound)
}

/// Scores: the scaled rows times the first `k` loadings.
pub fn scores(z: &Matrix, loadings: &Matrix, k: usize) -> Matrix {
    times(z, &loadings.columns(0, k))
}
