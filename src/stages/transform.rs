//! Per-feature transforms (log10, ln, sqrt), applied first, before missing cells
//! are filled and before scaling. Logarithms come from the pure-Rust `libm` crate so
//! no platform math library can change a digit.

use super::FeatureData;
use crate::error::InputError;
use crate::recipe::plan::Transform;
use serde::Serialize;

/// One applied transform.
#[derive(Debug, Clone, Serialize)]
pub struct Applied {
    pub feature: String,
    pub transform: Transform,
}

/// Applies each feature's transform to its observed cells (missing cells stay
/// missing and are filled afterwards, on the transformed scale); a value outside
/// the transform's domain is an error naming the cell.
pub fn apply_transforms(mut data: FeatureData) -> Result<(FeatureData, Vec<Applied>), InputError> {
    let mut applied = Vec::new();
    for feature in &mut data.features {
        let Some(t) = feature.transform else { continue };
        for (i, v) in feature.values.iter_mut().enumerate() {
            if v.is_nan() {
                continue; // a missing cell, filled later on the transformed scale
            }
            let Some(out) = transform_value(t, *v) else {
                return Err(domain_error(
                    &data.source,
                    data.lines[i],
                    &feature.name,
                    *v,
                    t,
                ));
            };
            *v = out;
        }
        applied.push(Applied {
            feature: feature.name.clone(),
            transform: t,
        });
    }
    Ok((data, applied))
}

/// One observed value transformed, or `None` outside the transform's domain.
pub fn transform_value(t: Transform, v: f64) -> Option<f64> {
    let ok = match t {
        Transform::Log10 | Transform::Ln => v > 0.0,
        Transform::Sqrt => v >= 0.0,
    };
    ok.then(|| match t {
        Transform::Log10 => libm::log10(v),
        Transform::Ln => libm::log(v),
        Transform::Sqrt => v.sqrt(), // IEEE 754 square root is correctly rounded everywhere
    })
}

/// The value in the feature's own units whose transform is `v`: the inverse
/// of [`transform_value`] (10^v, e^v or v²), for reporting filled cells.
pub fn original_value(t: Transform, v: f64) -> f64 {
    match t {
        Transform::Log10 => libm::pow(10.0, v),
        Transform::Ln => libm::exp(v),
        Transform::Sqrt => v * v,
    }
}

/// The error for a value outside a transform's domain.
pub fn domain_error(source: &str, line: u64, column: &str, v: f64, t: Transform) -> InputError {
    InputError::BadTransformValue {
        path: source.to_string(),
        line,
        column: column.to_string(),
        value: crate::text::number(v),
        transform: t.name(),
        need: if t == Transform::Sqrt {
            "a value ≥ 0"
        } else {
            "a value > 0"
        },
    }
}

impl Applied {
    pub fn transform_name(&self) -> &'static str {
        self.transform.name()
    }
}
