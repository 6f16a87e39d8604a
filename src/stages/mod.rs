//! The pipeline stages. Each takes a typed input, returns a typed output and a
//! report of what it did, and does no I/O:
//!
//! table → [`FeatureData`] → [`missing`] → [`transform`] → [`scale`] →
//! [`decompose`] → [`select`].
//!
//! The statistics over rows they need are defined once, as accumulators
//! ([`accumulate`]), which the passes engine feeds too.

pub mod accumulate;
pub mod crossval;
pub mod decompose;
pub mod diagnose;
pub mod impute;
pub mod missing;
pub mod parallel;
pub mod scale;
pub mod select;
pub mod transform;

use crate::recipe::plan::{Plan, Transform};
use crate::table::{ColumnData, Table};

/// One feature column on its way through the stages.
#[derive(Debug, Clone)]
pub struct Feature {
    pub name: String,
    /// One value per kept row; `NaN` marks a missing cell until the missing stage.
    pub values: Vec<f64>,
    pub transform: Option<Transform>,
}

/// The features of the analysis, with the rows they came from.
#[derive(Debug, Clone)]
pub struct FeatureData {
    pub features: Vec<Feature>,
    /// Index of each row in the table.
    pub rows: Vec<usize>,
    /// File line of each row, for messages.
    pub lines: Vec<u64>,
    /// The table's path as shown in messages.
    pub source: String,
}

impl FeatureData {
    pub fn n_rows(&self) -> usize {
        self.rows.len()
    }

    /// Takes the plan's features out of the table.
    pub fn from_table(table: &Table, plan: &Plan) -> FeatureData {
        let features = plan
            .features
            .iter()
            .zip(&plan.transforms)
            .map(|(name, transform)| {
                let Some(ColumnData::Numeric(column)) = table.column(name).map(|c| &c.data) else {
                    unreachable!("the plan only selects numeric columns")
                };
                Feature {
                    name: name.clone(),
                    values: column.values.clone(),
                    transform: *transform,
                }
            })
            .collect();
        FeatureData {
            features,
            rows: (0..table.n_rows()).collect(),
            lines: table.lines.clone(),
            source: table.display.clone(),
        }
    }
}
