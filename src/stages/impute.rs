//! Model-based filling of missing cells: iterative PCA and nearest neighbours.
//!
//! Both work on the features as columns with `NaN` for missing cells and fill
//! those cells in place; observed cells are never changed.
//!
//! **Iterative PCA** (Josse & Husson 2012, "Handling missing values in exploratory
//! multivariate data analysis methods", Journal de la Société Française de
//! Statistique 153(2):79–99). Start from each feature's mean (or median); then
//! repeat: centre and scale the completed table by the recipe's scaling rule,
//! fit S components, and replace the missing cells by the fitted values, until
//! the relative change of the filled cells, Σ(new − old)² / Σ old², falls below
//! the tolerance. The fit uses the decomposition Z = Σₛ dₛ uₛ vₛᵀ:
//! - the plain EM variant keeps the first S terms as they are;
//! - the regularized variant (the paper's default) shrinks each kept singular
//!   value, dₛ → dₛ (1 − n σ̂² / dₛ²), where
//!   σ̂² = Σ_{s>S} dₛ² / (np − p − nS − pS + S² + S) estimates the noise variance
//!   per cell with the degrees of freedom of the paper. Shrinking keeps noise
//!   out of the filled values, which the EM fit overfits when S is large or many
//!   cells are missing.
//!
//! **Nearest neighbours.** Each feature is standardised by its observed mean and
//! standard deviation. For a row with a missing cell, the distance to another
//! row with that feature observed is the root mean square difference over the
//! features both rows observe; the k nearest (ties to the lower row number) give
//! the mean of their values for the cell.

use crate::error::AnalysisError;
use crate::linalg::Matrix;
use crate::recipe::raw::{IterativeVariant, RawIterative, ScalingMethod, StartValue};
use crate::stages::decompose::decompose_keeping;
use crate::stages::scale::{FeatureScale, scale_value, standardising_divisor};
use serde::Serialize;

/// What iterative PCA did.
#[derive(Debug, Clone, Serialize)]
pub struct IterativeReport {
    pub variant: IterativeVariant,
    pub components: usize,
    pub start: StartValue,
    pub tolerance: f64,
    pub max_iterations: usize,
    pub iterations: usize,
    pub final_change: f64,
    pub converged: bool,
}

/// The first guess for the missing cells of each column.
fn start_values(columns: &[Vec<f64>], start: StartValue) -> Vec<f64> {
    columns
        .iter()
        .map(|c| {
            let observed: Vec<f64> = c.iter().copied().filter(|v| !v.is_nan()).collect();
            match start {
                StartValue::Mean => super::missing::mean(&observed),
                StartValue::Median => super::missing::median(observed),
            }
        })
        .collect()
}

/// Centre and scale of one column under the recipe's scaling rule, as the
/// scaling stage measures them, with a zero scale taken as 1
/// ([`standardising_divisor`]): a column the fill made constant is centred
/// only.
fn centre_scale(values: &[f64], scaling: ScalingMethod) -> (f64, f64) {
    let s = FeatureScale::measure("", values, scaling);
    (s.centre, standardising_divisor(s.scale))
}

/// The PCA model of the last iteration, kept so that missing cells of new rows
/// can be filled the same way: centre and scale of each feature and the loadings
/// (`loadings[feature][component]`).
#[derive(Debug, Clone, Default, Serialize, serde::Deserialize)]
pub struct ImputationModel {
    pub centre: Vec<f64>,
    pub scale: Vec<f64>,
    pub loadings: Vec<Vec<f64>>,
}

/// Fills the missing cells of `columns` by iterative PCA with `components` components.
pub fn iterative_pca(
    columns: &mut [Vec<f64>],
    settings: &RawIterative,
    components: usize,
    scaling: ScalingMethod,
) -> Result<(IterativeReport, ImputationModel), AnalysisError> {
    let p = columns.len();
    let n = columns.first().map_or(0, Vec::len);
    let s = components;
    let dof =
        (n * p) as f64 - p as f64 - (n * s) as f64 - (p * s) as f64 + (s * s) as f64 + s as f64;
    if s == 0 || s >= p.min(n.saturating_sub(1)) || dof <= 0.0 {
        let rows_less_one = n.saturating_sub(1);
        return Err(AnalysisError::ImputationComponents {
            components: s,
            features: p,
            rows_less_one,
        });
    }
    let mut missing: Vec<(usize, usize)> = Vec::new();
    for (j, column) in columns.iter().enumerate() {
        missing.extend((0..n).filter(|&i| column[i].is_nan()).map(|i| (i, j)));
    }
    let starts = start_values(columns, settings.start);
    for &(i, j) in &missing {
        columns[j][i] = starts[j];
    }
    let mut report = IterativeReport {
        variant: settings.variant,
        components: s,
        start: settings.start,
        tolerance: settings.tolerance.0,
        max_iterations: settings.max_iterations.0.get(),
        iterations: 0,
        final_change: 0.0,
        converged: missing.is_empty(),
    };
    if missing.is_empty() {
        // Nothing to fill, but new rows scored by `apply` may have missing
        // cells: the complete table's model is fitted once for them.
        let (_, model) = fit(columns, s, scaling, settings.variant)?;
        return Ok((report, model));
    }
    let mut model = ImputationModel::default();
    while report.iterations < report.max_iterations {
        report.iterations += 1;
        let (fitted, last) = fit(columns, s, scaling, settings.variant)?;
        model = last;
        let (mut change, mut size) = (0.0, 0.0);
        for &(i, j) in &missing {
            let old = columns[j][i];
            let new = fitted[j][i];
            change += (new - old) * (new - old);
            size += old * old;
            columns[j][i] = new;
        }
        report.final_change = if size > 0.0 { change / size } else { change };
        if report.final_change < report.tolerance {
            report.converged = true;
            break;
        }
    }
    Ok((report, model))
}

/// The S-component fit of the completed columns, back in the columns' units.
fn fit(
    columns: &[Vec<f64>],
    s: usize,
    scaling: ScalingMethod,
    variant: IterativeVariant,
) -> Result<(Vec<Vec<f64>>, ImputationModel), AnalysisError> {
    let (n, p) = (columns[0].len(), columns.len());
    let cs: Vec<(f64, f64)> = columns.iter().map(|c| centre_scale(c, scaling)).collect();
    let scaled: Vec<Vec<f64>> = columns
        .iter()
        .zip(&cs)
        .map(|(c, &(m, sc))| c.iter().map(|&v| scale_value(v, m, sc)).collect())
        .collect();
    let z = Matrix::from_columns(&scaled);
    let d = decompose_keeping(&z, scaling.centers(), None, s)?;
    let s = s.min(d.rank);
    // dₛ² = (n − 1) λₛ for the eigenvalues λ (divisor n − 1).
    let sq: Vec<f64> = d.eigenvalues.iter().map(|l| l * (n - 1) as f64).collect();
    let factors: Vec<f64> = match variant {
        IterativeVariant::Em => vec![1.0; s],
        IterativeVariant::Regularized => {
            let dof = (n * p) as f64 - p as f64 - (n * s) as f64 - (p * s) as f64
                + (s * s) as f64
                + s as f64;
            let sigma2 = sq[s..].iter().sum::<f64>() / dof;
            sq[..s]
                .iter()
                .map(|&d2| (1.0 - n as f64 * sigma2 / d2).max(0.0))
                .collect()
        }
    };
    let scores = crate::stages::decompose::scores(&z, &d.loadings, s);
    let model = ImputationModel {
        centre: cs.iter().map(|c| c.0).collect(),
        scale: cs.iter().map(|c| c.1).collect(),
        loadings: (0..p)
            .map(|j| (0..s).map(|a| d.loadings.get(j, a)).collect())
            .collect(),
    };
    let fitted = (0..p)
        .map(|j| {
            let (m, sc) = cs[j];
            (0..n)
                .map(|i| {
                    let v: f64 = (0..s)
                        .map(|a| factors[a] * scores.get(i, a) * d.loadings.get(j, a))
                        .sum();
                    v * sc + m
                })
                .collect()
        })
        .collect();
    Ok((fitted, model))
}

/// The mean and standard deviation (n − 1) of a column's observed cells; a
/// spread of 0 is taken as 1 so that standardising never divides by zero.
fn observed_mean_sd(column: &[f64]) -> (f64, f64) {
    let observed: Vec<f64> = column.iter().copied().filter(|v| !v.is_nan()).collect();
    let mean = super::missing::mean(&observed);
    let m = observed.len() as f64;
    let sd = (observed
        .iter()
        .map(|v| (v - mean) * (v - mean))
        .sum::<f64>()
        / (m - 1.0).max(1.0))
    .sqrt();
    (mean, standardising_divisor(sd))
}

/// Fills the missing cells of `columns` from the `k` nearest rows.
pub fn knn(columns: &mut [Vec<f64>], k: usize) {
    let p = columns.len();
    let n = columns.first().map_or(0, Vec::len);
    let standard: Vec<Vec<f64>> = columns
        .iter()
        .map(|c| {
            let (mean, sd) = observed_mean_sd(c);
            c.iter().map(|&v| scale_value(v, mean, sd)).collect()
        })
        .collect();
    let original: Vec<Vec<f64>> = columns.to_vec();
    for i in 0..n {
        let gaps: Vec<usize> = (0..p).filter(|&j| original[j][i].is_nan()).collect();
        if gaps.is_empty() {
            continue;
        }
        // Distances to every other row, on the features both observe.
        let distance: Vec<Option<f64>> = (0..n)
            .map(|r| {
                if r == i {
                    return None;
                }
                let (mut sum, mut shared) = (0.0, 0usize);
                for j in 0..p {
                    let (a, b) = (standard[j][i], standard[j][r]);
                    if !a.is_nan() && !b.is_nan() {
                        sum += (a - b) * (a - b);
                        shared += 1;
                    }
                }
                (shared > 0).then(|| (sum / shared as f64).sqrt())
            })
            .collect();
        for j in gaps {
            let mut candidates: Vec<(f64, usize)> = (0..n)
                .filter_map(|r| {
                    distance[r]
                        .filter(|_| !original[j][r].is_nan())
                        .map(|d| (d, r))
                })
                .collect();
            candidates.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
            candidates.truncate(k);
            columns[j][i] = if candidates.is_empty() {
                // No row shares an observed feature with this one: the feature mean.
                super::missing::mean(
                    &original[j]
                        .iter()
                        .copied()
                        .filter(|v| !v.is_nan())
                        .collect::<Vec<_>>(),
                )
            } else {
                candidates.iter().map(|&(_, r)| original[j][r]).sum::<f64>()
                    / candidates.len() as f64
            };
        }
    }
}

/// Fills the missing cells (`NaN`) of one new row from an imputation model: the
/// row's scores are fitted by least squares to its observed cells, and the
/// missing cells are read off the model (projection to the model plane; Nelson,
/// Taylor & MacGregor 1996, "Missing data methods in PCA and PLS: score
/// calculations with incomplete observations", Chemometrics and Intelligent
/// Laboratory Systems 35:45–65). Returns `None` when no cell is observed.
pub fn fill_row_from_model(row: &mut [f64], model: &ImputationModel) -> Option<()> {
    let p = row.len();
    let s = model.loadings.first().map_or(0, Vec::len);
    let observed: Vec<usize> = (0..p).filter(|&j| !row[j].is_nan()).collect();
    if observed.is_empty() {
        return None;
    }
    let z: Vec<f64> = observed
        .iter()
        .map(|&j| scale_value(row[j], model.centre[j], model.scale[j]))
        .collect();
    // Normal equations (V_Oᵀ V_O) t = V_Oᵀ z_O, solved by nalgebra's LU on the
    // small S × S system.
    let a = nalgebra::DMatrix::from_fn(s, s, |x, y| {
        observed
            .iter()
            .map(|&j| model.loadings[j][x] * model.loadings[j][y])
            .sum::<f64>()
    });
    let b = nalgebra::DVector::from_fn(s, |x, _| {
        observed
            .iter()
            .zip(&z)
            .map(|(&j, zj)| model.loadings[j][x] * zj)
            .sum::<f64>()
    });
    let t = a
        .lu()
        .solve(&b)
        .unwrap_or_else(|| nalgebra::DVector::zeros(s));
    for j in 0..p {
        if row[j].is_nan() {
            let zj: f64 = (0..s).map(|x| t[x] * model.loadings[j][x]).sum();
            row[j] = zj * model.scale[j] + model.centre[j];
        }
    }
    Some(())
}

/// Fills the missing cells (`NaN`) of one new row from the `k` nearest rows of
/// a reference table (`reference[feature][row]`, `NaN` where missing), with the
/// same standardisation and distance as [`knn`]. Returns `None` when no cell is
/// observed.
pub fn fill_row_from_reference(row: &mut [f64], reference: &[Vec<f64>], k: usize) -> Option<()> {
    let p = row.len();
    if row.iter().all(|v| v.is_nan()) {
        return None;
    }
    let stats: Vec<(f64, f64)> = reference.iter().map(|c| observed_mean_sd(c)).collect();
    let n = reference.first().map_or(0, Vec::len);
    let distance: Vec<Option<f64>> = (0..n)
        .map(|r| {
            let (mut sum, mut shared) = (0.0, 0usize);
            for j in 0..p {
                let (a, b) = (row[j], reference[j][r]);
                if !a.is_nan() && !b.is_nan() {
                    let d = (a - b) / stats[j].1;
                    sum += d * d;
                    shared += 1;
                }
            }
            (shared > 0).then(|| (sum / shared as f64).sqrt())
        })
        .collect();
    for j in 0..p {
        if !row[j].is_nan() {
            continue;
        }
        let mut candidates: Vec<(f64, usize)> = (0..n)
            .filter_map(|r| {
                distance[r]
                    .filter(|_| !reference[j][r].is_nan())
                    .map(|d| (d, r))
            })
            .collect();
        candidates.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
        candidates.truncate(k);
        row[j] = if candidates.is_empty() {
            stats[j].0
        } else {
            candidates
                .iter()
                .map(|&(_, r)| reference[j][r])
                .sum::<f64>()
                / candidates.len() as f64
        };
    }
    Some(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn knn_takes_the_nearest_rows_and_breaks_ties_by_row() {
        let nan = f64::NAN;
        // Row 0 misses b; on a (mean 0) rows 1 and 2 are exactly equally near;
        // k = 1 takes row 1, the lower row number.
        let table = || {
            vec![
                vec![0.0, 2.0, -2.0, 4.0, -4.0],
                vec![nan, 5.0, 7.0, 100.0, 100.0],
            ]
        };
        let mut cols = table();
        knn(&mut cols, 1);
        assert_eq!(cols[1][0], 5.0);
        let mut cols = table();
        knn(&mut cols, 2);
        assert_eq!(cols[1][0], 6.0);
    }
}
