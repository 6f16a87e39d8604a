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
    pub evidence: Evidence,
    /// `loadings[feature][component]` for the computed components (unit vectors).
    pub loadings: Vec<Vec<f64>>,
    /// `correlations[feature][component]`: Pearson correlation of each scaled
    /// feature with each component's scores.
    pub correlations: Vec<Vec<f64>>,
    /// Every analysed row's scores on the computed components, T², SPE, id and
    /// group values, read in runs of rows (they may be in a scratch file).
    #[serde(skip)]
    pub rows: Arc<crate::rows::RowResults>,
    /// Each row's scores on the computed components.
    pub scores: ScoreRows,
    /// The id of each row (or its row number when there is no id column).
    pub row_labels: RowTexts,
    /// Group columns: name and one value per analysed row.
    pub groups: Vec<(String, RowTexts)>,
    /// Hotelling's T² and SPE of each row, and their limits at `confidence`
    /// (the first level of the recipe); `None` where a limit is not defined.
    pub t2: Vec<f64>,
    pub spe: Vec<f64>,
    pub confidence: f64,
    pub t2_limit: Option<f64>,
    pub spe_limit: Option<f64>,
    /// Whether each row is above the T² or SPE limit at `confidence`.
    pub flagged: Vec<bool>,
    /// The scaling method's name, e.g. "unit-variance".
    pub scaling: String,
}

/// Scores row by row in one block of memory (a vector per row would cost an
/// allocation and a pointer per row on tables of millions of rows).
#[derive(Debug, Clone, Default, Serialize)]
pub struct ScoreRows {
    /// Values per row (the computed components).
    pub cols: usize,
    /// Row after row.
    pub data: Vec<f64>,
}

impl ScoreRows {
    /// From one vector per row, all of the same length.
    pub fn from_rows(rows: &[Vec<f64>]) -> ScoreRows {
        let cols = rows.first().map_or(0, Vec::len);
        assert!(rows.iter().all(|r| r.len() == cols), "rows of equal length");
        ScoreRows {
            cols,
            data: rows.concat(),
        }
    }

    pub fn len(&self) -> usize {
        self.data.len().checked_div(self.cols).unwrap_or(0)
    }

    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    pub fn row(&self, i: usize) -> &[f64] {
        &self.data[i * self.cols..(i + 1) * self.cols]
    }

    pub fn iter(&self) -> impl DoubleEndedIterator<Item = &[f64]> {
        self.data.chunks_exact(self.cols.max(1))
    }

    /// The rows in the opposite order.
    pub fn reverse_rows(&mut self) {
        let rows: Vec<Vec<f64>> = self.iter().rev().map(<[f64]>::to_vec).collect();
        self.data = rows.concat();
    }
}

impl std::ops::Index<usize> for ScoreRows {
    type Output = [f64];

    fn index(&self, i: usize) -> &[f64] {
        self.row(i)
    }
}

impl std::ops::IndexMut<usize> for ScoreRows {
    fn index_mut(&mut self, i: usize) -> &mut [f64] {
        &mut self.data[i * self.cols..(i + 1) * self.cols]
    }
}

/// A text for each analysed row, read from a table column it shares rather
/// than copies (a table may have millions of rows).
#[derive(Debug, Clone, Default)]
pub struct RowTexts {
    values: Arc<Vec<String>>,
    /// The table row of each analysed row; `None`: row i is `values[i]`.
    rows: Option<Arc<Vec<usize>>>,
}

impl RowTexts {
    /// The texts of the analysed `rows` of a table column.
    pub fn of_rows(values: Arc<Vec<String>>, rows: Arc<Vec<usize>>) -> RowTexts {
        RowTexts {
            values,
            rows: Some(rows),
        }
    }

    pub fn len(&self) -> usize {
        self.rows.as_ref().map_or(self.values.len(), |r| r.len())
    }

    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    pub fn get(&self, i: usize) -> Option<&str> {
        let at = match &self.rows {
            Some(rows) => *rows.get(i)?,
            None => i,
        };
        self.values.get(at).map(String::as_str)
    }

    pub fn iter(&self) -> impl DoubleEndedIterator<Item = &str> {
        (0..self.len()).map(|i| &self[i])
    }

    /// The rows in the opposite order.
    pub fn reverse(&mut self) {
        let reversed: Vec<String> = self.iter().rev().map(String::from).collect();
        *self = RowTexts::from(reversed);
    }
}

impl From<Vec<String>> for RowTexts {
    fn from(values: Vec<String>) -> RowTexts {
        RowTexts {
            values: Arc::new(values),
            rows: None,
        }
    }
}

impl FromIterator<String> for RowTexts {
    fn from_iter<I: IntoIterator<Item = String>>(texts: I) -> RowTexts {
        RowTexts::from(texts.into_iter().collect::<Vec<_>>())
    }
}

impl std::ops::Index<usize> for RowTexts {
    type Output = str;

    fn index(&self, i: usize) -> &str {
        self.get(i).expect("a row of the view")
    }
}

impl Serialize for RowTexts {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.collect_seq(self.iter())
    }
}

/// Evidence for the number of components, per component.
#[derive(Debug, Clone, Default, Serialize)]
pub struct Evidence {
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
