//! The one orchestrator: it reads the recipe and the input, runs the stages in
//! order, and writes the results folder. All file I/O of a run happens here.

use crate::error::{Error, InputError, RecipeError, RecipeProblem};
use crate::linalg::Matrix;
use crate::outputs::folder::Staging;
use crate::outputs::hashing::sha256_hex;
use crate::outputs::manifest::{self, FileRecord, InputRecord, ManifestBody, RunInfo};
use crate::outputs::replace::check_replaceable;
use crate::outputs::tables;
use crate::recipe::plan::MethodPlan;
use crate::recipe::plan::{Plan, check_names, input_plan, make_plan};
use crate::recipe::raw::DEFAULT_COMPUTE;
use crate::recipe::raw::Keep;
use crate::recipe::resolved::resolved_recipe;
use crate::recipe::{self, LoadedRecipe};
use crate::rows::RowResults;
use crate::stages::FeatureData;
use crate::stages::crossval::cross_validate;
use crate::stages::decompose::{Decomposition, decompose_keeping, scores};
use crate::stages::diagnose::{Diagnostics, contributions, diagnose_all, row_statistics};
use crate::stages::missing::{MissingReport, MissingSettings, handle_missing};
use crate::stages::parallel::parallel_analysis;
use crate::stages::scale::{ScaleReport, Scaled, scale};
use crate::stages::select::{Evidence, Selection, select_among};
use crate::stages::transform::{Applied, apply_transforms};
use crate::stats::limits::ResidualMoments;
use crate::stream::{Choice, EngineOptions};
use crate::table::{ColumnData, Table, read_header, read_table_parallel};
use serde_json::{Value, json};
use std::collections::BTreeMap;
use std::path::Path;
use std::sync::Arc;
use std::time::Instant;

/// A recipe with its table read and its plan checked.
pub struct Prepared {
    pub recipe: LoadedRecipe,
    pub plan: Plan,
    /// The table; when it is analysed in passes, its numeric columns carry their
    /// counts but no values (those are in `passes`).
    pub table: Table,
    pub input: InputRecord,
    /// The table's numbers when the passes engine analyses it.
    pub passes: Option<PassData>,
}

/// The numbers of a table read for the passes engine.
pub struct PassData {
    /// Behind a lock because the first pass transforms the values in place.
    pub store: std::sync::Mutex<crate::stream::store::Store>,
    /// The table column of each store column.
    pub numeric: Vec<usize>,
    /// The table column of each of the store's texts.
    pub texts: Vec<usize>,
}

impl PassData {
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
    pub filled: crate::rows::FilledCells,
    /// How new rows' missing cells are filled (one entry per feature kept by the
    /// missing stage, in order; constant features dropped later are still here).
    pub fill_model: crate::stages::missing::FillModel,
    pub missing: MissingReport,
    pub transforms: Vec<Applied>,
    pub scaling: ScaleReport,
}

/// Loads the recipe, reads and hashes the input, and checks the plan.
pub fn prepare(recipe_path: &Path) -> Result<Prepared, Error> {
    prepare_with(recipe_path, &EngineOptions::default())
}

/// [`prepare`] with the engine settings of the command line.
pub fn prepare_with(recipe_path: &Path, options: &EngineOptions) -> Result<Prepared, Error> {
    prepare_recipe_with(recipe::load(recipe_path)?, options)
}

/// Reads and hashes the input of a loaded recipe, and checks the plan.
pub fn prepare_recipe(recipe: LoadedRecipe) -> Result<Prepared, Error> {
    prepare_recipe_with(recipe, &EngineOptions::default())
}

/// [`prepare_recipe`] with the engine settings of the command line.
pub fn prepare_recipe_with(
    recipe: LoadedRecipe,
    options: &EngineOptions,
) -> Result<Prepared, Error> {
    let input = input_plan(&recipe);
    let shown = input.file.display().to_string();
    let size = crate::paths::regular_file(&input.file)
        .map_err(|source| InputError::Io {
            path: shown.clone(),
            source,
        })?
        .len();
    crate::progress::start(size);
    crate::progress::current().stage("reading the table");
    let choice = crate::stream::choose(&recipe.raw, size, options)
        .map_err(|refusal| refusal.at(shown.clone()))?;
    if let Choice::Passes { keep_in_memory } = choice {
        return prepare_in_passes(recipe, keep_in_memory, options.engine);
    }
    let t = std::time::Instant::now();
    let bytes = crate::paths::read_regular(&input.file).map_err(|source| InputError::Io {
        path: shown.clone(),
        source,
    })?;
    let t = crate::timing::lap("read the file", t);
    // Hash and parse at the same time: the file is read once, both passes run
    // over the same bytes in memory.
    let (sha256, parsed) = rayon::join(
        || sha256_hex(&bytes),
        || -> Result<Table, Error> {
            let header = read_header(&bytes, &shown, input.options.delimiter)?;
            check_names(&recipe, &header)?;
            Ok(read_table_parallel(&bytes, &shown, &input.options)?)
        },
    );
    check_pin(&recipe, &input, &shown, &sha256)?;
    let table = parsed?;
    let t = crate::timing::lap("hash and parse the table", t);
    check_ids(&table, input.id.as_deref())?;
    let record = InputRecord {
        path: input.display.clone(),
        bytes: bytes.len() as u64,
        sha256,
        rows: table.n_rows(),
        columns: table.columns.len(),
    };
    let plan = make_plan(&recipe, input, &table)?;
    crate::timing::lap("check the plan", t);
    Ok(Prepared::in_memory(recipe, plan, table, record))
}

impl Prepared {
    /// A table held in memory, for the in-memory engine.
    fn in_memory(recipe: LoadedRecipe, plan: Plan, table: Table, input: InputRecord) -> Prepared {
        Prepared {
            recipe,
            plan,
            table,
            input,
            passes: None,
        }
    }
}

/// Reads the input in chunks into a store for the passes engine, and checks
/// the plan.
fn prepare_in_passes(
    recipe: LoadedRecipe,
    keep_in_memory: u64,
    engine: crate::stream::Engine,
) -> Result<Prepared, Error> {
    let input = input_plan(&recipe);
    let shown = input.file.display().to_string();
    // Scratch files go beside the results folder, named after it, like its
    // staging folder.
    let (scratch, _) = crate::recipe::plan::output_folder(&recipe, &input)?;
    let dir = scratch_dir_of(&scratch);
    std::fs::create_dir_all(&dir).map_err(|e| crate::error::OutputError::io(&dir, e))?;
    let t = std::time::Instant::now();
    let (sha256, bytes, ingested) = crate::stream::ingest::ingest(
        &input.file,
        &shown,
        &input.options,
        |header| Ok(check_names(&recipe, header)?),
        keep_in_memory,
        &scratch,
    );
    check_pin(&recipe, &input, &shown, &sha256)?;
    let ingested = ingested?;
    let t = crate::timing::lap("read, hash and parse in chunks", t);
    let table = ingested.table;
    if let Some(id) = input.id.as_deref() {
        crate::stream::check_ids(&table, &ingested.store, &ingested.texts, id, &scratch)?;
    }
    let record = InputRecord {
        path: input.display.clone(),
        bytes,
        sha256,
        rows: table.n_rows(),
        columns: table.columns.len(),
    };
    let plan = make_plan(&recipe, input, &table)?;
    crate::timing::lap("check the plan", t);
    let wide = table.n_rows() < plan.features.len();
    if wide && engine == crate::stream::Engine::Auto && !ingested.store.spilled() {
        // Only the in-memory engine analyses such a table (its n × n route), and
        // its values fit the budget: they become the table's columns.
        let table = crate::stream::table_with_values(
            table,
            &ingested.store,
            &ingested.numeric,
            &ingested.texts,
        );
        return Ok(Prepared::in_memory(recipe, plan, table, record));
    }
    if wide {
        return Err(crate::error::EngineError::TooWideForPasses {
            path: shown,
            rows: table.n_rows(),
            features: plan.features.len(),
            forced: engine == crate::stream::Engine::Passes,
        }
        .into());
    }
    Ok(Prepared {
        recipe,
        plan,
        table,
        input: record,
        passes: Some(PassData {
            store: std::sync::Mutex::new(ingested.store),
            numeric: ingested.numeric,
            texts: ingested.texts,
        }),
    })
}

/// A changed pinned file is reported first, whatever else is wrong with it.
fn check_pin(
    recipe: &LoadedRecipe,
    input: &crate::recipe::plan::InputPlan,
    shown: &str,
    sha256: &str,
) -> Result<(), Error> {
    if let Some((expected, at)) = &input.pin
        && expected != sha256
    {
        return Err(RecipeError {
            file: recipe.path.clone(),
            at: Some(at.clone()),
            problem: RecipeProblem::PinMismatch {
                path: shown.to_string(),
                expected: expected.clone(),
                found: sha256.to_string(),
            },
        }
        .into());
    }
    Ok(())
}

/// Ids must be present and unique, so every result row can be traced back.
fn check_ids(table: &Table, id: Option<&str>) -> Result<(), InputError> {
    let Some(name) = id else { return Ok(()) };
    let Some(ColumnData::Text(values)) = table.column(name).map(|c| &c.data) else {
        return Ok(());
    };
    // The first row whose id is empty or was seen before: rows sorted by id (in
    // parallel), a repeated id is first seen at the second row of its run.
    let empty = values.iter().position(String::is_empty);
    let mut order: Vec<usize> = (0..values.len()).collect();
    {
        use rayon::prelude::*;
        order.par_sort_unstable_by(|&a, &b| values[a].cmp(&values[b]).then(a.cmp(&b)));
    }
    let repeat = order
        .windows(2)
        .filter(|w| values[w[0]] == values[w[1]])
        .map(|w| (w[1], w[0]))
        .min();
    match (empty, repeat) {
        (Some(i), r) if r.is_none_or(|(j, _)| i <= j) => Err(InputError::MissingId {
            path: table.display.clone(),
            line: table.lines[i],
            column: name.into(),
        }),
        (_, Some((i, first))) => Err(InputError::DuplicateId {
            path: table.display.clone(),
            line: table.lines[i],
            column: name.into(),
            id: values[i].clone(),
            first_line: table.lines[first],
        }),
        _ => Ok(()),
    }
}

/// Runs the missing, transform and scaling stages.
pub fn preprocess(prepared: &Prepared) -> Result<Preprocessed, Error> {
    let pre = match &prepared.passes {
        Some(data) => crate::stream::passes::preprocess(
            prepared,
            &mut data.store.lock().expect("no pass panicked"),
            &data.numeric,
        )?,
        None => preprocess_in_memory(prepared)?,
    };
    check_keep_bound(prepared, &pre)?;
    Ok(pre)
}

fn preprocess_in_memory(prepared: &Prepared) -> Result<Preprocessed, Error> {
    let plan = &prepared.plan;
    let data = FeatureData::from_table(&prepared.table, plan);
    if data.n_rows() < 2 {
        let rows = data.n_rows();
        return Err(InputError::TooFewRows {
            path: data.source,
            rows,
            why: String::new(),
        }
        .into());
    }
    // Transforms come first, so every fill method works on the scale the analysis
    // sees (a mean fill of a log-transformed feature is its geometric mean).
    let (data, transforms) = apply_transforms(data)?;
    let settings = MissingSettings {
        method: plan.missing_method,
        max_share: plan.max_feature_missing,
        iterative: plan.iterative_pca.clone(),
        knn: plan.knn.clone(),
        components: plan.imputation_components,
        scaling: plan.scaling,
    };
    let (data, missing, filled, fill_model) = handle_missing(data, &settings)?;
    let (scaled, scaling) = scale(data, plan.scaling, plan.constant_features)?;
    let filled = crate::rows::FilledCells::from_cells(&filled, &plan.features);
    Ok(Preprocessed {
        scaled,
        missing,
        transforms,
        scaling,
        filled,
        fill_model,
    })
}

fn check_keep_bound(prepared: &Prepared, pre: &Preprocessed) -> Result<(), Error> {
    let plan = &prepared.plan;
    // The rank cannot exceed min(n − 1, p) for centred data (n, p without centring),
    // so a fixed count above that fails now, in `check` too, rather than after the
    // decomposition.
    let (n, p) = (pre.scaled.n_rows(), pre.scaled.n_features());
    let bound = if plan.scaling.centers() { n - 1 } else { n }.min(p);
    if let Keep::Count(k) = plan.components.keep
        && k.get() > bound
    {
        return Err(keep_error(prepared, pre, k.get(), bound));
    }
    Ok(())
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
    pub randomized: Option<crate::stages::randomized::RandomizedReport>,
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

    fn per_row(&self, f: impl Fn(&crate::rows::Batch, usize) -> f64) -> Vec<f64> {
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
        .max(crate::outputs::build_views::REPORT_FLAGGED_ROWS);
    let mut rows = diagnostics.most_unusual(most.min(unusual_kept(plan)));
    rows.sort_unstable();
    rows
}

/// Σᵢ zᵢⱼ² of each column, rows in order, each sum starting from +0.
pub fn column_squares(z: &Matrix) -> Vec<f64> {
    let mut squares = vec![0.0; z.cols];
    for i in 0..z.rows {
        crate::stages::decompose::add_squares(&mut squares, z.row(i));
    }
    squares
}

/// The scores of components `from..to` (each entry the same dot product as in
/// [`scores`], so splitting the components changes no bit).
pub fn scores_between(z: &Matrix, loadings: &Matrix, from: usize, to: usize) -> Matrix {
    crate::linalg::crossprod::times(z, &loadings.columns(from, to))
}

/// How many loadings to compute before the number of components is chosen: the
/// components reported, a fixed count and the highest component plotted (more
/// are computed afterwards if the rule keeps more). Both engines ask for the
/// same number.
pub fn loadings_wanted(plan: &crate::recipe::plan::Plan) -> usize {
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

/// Decomposes the scaled data, chooses the number of components and computes the
/// per-row diagnostics.
pub fn analyse(prepared: &Prepared, pre: &Preprocessed) -> Result<Analysis, Error> {
    if let Some(data) = &prepared.passes {
        return crate::stream::passes::analyse(
            prepared,
            pre,
            &mut data.store.lock().expect("no pass panicked"),
            &data.numeric,
        );
    }
    let plan = &prepared.plan;
    let z = pre.scaled.data();
    let centred = plan.scaling.centers();
    let components = &plan.components;
    let want = loadings_wanted(plan);
    let (mut decomposition, randomized) = match &plan.method {
        MethodPlan::Exact => (decompose_keeping(z, centred, None, want)?, None),
        MethodPlan::Randomized(settings) => {
            let (d, report) =
                crate::stages::decompose::decompose_randomized(z, centred, want, settings)?;
            (d, Some(report))
        }
    };
    if decomposition.rank == 0 {
        return Err(InputError::NoFeatures {
            path: prepared.table.display.clone(),
            why: " (the scaled data has no variance)".into(),
        }
        .into());
    }
    let mut evidence = Evidence::default();
    match components.keep {
        Keep::ParallelAnalysis => {
            evidence.parallel = Some(parallel_analysis(
                z,
                centred,
                &components.parallel_analysis,
            )?);
        }
        Keep::CrossValidation => {
            let max_k = components
                .compute
                .unwrap_or(DEFAULT_COMPUTE)
                .min(decomposition.rank);
            evidence.cross_validation = Some(cross_validate(
                z,
                centred,
                max_k,
                &components.cross_validation,
            )?);
        }
        _ => {}
    }
    let selection = select_among(
        &decomposition.eigenvalues,
        z.cols,
        decomposition.total_variance,
        decomposition.rank,
        components,
        evidence,
    )
    .map_err(|e| keep_error(prepared, pre, e.keep, e.available))?;
    if randomized.is_none() && selection.computed > decomposition.loadings.cols {
        decomposition = decompose_keeping(z, centred, None, selection.computed)?;
    }
    let kept = selection.kept;
    let scores = scores(z, &decomposition.loadings, kept);
    let more_scores = scores_between(z, &decomposition.loadings, kept, selection.computed);
    let (t2, spe) = row_statistics(
        z,
        &decomposition.loadings,
        &scores,
        &decomposition.eigenvalues,
    );
    let moments = match &randomized {
        // θ₁ and θ₂ from the exact total and Σλ², not from the known
        // eigenvalues alone (the plan allows only Box's limit here).
        Some(report) => match report.residual_sums(&decomposition, kept, z.rows) {
            Some((theta1, theta2)) => ResidualMoments::from_first_two(theta1, theta2),
            None => Err(crate::stats::limits::LimitError::NoResidualEigenvalues),
        },
        None => {
            ResidualMoments::from_eigenvalues(&decomposition.eigenvalues[kept..decomposition.rank])
        }
    };
    let diagnostics = diagnose_all(diagnostics_for(plan, z.rows, kept, moments), &t2, &spe);
    let joined: Vec<f64> = (0..z.rows)
        .flat_map(|i| scores.row(i).iter().chain(more_scores.row(i)).copied())
        .collect();
    let rows = RowResults::from_parts(
        selection.computed,
        &pre.scaled.rows,
        &joined,
        &t2,
        &spe,
        plan.input
            .id
            .as_ref()
            .map(|id| (id.clone(), texts_of(prepared, id, &pre.scaled.rows))),
        plan.input
            .groups
            .iter()
            .map(|g| (g.clone(), texts_of(prepared, g, &pre.scaled.rows)))
            .collect(),
    );
    let mut details = row_details(&rows, kept, &rows_needing_values(&diagnostics, plan))?;
    for (&i, row) in &mut details {
        row.z = z.row(i).to_vec();
    }
    Ok(Analysis {
        decomposition,
        selection,
        diagnostics,
        column_squares: column_squares(z),
        rows: Arc::new(rows),
        details,
        randomized,
    })
}

/// The texts of a table's text column in the given table rows.
pub fn texts_of(prepared: &Prepared, column: &str, rows: &[usize]) -> Vec<String> {
    match prepared.table.column(column).map(|c| &c.data) {
        Some(ColumnData::Text(values)) => rows.iter().map(|&r| values[r].clone()).collect(),
        _ => unreachable!("id and group columns are read as text"),
    }
}

/// Where scratch files go: beside the results folder, like its staging folder.
pub fn scratch_dir(plan: &Plan) -> std::path::PathBuf {
    scratch_dir_of(&plan.output)
}

fn scratch_dir_of(output: &Path) -> std::path::PathBuf {
    crate::outputs::debris::parent_of(output)
}

/// How many of the most unusual rows the outputs list: contributions.csv's
/// cap, the report's table and the rotating view's extra rows.
pub fn unusual_kept(plan: &Plan) -> usize {
    plan.diagnostics
        .contributions_max_rows
        .0
        .get()
        .max(crate::outputs::build_views::REPORT_FLAGGED_ROWS)
        .max(crate::outputs::build_views::UNUSUAL_3D)
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
        &plan.diagnostics.confidence.0,
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

/// Options of `sextant run`.
#[derive(Debug, Clone, Default)]
pub struct RunOptions {
    /// Replace an existing results folder made from another recipe or input.
    pub replace: bool,
    pub engine: EngineOptions,
}

/// What a finished run reports to the user.
pub struct RunSummary {
    /// Things the user should know that are not results (e.g. what a killed
    /// run left beside the folder, removed).
    pub notes: Vec<String>,
    pub prepared: Prepared,
    pub pre: Preprocessed,
    pub analysis: Analysis,
    pub outputs: Vec<FileRecord>,
    pub digest: String,
    pub seconds: f64,
}

/// The bytes of every result file and the hashed part of the manifest.
pub struct Computed {
    /// Result files in their fixed order, without the manifest.
    pub files: Vec<(String, Vec<u8>)>,
    pub outputs: Vec<FileRecord>,
    pub body: ManifestBody,
    /// The resolved recipe's hash and the inputs' hashes.
    pub fingerprint: (String, Vec<String>),
}

/// Runs every stage and renders the results in memory.
pub fn compute(prepared: &Prepared) -> Result<(Preprocessed, Analysis, Computed), Error> {
    let (pre, analysis) = analyse_all(prepared)?;
    let computed = render(prepared, &pre, &analysis, None)?;
    Ok((pre, analysis, computed))
}

/// The preprocessing and the analysis.
pub fn analyse_all(prepared: &Prepared) -> Result<(Preprocessed, Analysis), Error> {
    let t = std::time::Instant::now();
    crate::progress::current().stage("missing cells, transforms and scaling");
    let pre = preprocess(prepared)?;
    let t = crate::timing::lap("preprocess", t);
    crate::progress::current().stage("decomposition, scores and diagnostics");
    let analysis = analyse(prepared, &pre)?;
    crate::timing::lap("decompose, choose k, diagnose", t);
    Ok((pre, analysis))
}

/// Renders the result files, figures, report and manifest body in memory; with
/// `staging`, also writes them there (the tables while they are hashed and the
/// report is made).
pub fn render(
    prepared: &Prepared,
    pre: &Preprocessed,
    analysis: &Analysis,
    staging: Option<&Staging>,
) -> Result<Computed, Error> {
    let t = std::time::Instant::now();
    crate::progress::current().stage("result tables, figures and report");
    let (resolved, resolved_sha) = resolved_with_hash(prepared);
    let fingerprint = fingerprint(prepared);
    let view = crate::outputs::build_views::plot_view(prepared, pre, analysis);
    let t = crate::timing::lap("  the plots' view", t);
    // The figures and the tables at the same time: each reads the rows a
    // chunk at a time (through a file handle of its own when they are in a
    // scratch file), so neither holds every row.
    let draw = || -> Result<_, Error> {
        let figures = figures(prepared, &view)?;
        let report_view = report_view_of(prepared, pre, analysis, &view, &figures);
        // The figures read the rows without stopping for an error; one is
        // reported here, before anything drawn from partial rows is kept.
        if let Some(e) = view.rows.take_error() {
            return Err(crate::error::OutputError::io(&scratch_dir(&prepared.plan), e).into());
        }
        Ok((figures, report_view))
    };
    let tables = || result_files(prepared, pre, analysis, staging);
    let (drawn, tables) = rayon::join(draw, tables);
    drop(view);
    let (figures, report_view) = drawn?;
    let mut files = tables?;
    let model = crate::outputs::model::build(prepared, pre, analysis, &resolved_sha);
    files.push((
        "model.json".into(),
        Content::Bytes(crate::outputs::model::to_json(&model)),
    ));
    let t = crate::timing::lap("result tables", t);
    files.extend(figures.into_iter().map(|(n, b, _)| (n, Content::Bytes(b))));
    // Each file is hashed once, files in parallel, while they are written.
    let (written, mut outputs) = rayon::join(|| write_all(staging, &files), || records(&files));
    written?;
    let report = finish_report(prepared, report_view, &outputs, &resolved_sha);
    write_all(staging, std::slice::from_ref(&report))?;
    outputs.extend(records(std::slice::from_ref(&report)));
    files.push(report);
    crate::timing::lap("hashes and the report", t);
    // In memory: every file's bytes (all of them when nothing was streamed).
    let files = files
        .into_iter()
        .filter_map(|(name, content)| match content {
            Content::Bytes(bytes) => Some((name, bytes)),
            Content::Written { .. } => None,
        })
        .collect();
    let body = ManifestBody {
        recipe: json!({
            "path": crate::paths::relative(&prepared.plan.output, &prepared.recipe.path),
            "sha256": sha256_hex(prepared.recipe.text.as_bytes()),
            "resolved": resolved,
            "resolved_sha256": resolved_sha,
        }),
        inputs: vec![prepared.input.clone()],
        steps: steps_json(prepared, pre, analysis),
    };
    Ok(Computed {
        files,
        outputs,
        body,
        fingerprint,
    })
}

/// The resolved recipe's hash and the inputs' hashes: what must match for a
/// results folder to be replaced without `--replace`.
fn fingerprint(prepared: &Prepared) -> (String, Vec<String>) {
    (
        resolved_with_hash(prepared).1,
        vec![prepared.input.sha256.clone()],
    )
}

/// The resolved recipe (every default filled in) and its SHA-256.
fn resolved_with_hash(prepared: &Prepared) -> (Value, String) {
    let resolved = resolved_recipe(&prepared.recipe, &prepared.plan.input);
    let sha = sha256_hex(&serde_json::to_vec(&resolved).expect("JSON values serialise"));
    (resolved, sha)
}

/// Writes the files held in memory into `staging`, if there is one.
fn write_all(staging: Option<&Staging>, files: &[(String, Content)]) -> Result<(), Error> {
    if let Some(staging) = staging {
        for (name, content) in files {
            if let Content::Bytes(bytes) = content {
                staging.write(name, bytes)?;
            }
        }
    }
    Ok(())
}

/// Each file's path, size and SHA-256 (files in memory hashed in parallel).
fn records(files: &[(String, Content)]) -> Vec<FileRecord> {
    use rayon::prelude::*;
    files
        .par_iter()
        .map(|(path, content)| {
            let (bytes, sha256) = match content {
                Content::Bytes(b) => (b.len() as u64, sha256_hex(b)),
                Content::Written { bytes, sha256 } => (*bytes, sha256.clone()),
            };
            FileRecord {
                path: path.clone(),
                bytes,
                sha256,
            }
        })
        .collect()
}

/// Runs a recipe end to end and writes its results folder.
pub fn run(recipe_path: &Path, options: &RunOptions) -> Result<RunSummary, Error> {
    let start = Instant::now();
    let started_utc = manifest::utc_now();
    // The lock is held for the whole run, from before the first scratch file.
    let recipe = recipe::load(recipe_path)?;
    let (output, _) = crate::recipe::plan::output_folder(&recipe, &input_plan(&recipe))?;
    let lock = crate::outputs::lock::lock(&output)?;
    let mut prepared = prepare_recipe_with(recipe, &options.engine)?;
    // A folder that may not be replaced is refused before the long part.
    check_replaceable(
        &prepared.plan.output,
        &fingerprint(&prepared),
        options.replace,
    )?;
    let (pre, analysis) = analyse_all(&prepared)?;
    // The table's values are not needed for the outputs: free them first.
    prepared.passes = None;
    let staging = Staging::new(&prepared.plan.output)?;
    let computed = render(&prepared, &pre, &analysis, Some(&staging))?;
    let seconds = start.elapsed().as_secs_f64();
    let run_info = RunInfo {
        started_utc,
        seconds: (seconds * 1000.0).round() / 1000.0,
        host: manifest::host_name(),
        threads: rayon::current_num_threads(),
        platform: platform(),
    };
    let (manifest_text, digest) = manifest::render(&computed.body, &computed.outputs, &run_info);
    drop(computed.files);
    let t = std::time::Instant::now();
    crate::progress::current().stage("writing the results folder");
    staging.write("manifest.json", manifest_text.as_bytes())?;
    staging.commit()?;
    crate::timing::lap("write the folder", t);
    crate::progress::current().finish();
    let notes = lock.notes.clone();
    drop(lock);
    Ok(RunSummary {
        notes,
        prepared,
        pre,
        analysis,
        outputs: computed.outputs,
        digest,
        seconds,
    })
}

/// The platform the binary was built for: architecture, OS and C environment.
pub fn platform() -> String {
    let env = if cfg!(target_env = "gnu") {
        "-gnu"
    } else if cfg!(target_env = "musl") {
        "-musl"
    } else if cfg!(target_env = "msvc") {
        "-msvc"
    } else {
        ""
    };
    format!("{}-{}{env}", std::env::consts::ARCH, std::env::consts::OS)
}

/// A result file: its bytes, or, for a large table written straight into the
/// staging folder a stretch at a time, its size and SHA-256.
enum Content {
    Bytes(Vec<u8>),
    Written { bytes: u64, sha256: String },
}

/// A table being written into the staging folder: one thread writes each
/// stretch and another hashes it while the next is formatted. (Writing into the
/// page cache and hashing each cost about as much as formatting; one thread
/// doing both was the slowest part of writing a large table.)
struct StreamedFile {
    /// To the writing thread and to the hashing thread, in that order.
    stretches: Option<[std::sync::mpsc::SyncSender<Arc<Vec<u8>>>; 2]>,
    /// Buffers both threads have finished with, emptied, for reuse.
    spares: std::sync::mpsc::Receiver<Vec<u8>>,
    writer: Option<std::thread::JoinHandle<std::io::Result<()>>>,
    hasher: Option<std::thread::JoinHandle<(u64, String)>>,
    path: std::path::PathBuf,
}

/// Hands an emptied buffer back when the other thread is done with it too.
fn recycle(stretch: Arc<Vec<u8>>, give_back: &std::sync::mpsc::Sender<Vec<u8>>) {
    if let Ok(mut buffer) = Arc::try_unwrap(stretch) {
        buffer.clear();
        // The formatter may have finished; then the buffer is dropped.
        let _ = give_back.send(buffer);
    }
}

impl StreamedFile {
    fn create(staging: &Staging, name: &str) -> Result<StreamedFile, Error> {
        use sha2::Digest;
        use std::io::Write;
        use std::sync::mpsc::{channel, sync_channel};
        let (path, mut file) = staging.create(name)?;
        let (to_writer, for_writer) = sync_channel::<Arc<Vec<u8>>>(2);
        let (to_hasher, for_hasher) = sync_channel::<Arc<Vec<u8>>>(2);
        let (give_back, spares) = channel::<Vec<u8>>();
        let give_back_too = give_back.clone();
        let writer = std::thread::spawn(move || {
            for stretch in for_writer {
                file.write_all(&stretch)?;
                recycle(stretch, &give_back);
            }
            Ok(())
        });
        let hasher = std::thread::spawn(move || {
            let mut hasher = sha2::Sha256::new();
            let mut bytes = 0u64;
            for stretch in for_hasher {
                hasher.update(&*stretch);
                bytes += stretch.len() as u64;
                recycle(stretch, &give_back_too);
            }
            let digest = hasher.finalize();
            (bytes, digest.iter().map(|b| format!("{b:02x}")).collect())
        });
        Ok(StreamedFile {
            stretches: Some([to_writer, to_hasher]),
            spares,
            writer: Some(writer),
            hasher: Some(hasher),
            path,
        })
    }

    fn finish(mut self) -> Result<Content, Error> {
        drop(self.stretches.take());
        let written = self
            .writer
            .take()
            .expect("joined once")
            .join()
            .expect("the writing thread does not panic");
        let (bytes, sha256) = self
            .hasher
            .take()
            .expect("joined once")
            .join()
            .expect("the hashing thread does not panic");
        written.map_err(|e| crate::error::OutputError::io(&self.path, e))?;
        Ok(Content::Written { bytes, sha256 })
    }
}

impl tables::TableSink for StreamedFile {
    fn put(&mut self, bytes: Vec<u8>) {
        if let Some(senders) = &self.stretches {
            let stretch = Arc::new(bytes);
            for sender in senders {
                // A failed write ends the writing thread; `finish` reports its error.
                let _ = sender.send(Arc::clone(&stretch));
            }
        }
    }

    fn spare(&mut self) -> Vec<u8> {
        self.spares.try_recv().unwrap_or_default()
    }
}

/// A large table: in memory, or straight into the staging folder.
fn large_table(
    staging: Option<&Staging>,
    name: &str,
    write: impl FnOnce(&mut dyn tables::TableSink) -> std::io::Result<()>,
) -> Result<Content, Error> {
    // Reading the rows back from a scratch file is the only way `write` fails.
    let scratch = |e| crate::error::OutputError::io(Path::new("a scratch file"), e);
    match staging {
        None => {
            let mut bytes = Vec::new();
            write(&mut bytes).map_err(scratch)?;
            Ok(Content::Bytes(bytes))
        }
        Some(staging) => {
            let mut file = StreamedFile::create(staging, name)?;
            let written = write(&mut file);
            let content = file.finish()?;
            written.map_err(scratch)?;
            Ok(content)
        }
    }
}

/// The result tables, in a fixed order; with `staging`, the two that grow with
/// the rows (scores, filled cells) are written there as they are formatted.
fn result_files(
    prepared: &Prepared,
    pre: &Preprocessed,
    analysis: &Analysis,
    staging: Option<&Staging>,
) -> Result<Vec<(String, Content)>, Error> {
    let plan = &prepared.plan;
    let d = &analysis.decomposition;
    let s = &analysis.selection;
    // The most unusual flagged rows, written in row order.
    let mut chosen = analysis
        .diagnostics
        .most_unusual(plan.diagnostics.contributions_max_rows.0.get());
    chosen.sort_unstable();
    let flagged: Vec<(&RowDetail, Vec<(f64, f64)>)> = chosen
        .into_iter()
        .map(|i| {
            let row = &analysis.details[&i];
            (
                row,
                contributions(&row.z, &d.loadings, &row.scores, &d.eigenvalues),
            )
        })
        .collect();
    let rows = &analysis.rows;
    let bytes = Content::Bytes;
    Ok(vec![
        (
            "scores.csv".into(),
            large_table(staging, "scores.csv", |sink| {
                tables::scores_csv_into(rows, s.kept, &analysis.diagnostics, sink)
            })?,
        ),
        (
            "loadings.csv".into(),
            bytes(tables::loadings_csv(&pre.scaled.names, d, s.computed)),
        ),
        (
            "variance.csv".into(),
            bytes(tables::variance_csv(d, s, pre.scaled.n_rows())),
        ),
        (
            "preprocessing.csv".into(),
            bytes(tables::preprocessing_csv(
                &plan.features,
                &plan.transforms,
                &pre.missing,
                &pre.scaling,
            )),
        ),
        (
            "imputed.csv".into(),
            large_table(staging, "imputed.csv", |sink| {
                tables::imputed_csv_into(&pre.filled, &analysis.rows, sink)
            })?,
        ),
        (
            "contributions.csv".into(),
            large_table(staging, "contributions.csv", |sink| {
                tables::contributions_csv_into(rows, &pre.scaled.names, &flagged, sink);
                Ok(())
            })?,
        ),
    ])
}

/// The plots, in the recipe's order: each file's name, bytes and caption.
fn figures(
    prepared: &Prepared,
    view: &crate::outputs::view::PlotView,
) -> Result<Vec<(String, Vec<u8>, String)>, Error> {
    let mut t = std::time::Instant::now();
    let mut files = Vec::new();
    for plan in &prepared.plan.plots {
        if plan.highest_component() > view.computed {
            return Err(RecipeError {
                file: prepared.recipe.path.clone(),
                at: Some(plan.at.clone()),
                problem: RecipeProblem::PlotComponentBeyondRank {
                    index: plan.highest_component(),
                    available: view.computed,
                },
            }
            .into());
        }
        let (svg, caption) = crate::outputs::plots::draw(plan, view);
        t = crate::timing::lap(&format!("  plot {}", plan.file), t);
        files.push((format!("plots/{}", plan.file), svg.into_bytes(), caption));
    }
    Ok(files)
}

/// The report's view, with the figures (drawn from the same plot view).
fn report_view_of(
    prepared: &Prepared,
    pre: &Preprocessed,
    analysis: &Analysis,
    view: &crate::outputs::view::PlotView,
    figures: &[(String, Vec<u8>, String)],
) -> crate::outputs::view::ReportView {
    use crate::outputs::{build_views, view::Figure};
    let mut report_view = build_views::report_view(prepared, pre, analysis, view);
    report_view.figures = prepared
        .plan
        .plots
        .iter()
        .zip(figures)
        .map(|(plan, (_, svg, caption))| Figure {
            file: plan.file.clone(),
            caption: caption.clone(),
            svg: String::from_utf8_lossy(svg).into_owned(),
        })
        .collect();
    report_view
}

/// The report. Its provenance names a results digest: the SHA-256 of the lines
/// "sha256  path" of every other output, in order (the manifest's own digest
/// covers the report too, so the report cannot show it). `files` are the
/// tables then the figures, `hashes` their SHA-256.
fn finish_report(
    prepared: &Prepared,
    mut report_view: crate::outputs::view::ReportView,
    outputs: &[FileRecord],
    resolved_sha: &str,
) -> (String, Content) {
    let listing: String = outputs
        .iter()
        .map(|r| format!("{}  {}\n", r.sha256, r.path))
        .collect();
    report_view.provenance = vec![
        (
            "tool".into(),
            format!("sextant {}", env!("CARGO_PKG_VERSION")),
        ),
        (
            "recipe".into(),
            format!(
                "{} (sha256 {})",
                crate::paths::relative(&prepared.plan.output, &prepared.recipe.path),
                sha256_hex(prepared.recipe.text.as_bytes())
            ),
        ),
        ("resolved recipe sha256".into(), resolved_sha.to_string()),
        (
            "input".into(),
            format!("{} (sha256 {})", prepared.input.path, prepared.input.sha256),
        ),
        ("results digest".into(), sha256_hex(listing.as_bytes())),
    ];
    (
        "report.html".into(),
        Content::Bytes(crate::outputs::report::render(&report_view).into_bytes()),
    )
}

/// What each step did, for the manifest.
fn steps_json(prepared: &Prepared, pre: &Preprocessed, analysis: &Analysis) -> Value {
    let mut steps = steps_json_exact(prepared, pre, analysis);
    if let Some(report) = &analysis.randomized {
        steps["decomposition"]["randomized"] = json!(report);
    }
    steps
}

fn steps_json_exact(prepared: &Prepared, pre: &Preprocessed, analysis: &Analysis) -> Value {
    let plan = &prepared.plan;
    let d = &analysis.decomposition;
    let s = &analysis.selection;
    let kept_share: f64 = d.eigenvalues[..s.kept].iter().sum::<f64>() / d.total_variance;
    json!({
        "read": {
            "rows": prepared.table.n_rows(),
            "columns": prepared.table.columns.len(),
            "id": plan.input.id,
            "groups": plan.input.groups,
            "features": plan.features,
            "unused_columns": plan.unused.iter().map(|(c, why)| json!({"column": c, "reason": why})).collect::<Vec<_>>(),
        },
        "missing": pre.missing,
        "transform": pre.transforms,
        "scaling": {
            "method": pre.scaling.method,
            "constant_features": pre.scaling.constant_features,
            "dropped_constant": pre.scaling.dropped_constant,
            "divisor": "n - 1",
        },
        "decomposition": {
            "matrix": matrix_name(plan),
            "route": d.route,
            "rows": pre.scaled.n_rows(),
            "features": pre.scaled.n_features(),
            "divisor": "n - 1",
            "rank": d.rank,
            "total_variance": d.total_variance,
            "sign_rule": "the largest-magnitude loading of each component is positive; magnitudes within 1e-9 relative are ties, won by the first feature",
        },
        "diagnostics": diagnostics_json(&analysis.diagnostics, d.rank, s.kept, plan.diagnostics.contributions_max_rows.0.get()),
        "components": {
            "rule": s.rule,
            "kept": s.kept,
            "computed": s.computed,
            "reason": s.reason,
            "adjustments": s.adjustments,
            "kept_share": kept_share,
        },
    })
}

/// The diagnostics' limits and counts, for the manifest.
fn diagnostics_json(diag: &Diagnostics, rank: usize, kept: usize, max_rows: usize) -> Value {
    json!({
        "t2": "sum over kept components of score² / eigenvalue",
        "t2_limit": "Tracy, Young & Mason (1992) Beta form for the analysed rows; F form (NIST/SEMATECH e-Handbook 6.5.4.3.4) recorded for new rows",
        "spe": "squared residual after the kept components",
        "spe_limit": diag.spe_method,
        "residual_eigenvalues": rank - kept,
        "residual_moments": diag.moments,
        "limits": diag.limits,
        "flagged_rows": diag.flagged,
        "contributions_written_for": diag.flagged.min(max_rows),
        "notes": diag.notes,
    })
}

/// The name of the matrix whose eigenvectors are the loadings.
pub fn matrix_name(plan: &Plan) -> &'static str {
    use crate::recipe::raw::ScalingMethod::*;
    match plan.scaling {
        None => "second moments (uncentred)",
        Center => "covariance",
        UnitVariance => "correlation",
        Pareto => "covariance of Pareto-scaled features",
        Range => "covariance of range-scaled features",
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ids(values: &[&str]) -> Result<(), InputError> {
        let table = Table::from_parts(
            "t.csv",
            vec!["id".into()],
            vec![values.iter().map(|v| v.to_string()).collect()],
            vec![crate::table::NumericColumn::default()],
            &[true],
            (0..values.len() as u64).map(|i| i + 2).collect(),
        );
        check_ids(&table, Some("id"))
    }

    #[test]
    fn the_first_bad_id_in_row_order_is_reported() {
        assert!(ids(&["a", "b", "c"]).is_ok());
        // Three of a kind: reported at the second, naming the first.
        let e = ids(&["x", "a", "x", "b", "x"]).unwrap_err().to_string();
        assert!(e.contains("t.csv:4:") && e.contains("line 2"), "{e}");
        // The earlier of two repeats wins, whatever their order by id.
        let e = ids(&["z", "a", "z", "a"]).unwrap_err().to_string();
        assert!(e.contains("t.csv:4:") && e.contains("`z`"), "{e}");
        // An empty id before a repeat is reported first, and after it, second.
        let e = ids(&["a", "", "a"]).unwrap_err().to_string();
        assert!(e.contains("t.csv:3:") && e.contains("empty"), "{e}");
        let e = ids(&["a", "a", ""]).unwrap_err().to_string();
        assert!(e.contains("t.csv:3:") && e.contains("`a`"), "{e}");
    }
}
