//! The recipe exactly as written: plain structs that mirror the TOML file.
//!
//! Every struct denies unknown keys, and every choice is an enum or a checked
//! newtype, so the `toml` crate reports a typo or an out-of-range value with its
//! line, column and the valid choices. Nothing here knows about the data; the
//! `plan` module turns a raw recipe into a checked plan once the table is read.
//!
//! This module holds the recipe, its input, plots and output; the sections that
//! describe the analysis are in `preprocessing` (missing, transform, scaling)
//! and `components` (components and diagnostics); `values` has the checked
//! numbers and texts they share. All of them are re-exported here, so every type
//! is `raw::Name`. Never `#[serde(flatten)]` here: it silently disables
//! `deny_unknown_fields`.

mod components;
mod preprocessing;
mod values;

pub use components::*;
pub use preprocessing::*;
pub use values::*;

use serde::{Deserialize, Serialize};
use toml::Spanned;

/// The whole recipe file.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawRecipe {
    /// Recipe format version; only 1 exists.
    pub format: Spanned<Whole>,
    pub title: Option<String>,
    pub notes: Option<String>,
    pub input: RawInput,
    #[serde(default)]
    pub missing: RawMissing,
    #[serde(default)]
    pub transform: RawTransform,
    #[serde(default)]
    pub scaling: RawScaling,
    #[serde(default)]
    pub components: RawComponents,
    #[serde(default)]
    pub diagnostics: RawDiagnostics,
    /// `[[plot]]` tables, one per figure.
    #[serde(default, rename = "plot")]
    pub plots: Vec<Spanned<RawPlot>>,
    pub output: RawOutput,
}

/// One `[[plot]]` table. Which keys apply depends on the kind; the plan rejects
/// a key that does not apply.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawPlot {
    pub kind: PlotKind,
    /// File name inside the results folder's plots/ (default from kind and components).
    pub file: Option<Spanned<String>>,
    pub title: Option<String>,
    /// Components on the horizontal and vertical axes (1-based).
    pub x: Option<Spanned<Count>>,
    pub y: Option<Spanned<Count>>,
    /// The component of a loadings bar chart (1-based).
    pub component: Option<Spanned<Count>>,
    /// A group column that colours the points.
    pub color: Option<Spanned<String>>,
    /// Which points get their id written beside them.
    pub labels: Option<Spanned<PointLabels>>,
    /// At most this many rows get their id written (the most severe first).
    pub max_labels: Option<Spanned<Count>>,
    /// Draw the Hotelling T² ellipse at this confidence (scores plots).
    pub ellipse: Option<Spanned<Confidence>>,
    /// Above this many points, scatter plots draw a density of binned points
    /// plus the flagged points instead of every point.
    pub density_above: Option<Spanned<Count>>,
}

/// The kinds of figure.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum PlotKind {
    /// Eigenvalues as bars, cumulative share as a line, the rule's evidence beside them.
    Scree,
    /// Scores of two components.
    Scores,
    /// Loadings of one component (bars) or two (scatter).
    Loadings,
    /// Scores and loading arrows together.
    Biplot,
    /// Correlations of the features with two components, in the unit circle.
    CorrelationCircle,
    /// T² against SPE with both limits.
    OutlierMap,
}

impl PlotKind {
    pub fn name(self) -> &'static str {
        match self {
            PlotKind::Scree => "scree",
            PlotKind::Scores => "scores",
            PlotKind::Loadings => "loadings",
            PlotKind::Biplot => "biplot",
            PlotKind::CorrelationCircle => "correlation-circle",
            PlotKind::OutlierMap => "outlier-map",
        }
    }
}

/// Which points of a scatter plot get their id written beside them.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Deserialize, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum PointLabels {
    None,
    /// Only rows above a T² or SPE limit.
    #[default]
    Flagged,
    All,
}

/// `[input]`: which table, and the role of its columns.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawInput {
    pub file: Spanned<String>,
    /// Optional pin: the run refuses a file whose SHA-256 differs.
    pub sha256: Option<Spanned<Sha256Hex>>,
    pub id: Option<Spanned<String>>,
    #[serde(default)]
    pub groups: Vec<Spanned<String>>,
    /// Names or glob patterns; absent means every numeric column.
    pub features: Option<Vec<Spanned<String>>>,
    #[serde(default)]
    pub exclude: Vec<Spanned<String>>,
    /// Cell texts that mean "missing".
    pub missing: Option<Vec<String>>,
    pub delimiter: Option<Delimiter>,
    /// The decimal mark of the table's numbers (`.` when absent).
    pub decimal: Option<Spanned<DecimalMark>>,
    /// The separator between groups of three digits (none when absent).
    pub thousands: Option<Spanned<Thousands>>,
    /// `[input.missing_per_column]`: column name = codes that mean missing in
    /// that column only.
    #[serde(default)]
    pub missing_per_column:
        std::collections::BTreeMap<Spanned<String>, Vec<crate::table::read::MissingCode>>,
}

/// The cell texts read as missing when the recipe does not say.
pub const DEFAULT_MISSING_TOKENS: [&str; 4] = ["", "NA", "N/A", "-"];

/// `[output]`: where the results folder goes.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawOutput {
    pub folder: Spanned<String>,
}
