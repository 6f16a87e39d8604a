//! What the report of a scored batch shows (`sextant apply`), gathered by the
//! command and drawn by `plots::batch` and `report::batch`: the new rows in
//! chart order with their T², SPE and first scores, the limits at every
//! confidence level of the model, the training scores when the results folder
//! has them, the rows above a limit with their largest contributions, the
//! fills and the provenance. Plain data, so the same view gives the same bytes.

/// One confidence level of the model: its T² limit for new rows (F form) and
/// its SPE limit; `None` where a limit is not defined.
#[derive(Debug, Clone, PartialEq)]
pub struct BatchLimit {
    pub confidence: f64,
    pub t2: Option<f64>,
    pub spe: Option<f64>,
}

/// A row above a limit: its statistics, the levels it passes and the
/// features that contribute most (name, T² part, SPE part).
#[derive(Debug, Clone)]
pub struct BatchFlagged {
    pub label: String,
    pub line: u64,
    pub t2: f64,
    pub spe: f64,
    /// (confidence, above the T² limit, above the SPE limit) per level.
    pub above: Vec<(f64, bool, bool)>,
    pub top: Vec<(String, f64, f64)>,
}

/// A filled cell: the row, its file line, the feature and the value filled
/// (on the scale the model fills on, after any transform).
#[derive(Debug, Clone)]
pub struct BatchFill {
    pub label: String,
    pub line: u64,
    pub feature: String,
    pub value: f64,
}

/// Everything the batch report draws and lists.
#[derive(Debug, Clone)]
pub struct BatchView {
    /// The table as shown on the command line, and the results folder.
    pub table: String,
    pub results: String,
    pub rows_in: usize,
    /// Components kept by the model.
    pub kept: usize,
    /// The scored rows in chart order: label, file line, T², SPE and the
    /// scores on the first two components (one when only one is kept).
    pub labels: Vec<String>,
    pub lines: Vec<u64>,
    pub t2: Vec<f64>,
    pub spe: Vec<f64>,
    pub scores: Vec<Vec<f64>>,
    /// The column that orders the rows, with each row's value; `None` for file order.
    pub order: Option<(String, Vec<String>)>,
    pub limits: Vec<BatchLimit>,
    /// The training rows' scores on the first two components, or why they are
    /// not shown.
    pub training: Result<Vec<[f64; 2]>, String>,
    /// Rows above a limit at any level, most severe first.
    pub flagged: Vec<BatchFlagged>,
    /// Flagged rows in all (the list may be cut short).
    pub flagged_count: usize,
    /// How the model fills missing cells, and the cells filled.
    pub fill_method: String,
    pub fills: Vec<BatchFill>,
    pub notes: Vec<String>,
    pub provenance: Vec<(String, String)>,
}

impl BatchView {
    /// The smallest T² and SPE limits (the lowest confidence flags the most).
    pub fn lowest_limits(&self) -> (Option<f64>, Option<f64>) {
        let low = |f: fn(&BatchLimit) -> Option<f64>| {
            self.limits
                .iter()
                .filter_map(f)
                .filter(|v| v.is_finite())
                .reduce(f64::min)
        };
        (low(|l| l.t2), low(|l| l.spe))
    }

    /// Whether scored row `i` is above a limit at some level.
    pub fn is_flagged(&self, i: usize) -> bool {
        let (t2, spe) = self.lowest_limits();
        t2.is_some_and(|l| self.t2[i] > l) || spe.is_some_and(|l| self.spe[i] > l)
    }
}
