//! What the figures and the report are drawn from: plain owned data, built once by
//! the orchestrator from the stages' outputs, so the drawing code depends on
//! nothing else and can be tested on hand-made views.

use serde::Serialize;
use std::sync::Arc;

/// Everything a plot may need.
#[derive(Debug, Clone, Default, Serialize)]
pub struct PlotView {
    /// Used features, in table order.
    pub features: Vec<String>,
    /// Rows analysed.
    pub n_rows: usize,
    /// Eigenvalues of the computed components, descending.
    pub eigenvalues: Vec<f64>,
    /// Sum of all p eigenvalues.
    pub total_variance: f64,
    /// Number of features (and of eigenvalues in all).
    pub p: usize,
    /// Components kept (k) and computed.
    pub kept: usize,
    pub computed: usize,
    /// The rule that chose k ("count", "variance", "kaiser", "broken-stick",
    /// "parallel-analysis", "cross-validation") and why.
    pub rule: String,
    pub rule_reason: String,
    pub evidence: ScreeEvidence,
    /// `loadings[feature][component]` for the computed components (unit vectors).
    pub loadings: Vec<Vec<f64>>,
    /// `correlations[feature][component]`: Pearson correlation of each scaled
    /// feature with each component's scores.
    pub correlations: Vec<Vec<f64>>,
    /// Every analysed row's scores on the computed components, T², SPE, id and
    /// group values, read in runs of rows (they may be in a scratch file).
    #[serde(skip)]
    pub rows: Arc<crate::row_results::RowResults>,
    /// Hotelling's T² and SPE limits at `confidence` (the first level of the
    /// recipe); `None` where a limit is not defined. A row above either is
    /// flagged ([`PlotView::is_flagged`]).
    pub confidence: f64,
    pub t2_limit: Option<f64>,
    pub spe_limit: Option<f64>,
    /// The scaling method (written by its recipe name).
    pub scaling: crate::recipe::raw::ScalingMethod,
}

/// The evidence for the number of components that the scree plot draws, per
/// component.
#[derive(Debug, Clone, Default, Serialize)]
pub struct ScreeEvidence {
    /// Broken-stick expected share of each computed component (always available).
    pub broken_stick: Vec<f64>,
    /// Kaiser's threshold: the mean eigenvalue.
    pub mean_eigenvalue: f64,
    /// The cumulative share the variance rule aimed at, if that rule was used.
    pub variance_target: Option<f64>,
    /// Parallel analysis: the random-eigenvalue threshold of each computed component.
    pub parallel_thresholds: Option<Vec<f64>>,
    /// Cross-validation: PRESS for k = 0, 1, …
    pub press: Option<Vec<f64>>,
}

impl PlotView {
    /// Whether a row with these T² and SPE is above a limit at `confidence`.
    pub fn is_flagged(&self, t2: f64, spe: f64) -> bool {
        self.t2_limit.is_some_and(|l| t2 > l) || self.spe_limit.is_some_and(|l| spe > l)
    }

    /// The share of the variance of component `a` (0-based).
    pub fn share(&self, a: usize) -> f64 {
        self.eigenvalues[a] / self.total_variance
    }

    /// An axis title such as "PC1 (41.2 %)".
    pub fn axis_title(&self, a: usize) -> String {
        format!("PC{} ({:.1} %)", a + 1, 100.0 * self.share(a))
    }
}

/// A row of the report's variance table.
#[derive(Debug, Clone, Serialize)]
pub struct VarianceLine {
    pub component: usize,
    pub eigenvalue: f64,
    pub share: f64,
    pub cumulative: f64,
    pub kept: bool,
}

/// A flagged row of the report, with its largest contributions.
#[derive(Debug, Clone, Serialize)]
pub struct FlaggedLine {
    pub label: String,
    pub t2: f64,
    pub spe: f64,
    pub t2_above: bool,
    pub spe_above: bool,
    /// The features with the largest contributions: (feature, to T², to SPE),
    /// ordered by the larger of the two shares of the row's total.
    pub top: Vec<(String, f64, f64)>,
}

/// One figure of the report.
#[derive(Debug, Clone, Serialize)]
pub struct Figure {
    /// File name inside plots/.
    pub file: String,
    /// A caption in plain words.
    pub caption: String,
    /// The SVG document itself.
    pub svg: String,
}

/// Everything the report shows.
#[derive(Debug, Clone, Default, Serialize)]
pub struct ReportView {
    pub title: String,
    pub notes: Option<String>,
    /// The summary, sentence by sentence.
    pub summary: Vec<String>,
    pub variance: Vec<VarianceLine>,
    /// Per kept component: its largest loadings by magnitude, (feature, loading).
    pub top_loadings: Vec<Vec<(String, f64)>>,
    pub confidence: f64,
    pub flagged: Vec<FlaggedLine>,
    pub figures: Vec<Figure>,
    /// The first three components' scores for the rotatable view (when at least
    /// three are computed), with the view's group colours.
    pub scores3d: Option<Scores3d>,
    pub cautions: Vec<String>,
    /// (what, value) pairs: tool version, recipe and input hashes, results digest.
    pub provenance: Vec<(String, String)>,
}

/// Scores of the first three components for the rotatable view.
#[derive(Debug, Clone, Serialize)]
pub struct Scores3d {
    pub axis_titles: [String; 3],
    pub points: Vec<[f64; 3]>,
    pub labels: Vec<String>,
    /// The group column used for colours, if any, and each row's value.
    pub group: Option<(String, Vec<String>)>,
}
