//! What the orchestrator, the passes engine and the outputs share about one
//! analysis, and the rules they must apply alike: the prepared input
//! ([`Prepared`]), the preprocessed data ([`Preprocessed`]), the results
//! ([`Analysis`], [`RowDetail`]); how many loadings to compute, which rows are
//! shown in detail and how many unusual rows are kept, the diagnostics' limits,
//! the error for a count of components above the rank, where scratch files go
//! and what the decomposed matrix is called.
//!
//! It sits above the stages and the row results it is made of, and below the
//! passes engine and the outputs, which both read it; so neither engine nor
//! any output decides these on its own.

use crate::error::{Error, RecipeError, RecipeProblem};
use crate::linalg::Matrix;
use crate::recipe::LoadedRecipe;
use crate::recipe::plan::Plan;
use crate::recipe::raw::{DEFAULT_COMPUTE, Keep};
use crate::row_results::RowResults;
use crate::stages::decompose::Decomposition;
use crate::stages::diagnose::Diagnostics;
use crate::stages::missing::MissingReport;
use crate::stages::scale::{ScaleReport, Scaled};
use crate::stages::select::Selection;
use crate::stages::transform::Applied;
use crate::stats::limits::ResidualMoments;
use crate::table::Table;
use serde::Serialize;
use std::collections::BTreeMap;
use std::path::Path;
use std::sync::Arc;

/// Flagged rows listed in the report, the most unusual first.
pub const REPORT_FLAGGED_ROWS: usize = 50;
/// The most unusual flagged rows the rotating view of a large table adds.
pub const UNUSUAL_3D: usize = 500;

/// One input table, with its shape, as the manifest records it.
#[derive(Debug, Clone, Serialize)]
pub struct InputRecord {
    /// The path as written in the recipe (relative to the recipe's folder).
    pub path: String,
    pub bytes: u64,
    pub sha256: String,
    pub rows: usize,
    pub columns: usize,
}

/// A recipe with its table read and its plan checked.
pub struct Prepared {
    pub recipe: LoadedRecipe,
    pub plan: Plan,
    /// The table; when it is analysed in passes, its numeric columns carry their
    /// counts but no values (those are in `passes`).
    pub table: Table,
    pub input: InputRecord,
    /// The table's numbers and labels, row by row (taken away once the
    /// analysis is done, to free them before the outputs are made).
    pub values: Option<StoredValues>,
}

/// The numbers of a table, in the row store.
pub struct StoredValues {
    /// Behind a lock because the first pass transforms the values in place.
    pub store: std::sync::Mutex<crate::store::Store>,
    /// The table column of each store column.
    pub numeric: Vec<usize>,
    /// The table column of each of the store's texts.
    pub texts: Vec<usize>,
}

impl Prepared {
    /// The table's values; only before the analysis is done.
    pub fn stored(&self) -> &StoredValues {
        self.values
            .as_ref()
            .expect("the values are kept until the analysis is done")
    }
}

impl StoredValues {
    /// Where the store keeps the texts of table column `column`, if it does.
    pub fn text_index(&self, table: &Table, column: &str) -> Option<usize> {
        let c = table.columns.iter().position(|c| c.name == column)?;
        self.texts.iter().position(|&t| t == c)
    }
}

/// The data after every preprocessing stage, with the stages' reports.
pub struct Preprocessed {
    pub scaled: Scaled,
    /// Every filled cell, in row order.
    pub filled: crate::row_results::FilledCells,
    /// How new rows' missing cells are filled (one entry per feature kept by the
    /// missing stage, in order; constant features dropped later are still here).
    pub fill_model: crate::stages::missing::FillModel,
    pub missing: MissingReport,
    pub transforms: Vec<Applied>,
    pub scaling: ScaleReport,
}

/// The error for a fixed count of components above what the data can give.
pub fn keep_error(prepared: &Prepared, pre: &Preprocessed, keep: usize, available: usize) -> Error {
    let at = prepared.plan.components.keep_written.clone();
    let (n, p) = (pre.scaled.n_rows(), pre.scaled.n_features());
    Error::Recipe(RecipeError {
        file: prepared.recipe.path.clone(),
        at: at.clone(),
        problem: RecipeProblem::KeepAboveRank {
            keep,
            default: at.is_none(),
            available,
            reason: format!("{n} rows and {p} features after preprocessing"),
        },
    })
}

/// The decomposition, the choice of k and the scores.
pub struct Analysis {
    pub decomposition: Decomposition,
    pub selection: Selection,
    /// Every analysed row's scores (of the computed components), T², SPE and
    /// labels, in row order.
    pub rows: Arc<RowResults>,
    pub diagnostics: Diagnostics,
    /// Σᵢ zᵢⱼ² of each scaled feature, summed in row order from +0 (the
    /// correlation loadings' spreads).
    pub column_squares: Vec<f64>,
    /// The rows whose contributions are reported, by row index (see
    /// [`rows_needing_values`]).
    pub details: BTreeMap<usize, RowDetail>,
    /// What the randomized method did, when the recipe asked for it.
    pub randomized: Option<crate::stages::decompose::RandomizedReport>,
}

impl Analysis {
    /// Every row's T² (read from the rows; for checks on small tables).
    pub fn t2(&self) -> Vec<f64> {
        self.per_row(|b, i| b.t2(i))
    }

    /// Every row's SPE.
    pub fn spe(&self) -> Vec<f64> {
        self.per_row(|b, i| b.spe(i))
    }

    /// The kept components' scores, rows × kept.
    pub fn kept_scores(&self) -> Matrix {
        let kept = self.selection.kept;
        let mut data = Vec::with_capacity(self.rows.len() * kept);
        self.rows
            .each(|b| (0..b.len()).for_each(|i| data.extend_from_slice(&b.scores(i)[..kept])))
            .expect("the rows can be read back");
        Matrix {
            rows: self.rows.len(),
            cols: kept,
            data,
        }
    }

    fn per_row(&self, f: impl Fn(&crate::row_results::Batch, usize) -> f64) -> Vec<f64> {
        let mut out = Vec::with_capacity(self.rows.len());
        self.rows
            .each(|b| out.extend((0..b.len()).map(|i| f(b, i))))
            .expect("the rows can be read back");
        out
    }
}

/// The rows whose contributions the outputs report: the most unusual flagged
/// rows, up to the larger of the recipe's cap and the report's list, in row order.
pub fn rows_needing_values(diagnostics: &Diagnostics, plan: &Plan) -> Vec<usize> {
    let most = plan
        .diagnostics
        .contributions_max_rows
        .0
        .get()
        .max(REPORT_FLAGGED_ROWS);
    let mut rows = diagnostics.most_unusual(most.min(unusual_kept(plan)));
    rows.sort_unstable();
    rows
}

/// How many loadings to compute before the number of components is chosen: the
/// components reported, a fixed count and the highest component plotted (more
/// are computed afterwards if the rule keeps more). Both engines ask for the
/// same number.
pub fn loadings_wanted(plan: &Plan) -> usize {
    let components = &plan.components;
    let highest_plot = plan
        .plots
        .iter()
        .map(|p| p.highest_component())
        .max()
        .unwrap_or(0);
    let fixed = match components.keep {
        Keep::Count(k) => k.get(),
        _ => 0,
    };
    components
        .compute
        .unwrap_or(DEFAULT_COMPUTE)
        .max(fixed)
        .max(highest_plot)
}

/// Where scratch files go: beside the results folder, like its staging folder.
pub fn scratch_dir(plan: &Plan) -> std::path::PathBuf {
    scratch_dir_of(&plan.output)
}

pub fn scratch_dir_of(output: &Path) -> std::path::PathBuf {
    crate::scratch::parent_of(output)
}

/// How many of the most unusual rows the outputs list: contributions.csv's
/// cap, the report's table and the rotating view's extra rows.
pub fn unusual_kept(plan: &Plan) -> usize {
    plan.diagnostics
        .contributions_max_rows
        .0
        .get()
        .max(REPORT_FLAGGED_ROWS)
        .max(UNUSUAL_3D)
}

/// The limits of the plan's confidence levels for `n` rows and `kept`
/// components, nothing counted yet.
pub fn diagnostics_for(
    plan: &Plan,
    n: usize,
    kept: usize,
    moments: Result<ResidualMoments, crate::stats::limits::LimitError>,
) -> Diagnostics {
    crate::stages::diagnose::limits(
        n,
        kept,
        moments,
        (&plan.diagnostics.confidence.0, plan.scaling.centers()),
        plan.diagnostics.spe_limit,
        unusual_kept(plan),
    )
}

/// One of the rows the outputs show in detail (contributions, the report's
/// flagged rows).
#[derive(Debug, Clone)]
pub struct RowDetail {
    /// The row's scaled values.
    pub z: Vec<f64>,
    /// Its kept scores, T² and SPE.
    pub scores: Vec<f64>,
    pub t2: f64,
    pub spe: f64,
    /// Its table row (0-based), its label (id or "row N") and its id and group
    /// values, as scores.csv writes them.
    pub table_row: usize,
    pub label: String,
    pub texts: Vec<String>,
}

/// The details of the rows `wanted` (indices among the analysed rows, in
/// increasing order), read from the rows' results in one pass; their scaled
/// values `z` are left empty for the engine to fill.
pub fn row_details(
    rows: &RowResults,
    kept: usize,
    wanted: &[usize],
) -> Result<BTreeMap<usize, RowDetail>, Error> {
    let mut details = BTreeMap::new();
    let texts = usize::from(rows.id.is_some()) + rows.groups.len();
    rows.each(|b| {
        let from = wanted.partition_point(|&i| i < b.first);
        let to = wanted.partition_point(|&i| i < b.first + b.len());
        for &i in &wanted[from..to] {
            let r = i - b.first;
            let mut own = Vec::with_capacity(texts);
            own.extend(b.id(r).map(String::from));
            own.extend((0..rows.groups.len()).map(|g| b.group(g, r).to_string()));
            details.insert(
                i,
                RowDetail {
                    z: Vec::new(),
                    scores: b.scores(r)[..kept].to_vec(),
                    t2: b.t2(r),
                    spe: b.spe(r),
                    table_row: b.table_row(r),
                    label: b.label(r).into_owned(),
                    texts: own,
                },
            );
        }
    })
    .map_err(|e| crate::error::OutputError::io(Path::new("a scratch file"), e))?;
    Ok(details)
}

/// The name of the matrix whose eigenvectors are the loadings.
pub fn matrix_name(plan: &Plan) -> &'static str {
    plan.scaling.matrix_name()
}
