//! Everything written to the results folder: tables, the manifest, hashes, and the
//! all-or-nothing move of a finished folder into place.

pub mod batch_view;
pub mod build_views;
pub mod debris;
pub mod folder;
pub mod hashing;
pub mod lock;
pub mod manifest;
pub mod model;
pub mod plots;
pub mod reading;
pub mod render;
pub mod replace;
pub mod report;
pub mod tables;
pub mod view;
