//! Missing cells: drop features that miss too much, then drop rows or fill cells.
//!
//! The share of missing cells is measured on every row of the table, before any
//! row is dropped. Cells are filled from the same feature's observed cells
//! (mean, median), from a PCA model of the table (iterative PCA) or from the
//! nearest rows (knn); see [`super::impute`]. Every filled cell is listed, and a
//! filled value outside its feature's observed range is reported as a warning.

use super::FeatureData;
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

/// The recipe's missing-cell settings.
#[derive(Debug, Clone)]
pub struct MissingSettings {
    pub method: MissingMethod,
    pub max_share: f64,
    pub iterative: RawIterative,
    pub knn: RawKnn,
    /// Components of the iterative PCA model (already resolved from the recipe).
    pub components: usize,
    /// The recipe's scaling, which iterative PCA re-estimates each iteration.
    pub scaling: ScalingMethod,
}

/// Applies the recipe's missing-cell policy; the output has no `NaN`.
pub fn handle_missing(
    mut data: FeatureData,
    settings: &MissingSettings,
) -> Result<(FeatureData, MissingReport, Vec<FilledCell>, FillModel), Error> {
    let n = data.n_rows();
    let max_share = settings.max_share;
    let mut reports = Vec::new();
    let mut kept = Vec::new();
    // Each kept feature's observed cells: the mean fill and the range filled
    // values are compared with.
    let mut observed = Vec::new();
    for feature in data.features.drain(..) {
        let mut counts = Observed::new();
        counts.push(&feature.values);
        let counts = counts.finish();
        let report = FeatureMissing::counted(&feature.name, counts.missing, n, max_share);
        if report.dropped.is_none() {
            kept.push(feature);
            observed.push(counts);
        }
        reports.push(report);
    }
    data.features = kept;
    if data.features.is_empty() {
        return Err(every_feature_dropped(&data.source, max_share));
    }

    let gaps: Vec<Vec<bool>> = data
        .features
        .iter()
        .map(|f| f.values.iter().map(|v| v.is_nan()).collect())
        .collect();
    let mut iterative_report = None;
    let mut fill_model = FillModel::DropRows;
    let mut rows_dropped = 0;
    match settings.method {
        MissingMethod::DropRows => rows_dropped = drop_incomplete_rows(&mut data),
        MissingMethod::Mean | MissingMethod::Median => {
            fill_model = FillModel::Constant(fill_constant(
                &mut data,
                &observed,
                settings.method,
                &mut reports,
            ));
        }
        MissingMethod::IterativePca | MissingMethod::Knn => {
            let mut columns: Vec<Vec<f64>> =
                data.features.iter().map(|f| f.values.clone()).collect();
            if settings.method == MissingMethod::Knn {
                fill_model = FillModel::Knn {
                    reference: columns.clone(),
                };
                knn(&mut columns, settings.knn.neighbours.0.get());
            } else {
                let (r, model) = iterative_pca(
                    &mut columns,
                    &settings.iterative,
                    settings.components,
                    settings.scaling,
                )?;
                fill_model = FillModel::Iterative(model);
                if !r.converged && !settings.iterative.allow_unconverged {
                    return Err(crate::error::AnalysisError::Imputation {
                        reason: format!(
                            "iterative PCA did not converge in {} iterations (last relative change {:e}, tolerance {:e}); raise max_iterations, lower components, or set allow_unconverged = true",
                            r.iterations, r.final_change, r.tolerance
                        ),
                    }
                    .into());
                }
                iterative_report = Some(r);
            }
            for (f, c) in data.features.iter_mut().zip(columns) {
                f.values = c;
            }
        }
    }

    let mut filled_cells = Vec::new();
    let mut warnings = Vec::new();
    if settings.method != MissingMethod::DropRows {
        for (j, f) in data.features.iter().enumerate() {
            let report = reports
                .iter_mut()
                .find(|r| r.feature == f.name)
                .expect("every kept feature has a report");
            let (lo, hi) = (observed[j].moments.min, observed[j].moments.max);
            let mut values = Filled::within(lo, hi);
            let name: std::sync::Arc<str> = f.name.as_str().into();
            for (i, &gap) in gaps[j].iter().enumerate() {
                if gap {
                    values.add(f.values[i]);
                    filled_cells.push(FilledCell {
                        row: data.rows[i],
                        feature: name.clone(),
                        value: f.values[i],
                    });
                }
            }
            report.record_fill(&values.finish(), &mut warnings);
        }
        filled_cells.sort_by_key(|c| c.row);
    }
    if data.n_rows() < 2 {
        return Err(too_few_rows(&data.source, data.n_rows(), rows_dropped));
    }
    let cells_filled = reports.iter().map(|r| r.filled).sum();
    Ok((
        data,
        MissingReport {
            method: settings.method,
            max_feature_missing: max_share,
            rows_in: n,
            rows_dropped,
            cells_filled,
            features: reports,
            iterative_pca: iterative_report,
            knn_neighbours: (settings.method == MissingMethod::Knn)
                .then_some(settings.knn.neighbours.0.get()),
            warnings,
        },
        filled_cells,
        fill_model,
    ))
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
    use crate::text::number;
    format!(
        "{count} filled value(s) of `{feature}` lie outside its observed range [{}, {}]",
        number(lo),
        number(hi)
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
            format!(" after dropping {dropped} row(s) with missing cells")
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

fn drop_incomplete_rows(data: &mut FeatureData) -> usize {
    let n = data.n_rows();
    let complete: Vec<bool> = (0..n)
        .map(|i| data.features.iter().all(|f| !f.values[i].is_nan()))
        .collect();
    for f in &mut data.features {
        retain_where(&mut f.values, &complete);
    }
    retain_where(&mut data.rows, &complete);
    retain_where(&mut data.lines, &complete);
    n - data.n_rows()
}

/// Keeps the items whose flag in `keep` is true.
fn retain_where<T>(items: &mut Vec<T>, keep: &[bool]) {
    let mut flags = keep.iter();
    items.retain(|_| *flags.next().expect("one flag per item"));
}

/// Fills each feature's missing cells with one value, its mean or median, and
/// returns those values.
fn fill_constant(
    data: &mut FeatureData,
    observed: &[ObservedReport],
    method: MissingMethod,
    reports: &mut [FeatureMissing],
) -> Vec<f64> {
    let mut values = Vec::new();
    for (feature, observed) in data.features.iter_mut().zip(observed) {
        // The median needs a copy to sort.
        let value = match method {
            MissingMethod::Median => median(
                feature
                    .values
                    .iter()
                    .copied()
                    .filter(|v| !v.is_nan())
                    .collect(),
            ),
            _ => mean_fill(observed),
        };
        for v in feature.values.iter_mut().filter(|v| v.is_nan()) {
            *v = value;
        }
        let report = reports
            .iter_mut()
            .find(|r| r.feature == feature.name)
            .expect("every kept feature has a report");
        report.fill_value = Some(value);
        values.push(value);
    }
    values
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
    use crate::stages::Feature;

    fn data(columns: Vec<Vec<f64>>) -> FeatureData {
        let n = columns[0].len();
        FeatureData {
            features: columns
                .into_iter()
                .enumerate()
                .map(|(j, values)| Feature {
                    name: format!("f{j}"),
                    values,
                    transform: None,
                })
                .collect(),
            rows: (0..n).collect(),
            lines: (2..n as u64 + 2).collect(),
            source: "t.csv".into(),
        }
    }

    const NA: f64 = f64::NAN;

    fn settings(method: MissingMethod, max_share: f64) -> MissingSettings {
        MissingSettings {
            method,
            max_share,
            iterative: RawIterative::default(),
            knn: RawKnn::default(),
            components: 2,
            scaling: ScalingMethod::UnitVariance,
        }
    }

    #[test]
    fn median_fill_and_counts() {
        let d = data(vec![vec![1.0, NA, 3.0, 10.0], vec![1.0, 2.0, 3.0, 4.0]]);
        let (out, report, filled, _) =
            handle_missing(d, &settings(MissingMethod::Median, 0.5)).unwrap();
        assert_eq!(
            filled,
            vec![FilledCell {
                row: 1,
                feature: "f0".into(),
                value: 3.0
            }]
        );
        assert_eq!(out.features[0].values, vec![1.0, 3.0, 3.0, 10.0]);
        assert_eq!(report.features[0].filled, 1);
        assert_eq!(report.cells_filled, 1);
    }

    #[test]
    fn too_sparse_feature_is_dropped_then_rows() {
        let d = data(vec![vec![NA, NA, 3.0, 1.0], vec![1.0, NA, 3.0, 4.0]]);
        let (out, report, _, _) =
            handle_missing(d, &settings(MissingMethod::DropRows, 0.3)).unwrap();
        assert_eq!(out.features.len(), 1);
        assert!(report.features[0].dropped.is_some());
        assert_eq!(out.rows, vec![0, 2, 3]);
        assert_eq!(out.lines, vec![2, 4, 5]);
        assert_eq!(report.rows_dropped, 1);
    }
}
