//! Model-based filling of missing cells: iterative PCA and nearest neighbours.
//!
//! Both work on the features as columns with `NaN` for missing cells and fill
//! those cells in place; observed cells are never changed.
//!
//! **Iterative PCA** (Josse & Husson 2012, "Handling missing values in exploratory
//! multivariate data analysis methods", Journal de la Société Française de
//! Statistique 153(2):79–99). Start from each feature's mean (or median); then
//! repeat the step F: centre and scale the completed table by the recipe's
//! scaling rule, fit S components, and replace the missing cells by the fitted
//! values. The fill is the fixed point x = F(x). The fit uses the
//! decomposition Z = Σₛ dₛ uₛ vₛᵀ:
//! - the plain EM variant keeps the first S terms as they are;
//! - the regularized variant (the paper's default) shrinks each kept term by
//!   1 − σ̂²/λₛ, with σ̂² the noise variance per cell over the paper's residual
//!   degrees of freedom and λₛ on the n − 1 scale (`shrinkage`). Shrinking
//!   keeps noise out of the filled values, which the EM fit overfits when S is
//!   large or many cells are missing.
//!
//! Stopping: after each fit, the change ‖F(x) − x‖₂ / ‖F(x)‖₂ over the filled
//! cells is compared with the tolerance (default 1e-12), and the steps are
//! accelerated by a fixed-order squared extrapolation (`squarem`), so the
//! default fill lies within about 1e-12 relative of the fixed point in 16 to
//! 24 fits on the test tables (tests/imputation.rs).
//!
//! **Nearest neighbours.** Each feature is standardised by its observed mean and
//! standard deviation. For a row with a missing cell, the distance to another
//! row with that feature observed is the root of the *mean* squared difference
//! over the features both rows observe (a sum would make rows that share more
//! observed features look farther apart only because more terms were added);
//! the k nearest (ties to the lower row number) give the mean of their values
//! for the cell.

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
    /// Fits of the S-component model (each one decomposition), all counted.
    pub iterations: usize,
    /// Extrapolated steps taken (`squarem`).
    pub extrapolations: usize,
    /// ‖F(x) − x‖₂ / ‖F(x)‖₂ over the filled cells at the last fit.
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
    if s == 0 || s >= p.min(n.saturating_sub(1)) || degrees_of_freedom(n, p, s) <= 0.0 {
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
        extrapolations: 0,
        final_change: 0.0,
        converged: missing.is_empty(),
    };
    let mut fill = Fill {
        columns,
        missing: &missing,
        s,
        scaling,
        variant: settings.variant,
        model: ImputationModel::default(),
    };
    if missing.is_empty() {
        // Nothing to fill, but new rows scored by `apply` may have missing
        // cells: the complete table's model is fitted once for them.
        fill.map(&[])?;
        return Ok((report, fill.model));
    }
    let start: Vec<f64> = missing.iter().map(|&(i, j)| fill.columns[j][i]).collect();
    let last = squarem(&mut fill, start, &mut report)?;
    fill.set(&last);
    Ok((report, fill.model))
}

/// The paper's residual degrees of freedom, np − p − nS − pS + S² + S
/// (Josse & Husson 2012, §2.2): n·p cells less p means less the
/// nS + pS − S² − S free parameters of a rank-S fit.
fn degrees_of_freedom(n: usize, p: usize, s: usize) -> f64 {
    (n * p) as f64 - p as f64 - (n * s) as f64 - (p * s) as f64 + (s * s) as f64 + s as f64
}

/// One step of the fill, x ↦ F(x): the missing cells set to `x`, the
/// S-component fit of the completed table read back at those cells. Its fixed
/// point is the iterative-PCA fill.
struct Fill<'a> {
    columns: &'a mut [Vec<f64>],
    missing: &'a [(usize, usize)],
    s: usize,
    scaling: ScalingMethod,
    variant: IterativeVariant,
    /// The model of the latest fit.
    model: ImputationModel,
}

impl Fill<'_> {
    fn set(&mut self, x: &[f64]) {
        for (&(i, j), &v) in self.missing.iter().zip(x) {
            self.columns[j][i] = v;
        }
    }

    fn map(&mut self, x: &[f64]) -> Result<Vec<f64>, AnalysisError> {
        self.set(x);
        let (fitted, model) = fit(self.columns, self.s, self.scaling, self.variant)?;
        self.model = model;
        Ok(self.missing.iter().map(|&(i, j)| fitted[j][i]).collect())
    }
}

/// ‖x‖₂, summed in cell order.
fn norm(x: &[f64]) -> f64 {
    x.iter()
        .fold(crate::linalg::SUM_START, |sum, v| sum + v * v)
        .sqrt()
}

/// ‖new − old‖₂ / ‖new‖₂ (the difference alone when the new values are all 0).
fn change(old: &[f64], new: &[f64]) -> f64 {
    let diff: Vec<f64> = new.iter().zip(old).map(|(a, b)| a - b).collect();
    let size = norm(new);
    if size > 0.0 {
        norm(&diff) / size
    } else {
        norm(&diff)
    }
}

/// Iterates the fill to its fixed point with the squared extrapolation of
/// Varadhan & Roland (2008), "Simple and globally convergent methods for
/// accelerating the convergence of any EM algorithm", Scandinavian Journal of
/// Statistics 35:335–353 (scheme S3). From x₀, two plain steps give
/// x₁ = F(x₀), x₂ = F(x₁); with r = x₁ − x₀, v = x₂ − 2x₁ + x₀ and the step
/// length α = −‖r‖/‖v‖, x′ = x₀ − 2αr + α²v, and the cycle ends with the plain
/// step x₀ ← F(x′). α is kept between −1 (which makes x′ = x₂, plain steps)
/// and −[`STEP_CAP_START`]·4ᵐ, the cap growing fourfold each time it binds, so
/// a slow fill earns long steps only after shorter ones worked; an
/// extrapolation that is not finite falls back to x₂. Every sum runs in cell
/// order, so the result does not depend on threads.
///
/// After every fit, the change ‖F(x) − x‖₂ / ‖F(x)‖₂ is compared with the
/// tolerance; the fill stops at the first fit below it (`converged`), or after
/// `max_iterations` fits. Returns the last fitted values.
fn squarem(
    fill: &mut Fill,
    mut x0: Vec<f64>,
    report: &mut IterativeReport,
) -> Result<Vec<f64>, AnalysisError> {
    // One fit: counted, and checked against the tolerance.
    let step = |fill: &mut Fill, x: &[f64], report: &mut IterativeReport| {
        let next = fill.map(x)?;
        report.iterations += 1;
        report.final_change = change(x, &next);
        report.converged = report.final_change < report.tolerance;
        let done = report.converged || report.iterations >= report.max_iterations;
        Ok::<_, AnalysisError>((next, done))
    };
    let mut cap = STEP_CAP_START;
    loop {
        let (x1, done) = step(fill, &x0, report)?;
        if done {
            return Ok(x1);
        }
        let (x2, done) = step(fill, &x1, report)?;
        if done {
            return Ok(x2);
        }
        let r: Vec<f64> = x1.iter().zip(&x0).map(|(a, b)| a - b).collect();
        let v: Vec<f64> = (0..x0.len()).map(|c| x2[c] - x1[c] - r[c]).collect();
        let (nr, nv) = (norm(&r), norm(&v));
        let mut alpha = if nv > 0.0 { (-nr / nv).min(-1.0) } else { -1.0 };
        if alpha <= -cap {
            alpha = -cap;
            cap *= 4.0;
        }
        let jump: Vec<f64> = (0..x0.len())
            .map(|c| x0[c] - 2.0 * alpha * r[c] + alpha * alpha * v[c])
            .collect();
        let start = if jump.iter().all(|v| v.is_finite()) {
            report.extrapolations += 1;
            jump
        } else {
            x2
        };
        let (x3, done) = step(fill, &start, report)?;
        if done {
            return Ok(x3);
        }
        x0 = x3;
    }
}

/// The first cap on the extrapolation's step length |α| (`squarem`).
const STEP_CAP_START: f64 = 1.0;

/// The factor each kept singular value is multiplied by in the regularized
/// fit, from the eigenvalues λ (divisor n − 1) of the completed, scaled table.
///
/// Josse & Husson (2012), §2.2, fit the missing cells with
/// x̂ᵢⱼ = Σₛ (√λₛ − σ̂²/√λₛ) uᵢₛ vⱼₛ, i.e. each kept term shrunk by
/// (1 − σ̂²/λₛ), with the noise variance per cell
/// σ̂² = ‖X − X̂_S‖² / (np − p − nS − pS + S² + S), the residual sum of squares
/// over the residual degrees of freedom. Here ‖X − X̂_S‖² = Σ_{s>S} dₛ²
/// = (n − 1) Σ_{s>S} λₛ, and λₛ is on sextant's n − 1 scale (the eigenvalue
/// reported everywhere else), so the factor is
/// 1 − σ̂²/λₛ = 1 − (n − 1) σ̂² / dₛ², floored at 0.
fn shrinkage(eigenvalues: &[f64], n: usize, p: usize, s: usize) -> Vec<f64> {
    let rows_less_one = (n - 1) as f64;
    let residual = eigenvalues[s..]
        .iter()
        .fold(crate::linalg::SUM_START, |sum, l| sum + l * rows_less_one);
    let sigma2 = residual / degrees_of_freedom(n, p, s);
    eigenvalues[..s]
        .iter()
        .map(|&l| (1.0 - sigma2 / l).max(0.0))
        .collect()
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
    let factors: Vec<f64> = match variant {
        IterativeVariant::Em => vec![1.0; s],
        IterativeVariant::Regularized => shrinkage(&d.eigenvalues, n, p, s),
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
    use super::accumulate::Statistic;
    // The missing stage's and the scaling stage's own statistics.
    let mut observed = super::missing::Observed::new();
    observed.push(column);
    let mean = observed.finish().moments.mean;
    let mut deviations = super::scale::Deviations::about(mean);
    let mut count = 0;
    for &v in column.iter().filter(|v| !v.is_nan()) {
        deviations.add(v);
        count += 1;
    }
    // One observed cell has no spread; standardising then divides by 1.
    let sd = if count > 1 { deviations.finish() } else { 0.0 };
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

    /// By hand: n = 10, p = 3, S = 1, λ = 4, 1, 0.5 (divisor n − 1). The
    /// residual sum of squares is 9 · 1.5 = 13.5 over np − p − nS − pS + S² + S
    /// = 16 degrees of freedom, σ̂² = 0.84375, and the kept term is shrunk by
    /// 1 − σ̂²/λ₁ = 0.7890625 (all exact in binary).
    #[test]
    fn the_shrinkage_is_one_less_the_noise_over_the_eigenvalue() {
        assert_eq!(degrees_of_freedom(10, 3, 1), 16.0);
        assert_eq!(shrinkage(&[4.0, 1.0, 0.5], 10, 3, 1), vec![0.7890625]);
        // Noise above an eigenvalue shrinks its term to nothing, never below.
        assert_eq!(shrinkage(&[1.0, 1.0, 1.0], 4, 3, 1), vec![0.0]);
    }

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
