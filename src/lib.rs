//! sextant: a principal component analysis described by a TOML recipe, run
//! deterministically, with every input and output hashed in a manifest.
//!
//! The pipeline reads as a chain of types: recipe text → [`recipe::raw`] →
//! [`recipe::plan::Plan`] → [`table::Table`] → [`stages`] (missing, transform,
//! scale, decompose, select) → [`analysis`] → [`outputs`]. [`run`] decides what
//! a run reads and where its results go. The modules form floors that import
//! only downward; `tests/layers.rs` holds their order and enforces it.

pub mod analysis;
pub mod apply;
pub mod cleanup;
pub mod cli;
pub mod diff;
pub mod error;
pub mod linalg;
pub mod new_recipe;
pub mod outputs;
pub mod paths;
pub mod pin;
pub mod progress;
pub mod recipe;
pub mod row_results;
pub mod run;
pub mod scratch;
pub mod stages;
pub mod stats;
pub mod store;
pub mod stream;
pub mod table;
pub mod text;
pub mod timing;
pub mod verify;
