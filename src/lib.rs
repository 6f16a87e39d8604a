//! sextant: a principal component analysis described by a TOML recipe, run
//! deterministically, with every input and output hashed in a manifest.
//!
//! The pipeline reads as a chain of types: recipe text → [`recipe::raw`] →
//! [`recipe::plan::Plan`] → [`table::Table`] → [`stages`] (missing, transform,
//! scale, decompose, select) → [`outputs`]. [`run`] is the only module that reads
//! or writes files during a run.

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
pub mod rows;
pub mod run;
pub mod stages;
pub mod stats;
pub mod stream;
pub mod table;
pub mod timing;
pub mod verify;
