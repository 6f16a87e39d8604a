//! Horn's parallel analysis (Horn 1965, "A rationale and test for the number of
//! factors in factor analysis", Psychometrika 30:179–185): a component is worth
//! keeping while its eigenvalue exceeds the chosen percentile of the same-ranked
//! eigenvalues of random tables of the same shape.
//!
//! Random tables are either the scaled data with each column shuffled on its own
//! (same values, no correlation) or independent normal values with each column's
//! standard deviation. Replicate r draws from stream r of the recipe's seed and
//! replicates are collected in order, so the thresholds are the same for any
//! thread count. Percentiles interpolate linearly between order statistics
//! (Hyndman & Fan 1996, definition 7, numpy's default).

use crate::error::AnalysisError;
use crate::linalg::Matrix;
use crate::linalg::random::Stream;
use crate::recipe::raw::{RandomData, RawParallel};
use crate::stages::decompose::decompose_keeping;
use rayon::prelude::*;
use serde::Serialize;

/// The thresholds parallel analysis compares the eigenvalues against.
#[derive(Debug, Clone, Serialize)]
pub struct ParallelEvidence {
    pub replicates: usize,
    pub percentile: f64,
    pub seed: u64,
    pub random_data: RandomData,
    /// The chosen percentile of each ranked eigenvalue over the replicates.
    pub thresholds: Vec<f64>,
    /// The mean of each ranked eigenvalue over the replicates.
    pub means: Vec<f64>,
}

/// Runs the replicates and summarises them.
pub fn parallel_analysis(
    z: &Matrix,
    centred: bool,
    settings: &RawParallel,
) -> Result<ParallelEvidence, AnalysisError> {
    let replicates = settings.replicates.0.get();
    let sds: Vec<f64> = (0..z.cols).map(|j| spread(&z.column(j), centred)).collect();
    let eigenvalues: Vec<Vec<f64>> = (0..replicates)
        .into_par_iter()
        .map(|r| {
            let mut stream = Stream::new(settings.seed, r as u64);
            let table = random_table(z, &sds, centred, settings.random_data, &mut stream);
            decompose_keeping(&table, centred, None, 0).map(|d| d.eigenvalues)
        })
        .collect::<Result<_, _>>()?;
    let p = z.cols;
    let mut thresholds = Vec::with_capacity(p);
    let mut means = Vec::with_capacity(p);
    for a in 0..p {
        let mut column: Vec<f64> = eigenvalues.iter().map(|e| e[a]).collect();
        means.push(column.iter().sum::<f64>() / replicates as f64);
        column.sort_by(f64::total_cmp);
        thresholds.push(percentile(&column, settings.percentile.0));
    }
    Ok(ParallelEvidence {
        replicates,
        percentile: settings.percentile.0,
        seed: settings.seed,
        random_data: settings.random_data,
        thresholds,
        means,
    })
}

/// The standard deviation (n − 1) of a column, or its root mean square when the
/// analysis does not centre.
fn spread(values: &[f64], centred: bool) -> f64 {
    let n = values.len() as f64;
    let mean = if centred {
        values.iter().sum::<f64>() / n
    } else {
        0.0
    };
    let divisor = if centred { n - 1.0 } else { n };
    (values.iter().map(|v| (v - mean) * (v - mean)).sum::<f64>() / divisor).sqrt()
}

fn random_table(
    z: &Matrix,
    sds: &[f64],
    centred: bool,
    kind: RandomData,
    stream: &mut Stream,
) -> Matrix {
    let (n, p) = (z.rows, z.cols);
    let columns: Vec<Vec<f64>> = (0..p)
        .map(|j| match kind {
            RandomData::PermutedColumns => {
                let mut column = z.column(j);
                stream.shuffle(&mut column);
                column
            }
            RandomData::Normal => {
                let mut column = Vec::with_capacity(n + 1);
                while column.len() < n {
                    let (a, b) = stream.normal_pair();
                    column.push(a);
                    column.push(b);
                }
                column.truncate(n);
                // Give the random column exactly the data column's spread (and
                // mean zero when the analysis centres).
                let mean = if centred {
                    column.iter().sum::<f64>() / n as f64
                } else {
                    0.0
                };
                let shifted: Vec<f64> = column.iter().map(|v| v - mean).collect();
                let s = spread(&shifted, centred);
                shifted.iter().map(|v| v / s * sds[j]).collect()
            }
        })
        .collect();
    Matrix::from_columns(&columns)
}

/// The q-th percentile (0 < q < 100) of sorted values, interpolating linearly.
pub fn percentile(sorted: &[f64], q: f64) -> f64 {
    let h = (sorted.len() - 1) as f64 * q / 100.0;
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(sorted.len() - 1);
    sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo])
}

#[cfg(test)]
mod tests {
    #[test]
    fn percentile_matches_numpy() {
        // numpy.percentile([1, 2, 3, 4, 10], [95, 50, 10]) → [8.8, 3.0, 1.4]
        let v = [1.0, 2.0, 3.0, 4.0, 10.0];
        assert!((super::percentile(&v, 95.0) - 8.8).abs() < 1e-12);
        assert_eq!(super::percentile(&v, 50.0), 3.0);
        assert!((super::percentile(&v, 10.0) - 1.4).abs() < 1e-12);
    }
}
