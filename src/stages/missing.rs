//! Missing cells: drop features that miss too much, then drop rows or fill cells.
//!
//! The share of missing cells is measured on every row of the table, before any
//! row is dropped. Fill values come from the observed cells of the same feature.

use super::FeatureData;
use crate::error::InputError;
use crate::recipe::raw::MissingMethod;
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
    /// Cells filled, and the value used.
    pub filled: usize,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub fill_value: Option<f64>,
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
}

/// Applies the recipe's missing-cell policy; the output has no `NaN`.
pub fn handle_missing(
    mut data: FeatureData,
    method: MissingMethod,
    max_share: f64,
) -> Result<(FeatureData, MissingReport), InputError> {
    let n = data.n_rows();
    let mut reports = Vec::new();
    let mut kept = Vec::new();
    for feature in data.features.drain(..) {
        let missing = feature.values.iter().filter(|v| v.is_nan()).count();
        let share = if n == 0 {
            0.0
        } else {
            missing as f64 / n as f64
        };
        let dropped = if missing == n {
            Some("no observed cells".to_string())
        } else if share > max_share {
            Some(format!(
                "missing share above max_feature_missing = {max_share}"
            ))
        } else {
            None
        };
        reports.push(FeatureMissing {
            feature: feature.name.clone(),
            missing,
            share,
            dropped: dropped.clone(),
            filled: 0,
            fill_value: None,
        });
        if dropped.is_none() {
            kept.push(feature);
        }
    }
    data.features = kept;
    if data.features.is_empty() {
        return Err(InputError::NoFeatures {
            path: data.source.clone(),
            why: format!(
                " (every feature misses more than max_feature_missing = {max_share} of its cells)"
            ),
        });
    }

    let rows_dropped = match method {
        MissingMethod::DropRows => drop_incomplete_rows(&mut data),
        MissingMethod::Mean | MissingMethod::Median => {
            fill(&mut data, method, &mut reports);
            0
        }
    };
    if data.n_rows() < 2 {
        return Err(InputError::TooFewRows {
            path: data.source.clone(),
            rows: data.n_rows(),
            why: if rows_dropped > 0 {
                format!(" after dropping {rows_dropped} row(s) with missing cells")
            } else {
                String::new()
            },
        });
    }
    let cells_filled = reports.iter().map(|r| r.filled).sum();
    Ok((
        data,
        MissingReport {
            method,
            max_feature_missing: max_share,
            rows_in: n,
            rows_dropped,
            cells_filled,
            features: reports,
        },
    ))
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

fn fill(data: &mut FeatureData, method: MissingMethod, reports: &mut [FeatureMissing]) {
    for feature in &mut data.features {
        let observed: Vec<f64> = feature
            .values
            .iter()
            .copied()
            .filter(|v| !v.is_nan())
            .collect();
        let missing = feature.values.len() - observed.len();
        let value = match method {
            MissingMethod::Median => median(observed),
            _ => mean(&observed),
        };
        for v in feature.values.iter_mut().filter(|v| v.is_nan()) {
            *v = value;
        }
        let report = reports
            .iter_mut()
            .find(|r| r.feature == feature.name)
            .expect("every kept feature has a report");
        report.filled = missing;
        report.fill_value = Some(value);
    }
}

/// The mean, summed in row order.
pub fn mean(values: &[f64]) -> f64 {
    values.iter().sum::<f64>() / values.len() as f64
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

    #[test]
    fn median_fill_and_counts() {
        let d = data(vec![vec![1.0, NA, 3.0, 10.0], vec![1.0, 2.0, 3.0, 4.0]]);
        let (out, report) = handle_missing(d, MissingMethod::Median, 0.5).unwrap();
        assert_eq!(out.features[0].values, vec![1.0, 3.0, 3.0, 10.0]);
        assert_eq!(report.features[0].filled, 1);
        assert_eq!(report.cells_filled, 1);
    }

    #[test]
    fn too_sparse_feature_is_dropped_then_rows() {
        let d = data(vec![vec![NA, NA, 3.0, 1.0], vec![1.0, NA, 3.0, 4.0]]);
        let (out, report) = handle_missing(d, MissingMethod::DropRows, 0.3).unwrap();
        assert_eq!(out.features.len(), 1);
        assert!(report.features[0].dropped.is_some());
        assert_eq!(out.rows, vec![0, 2, 3]);
        assert_eq!(out.lines, vec![2, 4, 5]);
        assert_eq!(report.rows_dropped, 1);
    }
}
