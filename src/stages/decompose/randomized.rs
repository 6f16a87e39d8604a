//! The randomized decomposition: the leading components only, from a seeded
//! random sketch of the scaled data, for wide or large tables where the full
//! p × p (or n × n) eigenproblem costs more than the few components are worth.
//!
//! Method: randomized subspace iteration followed by the direct SVD of the
//! sketch, Halko, Martinsson & Tropp (2011), "Finding structure with randomness:
//! probabilistic algorithms for constructing approximate matrix decompositions",
//! SIAM Review 53(2):217–288, Algorithms 4.4 and 5.1. With Z the scaled n × p
//! data, k components wanted and l = k + oversampling (at most min(n, p)):
//!
//! 1. Ω is p × l standard normal values, drawn row by row from stream 0 of the
//!    seed ([`crate::linalg::random::Stream`], Box–Muller on ChaCha8).
//! 2. Q = orth(ZΩ); then, once per power iteration, W = orth(ZᵀQ), Q = orth(ZW).
//!    orth is nalgebra's Householder QR (plain loops, no matrix product), which
//!    re-orthonormalises after every multiplication as Algorithm 4.4 asks, so
//!    the small eigenvalues are not lost to rounding.
//! 3. Bᵀ = ZᵀQ (p × l). The l × l matrix BBᵀ/(n − 1) = UΛUᵀ gives the
//!    eigenvalues Λ of C = ZᵀZ/(n − 1), and the loadings are
//!    V = BᵀU / √((n − 1)Λ), the same formula as the exact n × n route.
//!    The sign rule is the exact method's ([`crate::linalg::eigen::fix_signs`]).
//!
//! Every product goes through [`crate::linalg::crossprod`] (each entry summed in
//! a fixed order, rows split across threads only for writing), the QR and the
//! small eigenproblem are single-threaded, and the random values come from our
//! own stream, so the same data, settings and seed give the same bits on any
//! thread count and any CPU.
//!
//! What is known of the rest of the spectrum: only the leading `wanted`
//! eigenvalues are returned (the oversampled ones are less accurate and are
//! dropped, as Halko et al. advise). The total Σλ = trace C is exact, as in the
//! exact method, and the sum of squares Σλ² = ‖C‖²_F is computed exactly from
//! the Gram matrix of the smaller side. θ₁ and θ₂ of the eigenvalues after the
//! k kept components, which Box's SPE limit needs, come from the residual
//! after those components itself ([`RandomizedReport::residual_sums`]), not
//! from those totals less the kept eigenvalues: that subtraction lost the
//! digits of a small tail. Nothing else about the tail is known, and no
//! eigenvalue is made up for it.
//! A rank deficiency shows in the sketch itself: a Gaussian Ω hits every
//! direction of the row space with probability one, so when the data have rank
//! r < l the sketch has exactly r eigenvalues above the rank tolerance.
//!
//! Accuracy: each computed pair (λ, v) comes with ‖Cv − λv‖; for a symmetric C
//! some eigenvalue lies within that distance of λ (Parlett 1998, "The Symmetric
//! Eigenvalue Problem", SIAM, Theorem 4.5.1, as commonly given), so the report
//! says how far each eigenvalue can be from a true one.

use super::{Decomposition, Route, rank_tolerance};
use crate::error::AnalysisError;
use crate::linalg::Matrix;
use crate::linalg::crossprod::{gram_of_columns, times};
use crate::linalg::eigen::{fix_signs, symmetric_eigen};
use crate::linalg::random::Stream;
use crate::recipe::raw::RawRandomized;
use nalgebra::DMatrix;
use serde::Serialize;

/// What the randomized method did and what it knows beyond the leading eigenvalues.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RandomizedReport {
    pub oversampling: usize,
    pub power_iterations: usize,
    pub seed: u64,
    /// Random directions drawn: components wanted plus oversampling, at most
    /// min(n, p).
    pub sketch_size: usize,
    /// Leading eigenvalues computed (the length of
    /// [`Decomposition::eigenvalues`]); the other `features − known` are unknown.
    pub known: usize,
    /// p, the number of eigenvalues in all.
    pub features: usize,
    /// Σλ² over all p eigenvalues (‖C‖²_F), exact up to rounding.
    pub sum_of_squares: f64,
    /// ‖Cv − λv‖ for each component with loadings: some true eigenvalue lies
    /// within this distance of the computed one.
    pub residual_norms: Vec<f64>,
}

impl RandomizedReport {
    /// θ₁ = Σ_{j>k} λⱼ and θ₂ = Σ_{j>k} λⱼ² of the eigenvalues after the first
    /// `k`, from the residual itself: E = Z − Z Vₖ Vₖᵀ after the first k
    /// loadings, θ₁ = ‖E‖²_F / (n − 1) and θ₂ = ‖EᵀE‖²_F / (n − 1)² (or
    /// ‖EEᵀ‖²_F, the same number, when n < p), each summed in a fixed order.
    /// The eigenvalues of EᵀE/(n − 1) are the dropped ones, so both sums are
    /// as accurate as the residual's entries, however small the unexplained
    /// share: no total is subtracted from.
    ///
    /// `None` when k exceeds the components with loadings, or when even the
    /// largest residual eigenvalue (at most √θ₂) is below the exact method's
    /// rank tolerance ([`rank_tolerance`]): the residual is then rounding, and
    /// the exact method would find no residual eigenvalue either.
    pub fn residual_sums(&self, z: &Matrix, d: &Decomposition, k: usize) -> Option<(f64, f64)> {
        if k > d.loadings.cols {
            return None;
        }
        let (n, p) = (z.rows, z.cols);
        let divisor = (n - 1) as f64;
        let e = residual(z, &d.loadings, k);
        let theta1 = e
            .data
            .iter()
            .fold(crate::linalg::SUM_START, |s, v| s + v * v)
            / divisor;
        let gram = if p <= n {
            gram_of_columns(&e)
        } else {
            gram_of_columns(&e.transpose())
        };
        let theta2 = gram.data.iter().fold(crate::linalg::SUM_START, |s, g| {
            let c = g / divisor;
            s + c * c
        });
        let largest = d.eigenvalues.first().copied().unwrap_or(0.0);
        (theta1 > 0.0 && theta2.sqrt() > rank_tolerance(largest, n, p)).then_some((theta1, theta2))
    }
}

/// E = Z − T Vₖᵀ with T = Z Vₖ, the residual after the first `k` columns of
/// `loadings`; each fitted value sums its k terms in component order.
fn residual(z: &Matrix, loadings: &Matrix, k: usize) -> Matrix {
    let t = crate::stages::decompose::scores(z, loadings, k);
    let mut e = Matrix::zeros(z.rows, z.cols);
    for i in 0..z.rows {
        for j in 0..z.cols {
            let fitted = (0..k).fold(crate::linalg::SUM_START, |s, a| {
                s + t.get(i, a) * loadings.get(j, a)
            });
            e.set(i, j, z.get(i, j) - fitted);
        }
    }
    e
}

/// The leading `wanted` components of the scaled data `z` (n × p) by the
/// randomized method; `centred` says whether the columns were centred, which
/// bounds the rank by n − 1. `wanted` is lowered to that bound.
pub fn randomized(
    z: &Matrix,
    centred: bool,
    wanted: usize,
    settings: &RawRandomized,
) -> Result<(Decomposition, RandomizedReport), AnalysisError> {
    let (n, p) = (z.rows, z.cols);
    let divisor = (n - 1) as f64;
    // The exact method's total, from the same sums in the same order.
    let total_variance = crate::stages::scale::Squares::of(z).iter().sum::<f64>() / divisor;
    let bound = if centred { n - 1 } else { n }.min(p);
    let wanted = wanted.min(bound);
    let l = (wanted + settings.oversampling.0).min(n.min(p)).max(1);

    let zt = z.transpose();
    let omega = gaussian(p, l, settings.seed);
    let mut q = orthonormal(&times(z, &omega));
    for _ in 0..settings.power_iterations.0 {
        let w = orthonormal(&times(&zt, &q));
        q = orthonormal(&times(z, &w));
    }
    let bt = times(&zt, &q);
    let mut small = gram_of_columns(&bt);
    small.data.iter_mut().for_each(|v| *v /= divisor);
    let eig = symmetric_eigen(&small)?;
    let values: Vec<f64> = eig.values.iter().map(|v| v.max(0.0)).collect();

    let largest = values.first().copied().unwrap_or(0.0);
    let tol = rank_tolerance(largest, n, p);
    let rank = values.iter().take_while(|&&v| v > tol).count().min(wanted);
    let mut u = Matrix::zeros(l, rank);
    for a in 0..rank {
        let norm = (divisor * values[a]).sqrt();
        for i in 0..l {
            u.set(i, a, eig.vectors.get(i, a) / norm);
        }
    }
    let mut loadings = times(&bt, &u);
    fix_signs(&mut loadings);
    let eigenvalues = values[..wanted].to_vec();
    let residual_norms = residual_norms(z, &zt, &loadings, &eigenvalues, divisor);
    let report = RandomizedReport {
        oversampling: settings.oversampling.0,
        power_iterations: settings.power_iterations.0,
        seed: settings.seed,
        sketch_size: l,
        known: wanted,
        features: p,
        sum_of_squares: sum_of_squares(z, &zt, divisor),
        residual_norms,
    };
    Ok((
        Decomposition {
            eigenvalues,
            total_variance,
            rank,
            loadings,
            route: Route::Randomized,
        },
        report,
    ))
}

/// A p × l matrix of standard normal values, filled row by row from stream 0 of
/// `seed`, so that it depends only on the seed and the shape.
fn gaussian(p: usize, l: usize, seed: u64) -> Matrix {
    let mut stream = Stream::new(seed, 0);
    let mut data = Vec::with_capacity(p * l + 1);
    while data.len() < p * l {
        let (a, b) = stream.normal_pair();
        data.push(a);
        data.push(b);
    }
    data.truncate(p * l);
    Matrix {
        rows: p,
        cols: l,
        data,
    }
}

/// An orthonormal basis of the columns of `y` (rows ≥ cols): the Q of
/// nalgebra's Householder QR, whose loops are plain Rust (no matrix product).
fn orthonormal(y: &Matrix) -> Matrix {
    debug_assert!(y.rows >= y.cols);
    let q = DMatrix::from_row_slice(y.rows, y.cols, &y.data).qr().q();
    let mut out = Matrix::zeros(y.rows, y.cols);
    for i in 0..y.rows {
        for a in 0..y.cols {
            out.set(i, a, q[(i, a)]);
        }
    }
    out
}

/// ‖C‖²_F = Σλ² over all p eigenvalues, from the Gram matrix of the smaller side
/// (ZᵀZ and ZZᵀ have the same non-zero eigenvalues), summed in row-major order.
fn sum_of_squares(z: &Matrix, zt: &Matrix, divisor: f64) -> f64 {
    let gram = if z.cols <= z.rows {
        gram_of_columns(z)
    } else {
        gram_of_columns(zt)
    };
    gram.data
        .iter()
        .map(|g| {
            let c = g / divisor;
            c * c
        })
        .sum()
}

/// ‖Cv − λv‖ for each loading vector v (a column of `loadings`), with
/// Cv = Zᵀ(Zv)/(n − 1).
fn residual_norms(
    z: &Matrix,
    zt: &Matrix,
    loadings: &Matrix,
    eigenvalues: &[f64],
    divisor: f64,
) -> Vec<f64> {
    let cv = times(zt, &times(z, loadings));
    (0..loadings.cols)
        .map(|a| {
            (0..loadings.rows)
                .map(|j| {
                    let r = cv.get(j, a) / divisor - eigenvalues[a] * loadings.get(j, a);
                    r * r
                })
                .sum::<f64>()
                .sqrt()
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::recipe::raw::Steps;
    use crate::stages::decompose::decompose;

    /// A centred n × p table: `signal` components with standard deviations
    /// 10, 8, 6, … plus normal noise of standard deviation `noise`.
    fn table(n: usize, p: usize, signal: usize, noise: f64, seed: u64) -> Matrix {
        let mut scores = gaussian(n, signal, seed);
        for i in 0..n {
            for a in 0..signal {
                let sd = (10.0 - 2.0 * a as f64) / (p as f64).sqrt();
                scores.set(i, a, scores.get(i, a) * sd);
            }
        }
        let mut z = times(&scores, &gaussian(signal, p, seed + 1));
        let e = gaussian(n, p, seed + 2);
        for (v, e) in z.data.iter_mut().zip(&e.data) {
            *v += noise * e;
        }
        for j in 0..p {
            let mean = z.column(j).iter().sum::<f64>() / n as f64;
            for i in 0..n {
                z.set(i, j, z.get(i, j) - mean);
            }
        }
        z
    }

    fn settings(oversampling: usize, power_iterations: usize, seed: u64) -> RawRandomized {
        RawRandomized {
            oversampling: Steps(oversampling),
            power_iterations: Steps(power_iterations),
            seed,
        }
    }

    #[test]
    fn the_test_matrix_depends_only_on_seed_and_shape() {
        let a = gaussian(7, 3, 11);
        assert_eq!(a, gaussian(7, 3, 11));
        assert_ne!(a.data, gaussian(7, 3, 12).data);
        // Row by row from one stream: the first rows of a taller matrix agree.
        assert_eq!(a.data[..21], gaussian(9, 3, 11).data[..21]);
    }

    #[test]
    fn orthonormal_columns_span_the_input() {
        let y = gaussian(40, 5, 3);
        let q = orthonormal(&y);
        for a in 0..5 {
            for b in 0..5 {
                let d: f64 = (0..40).map(|i| q.get(i, a) * q.get(i, b)).sum();
                let expected = if a == b { 1.0 } else { 0.0 };
                assert!((d - expected).abs() < 1e-13, "{a} {b} {d}");
            }
        }
        // Each column of y is reproduced by its projection onto Q.
        for b in 0..5 {
            let coef: Vec<f64> = (0..5)
                .map(|a| (0..40).map(|i| q.get(i, a) * y.get(i, b)).sum())
                .collect();
            for i in 0..40 {
                let back: f64 = (0..5).map(|a| q.get(i, a) * coef[a]).sum();
                assert!((back - y.get(i, b)).abs() < 1e-12);
            }
        }
    }

    #[test]
    fn exact_rank_is_found_and_the_sketch_reproduces_it() {
        // Rank 3 without noise: three eigenvalues, then nothing; the sketch of 13
        // directions sees exactly three.
        let z = table(60, 40, 3, 0.0, 5);
        let (d, report) = randomized(&z, true, 6, &settings(10, 2, 1)).unwrap();
        let exact = decompose(&z, true, None).unwrap();
        assert_eq!(d.rank, 3);
        assert_eq!(exact.rank, 3);
        assert_eq!(d.eigenvalues.len(), 6);
        assert_eq!(report.sketch_size, 16);
        for a in 0..3 {
            let rel = (d.eigenvalues[a] - exact.eigenvalues[a]).abs() / exact.eigenvalues[a];
            assert!(rel < 1e-12, "eigenvalue {a}: {rel}");
        }
        // Nothing is left after three components, so there is no residual to bound.
        assert_eq!(report.residual_sums(&z, &d, 3), None);
    }

    #[test]
    fn sums_of_the_tail_match_the_exact_eigenvalues() {
        let z = table(50, 30, 4, 0.3, 8);
        let (d, report) = randomized(&z, true, 5, &settings(10, 4, 2)).unwrap();
        let exact = decompose(&z, true, None).unwrap();
        let sq: f64 = exact.eigenvalues.iter().map(|l| l * l).sum();
        assert!((report.sum_of_squares - sq).abs() < 1e-12 * sq);
        assert_eq!(d.total_variance.to_bits(), exact.total_variance.to_bits());
        let k = 2;
        let (t1, t2) = report.residual_sums(&z, &d, k).unwrap();
        let rest = &exact.eigenvalues[k..exact.rank];
        let e1: f64 = rest.iter().sum();
        let e2: f64 = rest.iter().map(|l| l * l).sum();
        assert!((t1 - e1).abs() < 1e-9 * e1, "{t1} {e1}");
        assert!((t2 - e2).abs() < 1e-9 * e2, "{t2} {e2}");
        assert_eq!(report.residual_sums(&z, &d, 6), None);
    }

    #[test]
    fn residual_norms_bound_the_eigenvalue_errors() {
        // Few power iterations on a slowly decaying spectrum: the eigenvalues are
        // rough, but each lies within its residual norm of a true one.
        let z = table(80, 60, 8, 1.0, 13);
        let (d, report) = randomized(&z, true, 8, &settings(2, 0, 3)).unwrap();
        let exact = decompose(&z, true, None).unwrap();
        for (a, r) in report.residual_norms.iter().enumerate() {
            let nearest = exact
                .eigenvalues
                .iter()
                .map(|l| (l - d.eigenvalues[a]).abs())
                .fold(f64::INFINITY, f64::min);
            assert!(nearest <= r * (1.0 + 1e-9) + 1e-12, "{a}: {nearest} > {r}");
        }
    }
}
