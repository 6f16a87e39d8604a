//! The one orchestrator: it reads the recipe and the input, runs the stages in
//! order (prepare → preprocess → analyse), and has the results rendered
//! (`outputs::render`) into the staging folder it makes and commits. It alone
//! decides what a run reads and where its results go.

use crate::analysis::{
    Analysis, InputRecord, PassData, Prepared, Preprocessed, column_squares, diagnostics_for,
    keep_error, loadings_wanted, row_details, rows_needing_values, scores_between, texts_of,
};
use crate::error::{Error, InputError, RecipeError, RecipeProblem};
use crate::outputs::folder::Staging;
use crate::outputs::hashing::sha256_hex;
use crate::outputs::manifest::{self, FileRecord, RunInfo};
use crate::outputs::render::{Computed, fingerprint, render};
use crate::outputs::replace::check_replaceable;
use crate::recipe::plan::MethodPlan;
use crate::recipe::plan::{Plan, check_names, input_plan, make_plan};
use crate::recipe::raw::DEFAULT_COMPUTE;
use crate::recipe::raw::Keep;
use crate::recipe::{self, LoadedRecipe};
use crate::row_results::RowResults;
use crate::stages::FeatureData;
use crate::stages::crossval::cross_validate;
use crate::stages::decompose::{decompose_keeping, scores};
use crate::stages::diagnose::{diagnose_all, residual_moments, row_statistics};
use crate::stages::missing::{MissingSettings, handle_missing};
use crate::stages::parallel::parallel_analysis;
use crate::stages::scale::scale;
use crate::stages::select::{Evidence, choose};
use crate::stages::transform::apply_transforms;
use crate::stream::{Choice, EngineOptions};
use crate::table::{ColumnData, Table, read_header, read_table_parallel};
use std::path::Path;
use std::sync::Arc;
use std::time::Instant;

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
    let dir = crate::analysis::scratch_dir_of(&scratch);
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
        return Err(crate::stages::missing::too_few_rows(
            &data.source,
            data.n_rows(),
            0,
        ));
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
    let filled = crate::row_results::FilledCells::from_cells(&filled, &plan.features);
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
    decomposition.check_variance(&prepared.table.display)?;
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
    let selection = choose(
        &mut decomposition,
        z.cols,
        components,
        evidence,
        randomized
            .is_none()
            .then_some(|want: usize| decompose_keeping(z, centred, None, want)),
        |e| keep_error(prepared, pre, e.keep, e.available),
    )?;
    let kept = selection.kept;
    let scores = scores(z, &decomposition.loadings, kept);
    let more_scores = scores_between(z, &decomposition.loadings, kept, selection.computed);
    let (t2, spe) = row_statistics(
        z,
        &decomposition.loadings,
        &scores,
        &decomposition.eigenvalues,
    );
    let moments = residual_moments(&decomposition, kept, randomized.as_ref().map(|r| (r, z)));
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
        platform: manifest::platform(),
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
