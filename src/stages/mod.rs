//! The pipeline stages. Each takes a typed input, returns a typed output and a
//! report of what it did, and does no I/O: [`transform`] → [`missing`] →
//! [`scale`] → [`decompose`] → [`select`] → [`diagnose`].
//!
//! The statistics over rows they need are defined once, as accumulators
//! ([`accumulate`]), which the engine (`crate::stream::passes`) feeds from the
//! row store, a chunk of rows at a time; the methods that need the whole
//! matrix ([`impute`], [`parallel`], [`crossval`], the randomized and n × n
//! routes of [`decompose`]) take a matrix view of the same store.

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

use crate::recipe::plan::Transform;

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
}
