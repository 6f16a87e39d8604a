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
            let ok = match t {
                Transform::Log10 | Transform::Ln => *v > 0.0,
                Transform::Sqrt => *v >= 0.0,
            };
            if !ok {
                return Err(InputError::BadTransformValue {
                    path: data.source.clone(),
                    line: data.lines[i],
                    column: feature.name.clone(),
                    value: crate::outputs::tables::number(*v),
                    transform: t.name(),
                    need: if t == Transform::Sqrt {
                        "a value ≥ 0"
                    } else {
                        "a value > 0"
                    },
                });
            }
            *v = match t {
                Transform::Log10 => libm::log10(*v),
                Transform::Ln => libm::log(*v),
                Transform::Sqrt => v.sqrt(), // IEEE 754 square root is correctly rounded everywhere
            };
        }
        applied.push(Applied {
            feature: feature.name.clone(),
            transform: t,
        });
    }
    Ok((data, applied))
}

impl Applied {
    pub fn transform_name(&self) -> &'static str {
        self.transform.name()
    }
}
