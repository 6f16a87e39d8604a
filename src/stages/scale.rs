//! Centring and scaling, feature by feature.
//!
//! Definitions (van den Berg et al. 2006, "Centering, scaling, and transformations",
//! BMC Genomics 7:142): unit variance divides by the standard deviation, Pareto by
//! its square root, range by max − min; all of them centre on the mean first.
//! Standard deviations use the divisor n − 1.

use super::FeatureData;
use crate::error::{AnalysisError, Error, InputError};
use crate::linalg::Matrix;
use crate::recipe::raw::{ConstantPolicy, ScalingMethod};
use serde::Serialize;

/// How one feature was centred and scaled: scaled = (x − centre) / scale.
#[derive(Debug, Clone, Serialize)]
pub struct FeatureScale {
    pub feature: String,
    pub mean: f64,
    pub sd: f64,
    pub min: f64,
    pub max: f64,
    pub centre: f64,
    pub scale: f64,
}

/// The scaling stage's report.
#[derive(Debug, Clone, Serialize)]
pub struct ScaleReport {
    pub method: ScalingMethod,
    pub constant_features: ConstantPolicy,
    pub features: Vec<FeatureScale>,
    /// Constant features dropped under `constant_features = "drop"`.
    pub dropped_constant: Vec<String>,
}

/// The scaled data: rows × features, ready for the decomposition.
#[derive(Debug, Clone)]
pub struct Scaled {
    pub names: Vec<String>,
    /// The values, or `None` when the passes engine analysed the table in
    /// passes without holding it (see [`crate::stream`]).
    pub matrix: Option<Matrix>,
    /// Index in the table of each analysed row (empty in passes, where each
    /// row's table row travels with its results).
    pub rows: Vec<usize>,
    /// The number of analysed rows.
    pub analysed: usize,
}

impl Scaled {
    pub fn n_rows(&self) -> usize {
        self.analysed
    }

    pub fn n_features(&self) -> usize {
        self.names.len()
    }

    /// The values held in memory; only the in-memory engine's stages call this.
    pub fn data(&self) -> &Matrix {
        self.matrix
            .as_ref()
            .expect("the in-memory engine holds the scaled values")
    }
}

/// Centres and scales every feature.
pub fn scale(
    data: FeatureData,
    method: ScalingMethod,
    constant: ConstantPolicy,
) -> Result<(Scaled, ScaleReport), Error> {
    let mut report = ScaleReport {
        method,
        constant_features: constant,
        features: Vec::new(),
        dropped_constant: Vec::new(),
    };
    let mut columns = Vec::new();
    let mut names = Vec::new();
    for mut feature in data.features {
        let stats = FeatureScale::measure(&feature.name, &feature.values, method);
        if method.divides() && stats.min == stats.max {
            match constant {
                ConstantPolicy::Error => {
                    return Err(InputError::ConstantFeature {
                        path: data.source.clone(),
                        column: feature.name,
                        value: crate::text::number(stats.min),
                        scaling: method.name(),
                    }
                    .into());
                }
                ConstantPolicy::Drop => {
                    report.dropped_constant.push(feature.name);
                    continue;
                }
            }
        }
        // In place: the unscaled values are not needed again.
        for v in feature.values.iter_mut() {
            *v = (*v - stats.centre) / stats.scale;
        }
        let squares: f64 = feature.values.iter().map(|z| z * z).sum();
        check_finite(&data.source, &feature.name, &stats, squares, method)?;
        columns.push(feature.values);
        names.push(feature.name);
        report.features.push(stats);
    }
    if names.is_empty() {
        return Err(InputError::NoFeatures {
            path: data.source,
            why: " (every feature is constant)".into(),
        }
        .into());
    }
    Ok((
        Scaled {
            names,
            matrix: Some(Matrix::from_columns(&columns)),
            analysed: data.rows.len(),
            rows: data.rows,
        },
        report,
    ))
}

/// Refuses values whose mean, spread or squares overflow double precision: the
/// decomposition sums squares of the scaled values, and an infinity there would
/// silently turn into a zero loading or a meaningless total. Also refuses a
/// dividing scaling whose divisor underflowed to zero although the values
/// differ (deviations below about 1e-162 have squares that round to zero): the
/// scaled values would be infinite, which is not an overflow of the data.
pub fn check_finite(
    source: &str,
    name: &str,
    stats: &FeatureScale,
    squares: f64,
    method: ScalingMethod,
) -> Result<(), AnalysisError> {
    use crate::error::OverflowPart;
    let overflow = |what| AnalysisError::Overflow {
        path: source.to_string(),
        column: name.to_string(),
        what,
        scaling: method.name(),
    };
    if !stats.mean.is_finite() {
        return Err(overflow(OverflowPart::Sum));
    }
    if !stats.sd.is_finite() || !stats.scale.is_finite() {
        return Err(overflow(OverflowPart::Spread));
    }
    if method.divides() && stats.scale == 0.0 && stats.min != stats.max {
        return Err(AnalysisError::Underflow {
            path: source.to_string(),
            column: name.to_string(),
            min: crate::text::number(stats.min),
            max: crate::text::number(stats.max),
            spread: match method {
                ScalingMethod::Range => "range",
                _ => "standard deviation",
            },
        });
    }
    if !squares.is_finite() {
        return Err(overflow(OverflowPart::ScaledSquares));
    }
    Ok(())
}

impl FeatureScale {
    fn measure(name: &str, values: &[f64], method: ScalingMethod) -> FeatureScale {
        let n = values.len() as f64;
        let mean = super::missing::mean(values);
        // Two passes (mean, then squared deviations) for accuracy.
        let ss: f64 = values.iter().map(|v| (v - mean) * (v - mean)).sum();
        let sd = (ss / (n - 1.0)).sqrt();
        let min = values.iter().copied().fold(f64::INFINITY, f64::min);
        let max = values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        FeatureScale::from_moments(name, mean, sd, min, max, method)
    }

    /// The centre and scale `method` takes from a feature's mean, standard
    /// deviation and range (however they were summed).
    pub fn from_moments(
        name: &str,
        mean: f64,
        sd: f64,
        min: f64,
        max: f64,
        method: ScalingMethod,
    ) -> FeatureScale {
        let centre = if method.centers() { mean } else { 0.0 };
        let scale = match method {
            ScalingMethod::None | ScalingMethod::Center => 1.0,
            ScalingMethod::UnitVariance => sd,
            ScalingMethod::Pareto => sd.sqrt(),
            ScalingMethod::Range => max - min,
        };
        FeatureScale {
            feature: name.to_string(),
            mean,
            sd,
            min,
            max,
            centre,
            scale,
        }
    }
}
