//! Missing cells: drop features that miss too much, then drop rows or fill cells.
//!
//! The share of missing cells is measured on every row of the table, before any
//! row is dropped. Cells are filled from the same feature's observed cells
//! (mean, median), from a PCA model of the table (iterative PCA) or from the
//! nearest rows (knn); see [`super::impute`]. Every filled cell is listed, and a
//! filled value outside its feature's observed range is reported as a warning.

use super::accumulate::Statistic;
use super::impute::{IterativeReport, iterative_pca, knn};
use super::scale::{Moments, MomentsReport};
use crate::error::{Error, InputError};
use crate::recipe::raw::{MissingMethod, RawIterative, RawKnn, ScalingMethod};
use serde::Serialize;

/// What the missing stage did to one feature.
#[derive(Debug, Clone, Serialize)]
pub struct FeatureMissing {
    pub feature: String,
    pub missing: usize,
    pub share: f64,
    /// Why the feature was dropped, if it was.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub dropped: Option<String>,
    /// Cells filled; the single fill value (mean, median) or the mean of the
    /// values filled by a model.
    pub filled: usize,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub fill_value: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub mean_filled: Option<f64>,
    /// Filled values below the observed minimum or above the observed maximum.
    pub filled_outside_observed_range: usize,
}

/// The missing stage's report.
#[derive(Debug, Clone, Serialize)]
pub struct MissingReport {
    pub method: MissingMethod,
    pub max_feature_missing: f64,
    pub rows_in: usize,
    pub rows_dropped: usize,
    pub cells_filled: usize,
    pub features: Vec<FeatureMissing>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub iterative_pca: Option<IterativeReport>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub knn_neighbours: Option<usize>,
    pub warnings: Vec<String>,
}

/// How missing cells of new rows are to be filled, learnt from the analysed table
/// (one entry per kept feature, in order).
#[derive(Debug, Clone)]
pub enum FillModel {
    /// Rows with a missing cell are not analysed.
    DropRows,
    /// One value per feature.
    Constant(Vec<f64>),
    /// The iterative PCA imputation model.
    Iterative(super::impute::ImputationModel),
    /// The analysed rows before filling (`NaN` where missing), for neighbours.
    Knn { reference: Vec<Vec<f64>> },
}

/// One filled cell: the table row (0-based), the feature and the value. The
/// feature's name is shared by all its cells (a large table can have millions).
#[derive(Debug, Clone, PartialEq)]
pub struct FilledCell {
    pub row: usize,
    pub feature: std::sync::Arc<str>,
    pub value: f64,
}

/// The recipe's settings for the methods that fill from a model of the table.
#[derive(Debug, Clone)]
pub struct ModelSettings {
    pub method: MissingMethod,
    pub iterative: RawIterative,
    pub knn: RawKnn,
    /// Components of the iterative PCA model (already resolved from the recipe).
    pub components: usize,
    /// The recipe's scaling, which iterative PCA re-estimates each iteration.
    pub scaling: ScalingMethod,
}

/// The missing stage's first decision: which features miss too much (a report
/// per feature, in order) and the indices of those kept. Refuses a table
/// whose every feature is dropped.
pub fn keep_features(
    source: &str,
    names: &[String],
    observed: &[ObservedReport],
    n: usize,
    max_share: f64,
) -> Result<(Vec<FeatureMissing>, Vec<usize>), Error> {
    let mut reports = Vec::new();
    let mut kept = Vec::new();
    for (j, (name, o)) in names.iter().zip(observed).enumerate() {
        let report = FeatureMissing::counted(name, o.missing, n, max_share);
        if report.dropped.is_none() {
            kept.push(j);
        }
        reports.push(report);
    }
    if kept.is_empty() {
        return Err(every_feature_dropped(source, max_share));
    }
    Ok((reports, kept))
}

/// What filling from a model gives besides the filled values.
pub struct ModelFill {
    pub model: FillModel,
    pub iterative: Option<IterativeReport>,
}

/// Fills the missing (`NaN`) cells of the kept features' columns, a matrix
/// view of the whole table, by k nearest neighbours or iterative PCA.
pub fn fill_by_model(
    columns: &mut [Vec<f64>],
    settings: &ModelSettings,
) -> Result<ModelFill, Error> {
    if settings.method == MissingMethod::Knn {
        let reference = columns.to_vec();
        knn(columns, settings.knn.neighbours.0.get());
        return Ok(ModelFill {
            model: FillModel::Knn { reference },
            iterative: None,
        });
    }
    let (r, model) = iterative_pca(
        columns,
        &settings.iterative,
        settings.components,
        settings.scaling,
    )?;
    if !r.converged && !settings.iterative.allow_unconverged {
        return Err(crate::error::AnalysisError::Imputation {
            reason: format!(
                "iterative PCA did not converge in {} (last relative change {}, tolerance {}); raise max_iterations, lower components, or set allow_unconverged = true",
                crate::text::count(r.iterations, "iteration", "iterations"),
                crate::text::readable(r.final_change),
                crate::text::readable(r.tolerance)
            ),
        }
        .into());
    }
    Ok(ModelFill {
        model: FillModel::Iterative(model),
        iterative: Some(r),
    })
}

/// The median fill of a feature: the median of its observed cells.
pub fn median_fill(column: &[f64]) -> f64 {
    median(column.iter().copied().filter(|v| !v.is_nan()).collect())
}

impl FeatureMissing {
    /// A feature with `missing` of its `n` cells missing, dropped if that is
    /// too many ([`drop_reason`]); nothing filled yet.
    pub fn counted(feature: &str, missing: usize, n: usize, max_share: f64) -> FeatureMissing {
        FeatureMissing {
            feature: feature.to_string(),
            missing,
            share: if n == 0 {
                0.0
            } else {
                missing as f64 / n as f64
            },
            dropped: drop_reason(missing, n, max_share),
            filled: 0,
            fill_value: None,
            mean_filled: None,
            filled_outside_observed_range: 0,
        }
    }

    /// Records what was filled, and warns of filled values outside the
    /// feature's observed range.
    pub fn record_fill(&mut self, filled: &FilledReport, warnings: &mut Vec<String>) {
        self.filled = filled.count;
        if filled.count > 0 {
            self.mean_filled = Some(filled.mean);
        }
        self.filled_outside_observed_range = filled.outside;
        if filled.outside > 0 {
            warnings.push(outside_range_warning(
                filled.outside,
                &self.feature,
                filled.low,
                filled.high,
            ));
        }
    }
}

/// The warning for filled values outside a feature's observed range [lo, hi].
fn outside_range_warning(count: usize, feature: &str, lo: f64, hi: f64) -> String {
    use crate::text::{count as counted, readable};
    let values = counted(count, "filled value", "filled values");
    let verb = if count == 1 { "lies" } else { "lie" };
    format!(
        "{values} of `{feature}` {verb} outside its observed range [{}, {}]",
        readable(lo),
        readable(hi)
    )
}

/// Why a feature with `missing` of `n` cells missing is dropped, if it is.
pub fn drop_reason(missing: usize, n: usize, max_share: f64) -> Option<String> {
    if missing == n {
        Some("no observed cells".to_string())
    } else if missing as f64 / n as f64 > max_share {
        Some(format!(
            "missing share above max_feature_missing = {max_share}"
        ))
    } else {
        None
    }
}

/// The error when every feature misses too much.
pub fn every_feature_dropped(source: &str, max_share: f64) -> Error {
    InputError::NoFeatures {
        path: source.to_string(),
        why: format!(
            " (every feature misses more than max_feature_missing = {max_share} of its cells)"
        ),
    }
    .into()
}

/// The error when fewer than two rows are left to analyse (`dropped` of them
/// dropped for missing cells).
pub fn too_few_rows(source: &str, rows: usize, dropped: usize) -> Error {
    InputError::TooFewRows {
        path: source.to_string(),
        rows,
        why: if dropped > 0 {
            format!(
                " after dropping {} with missing cells",
                crate::text::count(dropped, "row", "rows")
            )
        } else {
            String::new()
        },
    }
    .into()
}

/// The mean fill of a feature: the mean of its observed cells.
pub fn mean_fill(observed: &ObservedReport) -> f64 {
    observed.moments.mean
}

/// A feature's missing cells counted, and the count, sum and range of its
/// observed cells ([`Moments`]), in row order.
#[derive(Debug, Clone, Copy, Default)]
pub struct Observed {
    missing: usize,
    moments: Moments,
}

/// What [`Observed`] gives.
#[derive(Debug, Clone, Copy)]
pub struct ObservedReport {
    pub missing: usize,
    pub moments: MomentsReport,
}

impl Observed {
    pub fn new() -> Observed {
        Observed::default()
    }

    /// [`Statistic::add`] for a value already known to be observed (not
    /// `NaN`): the passes engine tests each cell once.
    #[inline]
    pub fn add_observed(&mut self, v: f64) {
        self.moments.add(v);
    }

    /// [`Statistic::add`] for a cell already known to be missing.
    #[inline]
    pub fn add_missing(&mut self) {
        self.missing += 1;
    }
}

impl Statistic for Observed {
    type Report = ObservedReport;

    /// A missing cell is `NaN`.
    #[inline]
    fn add(&mut self, v: f64) {
        if v.is_nan() {
            self.missing += 1;
        } else {
            self.moments.add(v);
        }
    }

    fn merge(&mut self, other: &Observed) {
        self.missing += other.missing;
        self.moments.merge(&other.moments);
    }

    fn finish(&self) -> ObservedReport {
        ObservedReport {
            missing: self.missing,
            moments: self.moments.finish(),
        }
    }
}

/// The values filled into one feature's cells: how many, their mean (summed
/// in row order in two doubles, as [`Moments`]) and how many lie outside the observed range [low, high].
#[derive(Debug, Clone, Copy)]
pub struct Filled {
    low: f64,
    high: f64,
    count: usize,
    sum: crate::linalg::sum::Sum,
    outside: usize,
}

/// What [`Filled`] gives.
#[derive(Debug, Clone, Copy)]
pub struct FilledReport {
    pub count: usize,
    pub mean: f64,
    pub outside: usize,
    pub low: f64,
    pub high: f64,
}

impl Filled {
    /// Nothing filled yet into a feature observed over [low, high].
    pub fn within(low: f64, high: f64) -> Filled {
        Filled {
            low,
            high,
            count: 0,
            sum: crate::linalg::sum::Sum::new(),
            outside: 0,
        }
    }
}

impl Statistic for Filled {
    type Report = FilledReport;

    fn add(&mut self, v: f64) {
        self.count += 1;
        self.sum.add(v);
        self.outside += usize::from(v < self.low || v > self.high);
    }

    fn merge(&mut self, other: &Filled) {
        self.count += other.count;
        self.sum.merge(&other.sum);
        self.outside += other.outside;
    }

    fn finish(&self) -> FilledReport {
        FilledReport {
            count: self.count,
            mean: self.sum.mean(self.count),
            outside: self.outside,
            low: self.low,
            high: self.high,
        }
    }
}

/// The mean, summed in row order in two doubles (within one rounding of the
/// exact mean, as [`Moments`]): the start of iterative PCA and the centre of
/// the neighbours' distances take it.
pub fn mean(values: &[f64]) -> f64 {
    crate::linalg::sum::mean(values)
}

/// The median; the mean of the two middle values when the count is even.
pub fn median(mut values: Vec<f64>) -> f64 {
    values.sort_by(f64::total_cmp);
    let m = values.len() / 2;
    if values.len() % 2 == 1 {
        values[m]
    } else {
        (values[m - 1] + values[m]) / 2.0
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const NA: f64 = f64::NAN;

    #[test]
    fn the_median_fill_skips_missing_cells() {
        assert_eq!(median_fill(&[1.0, NA, 3.0, 10.0]), 3.0);
        assert_eq!(median_fill(&[4.0, NA, 1.0, 2.0, 3.0]), 2.5);
    }

    #[test]
    fn features_missing_too_much_are_dropped_and_all_dropped_is_refused() {
        let names = vec!["a".to_string(), "b".to_string()];
        let counted = |values: &[f64]| {
            let mut o = Observed::new();
            o.push(values);
            o.finish()
        };
        let observed = [counted(&[NA, NA, 3.0, 1.0]), counted(&[1.0, NA, 3.0, 4.0])];
        let (reports, kept) = keep_features("t.csv", &names, &observed, 4, 0.3).unwrap();
        assert_eq!(kept, vec![1]);
        assert!(reports[0].dropped.is_some() && reports[1].dropped.is_none());
        assert_eq!((reports[0].missing, reports[1].missing), (2, 1));
        let e = keep_features("t.csv", &names, &observed, 4, 0.2).unwrap_err();
        assert!(e.to_string().contains("max_feature_missing = 0.2"), "{e}");
    }
}
