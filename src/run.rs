//! The one orchestrator: it reads the recipe and the input, runs the stages in
//! order (prepare → preprocess → analyse), and has the results rendered
//! (`outputs::render`) into the staging folder it makes and commits. It alone
//! decides what a run reads and where its results go.

use crate::analysis::{Analysis, InputRecord, Prepared, Preprocessed, StoredValues, keep_error};
use crate::error::{Error, InputError, RecipeError, RecipeProblem};
use crate::outputs::folder::Staging;
use crate::outputs::manifest::{self, FileRecord, RunInfo};
use crate::outputs::render::{Computed, fingerprint, render};
use crate::outputs::replace::check_replaceable;
use crate::recipe::plan::{check_names, input_plan, make_plan};
use crate::recipe::raw::Keep;
use crate::recipe::{self, LoadedRecipe};
use crate::stream::{Choice, EngineOptions};
use std::path::Path;
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
    // Both engines read the table into the row store; the in-memory engine
    // keeps all of it in memory (the whole-matrix methods take a matrix view of
    // it), the passes engine keeps what fits the budget.
    let keep_in_memory = match choice {
        Choice::Passes { keep_in_memory } => keep_in_memory,
        Choice::InMemory => u64::MAX,
    };
    read_into_store(recipe, keep_in_memory, options.engine)
}

/// Reads the input in chunks into the row store (up to `keep_in_memory` bytes
/// of values in memory, the rest in a scratch file), and checks the plan.
fn read_into_store(
    recipe: LoadedRecipe,
    keep_in_memory: u64,
    engine: crate::stream::Engine,
) -> Result<Prepared, Error> {
    let input = input_plan(&recipe);
    let shown = input.file.display().to_string();
    // Scratch files go beside the results folder, named after it, like its
    // staging folder.
    let (scratch, _) = crate::recipe::plan::output_folder(&recipe, &input)?;
    if keep_in_memory < u64::MAX {
        // Made now only when the store may need a scratch file there.
        let dir = crate::analysis::scratch_dir_of(&scratch);
        std::fs::create_dir_all(&dir).map_err(|e| crate::error::OutputError::io(&dir, e))?;
    }
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
    // A table with fewer rows than features is analysed through its n × n
    // matrix of row products, which needs its values in memory.
    if table.n_rows() < plan.features.len()
        && (ingested.store.spilled() || engine == crate::stream::Engine::Passes)
    {
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
        values: Some(StoredValues {
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

/// Runs the missing, transform and scaling stages.
pub fn preprocess(prepared: &Prepared) -> Result<Preprocessed, Error> {
    let data = prepared.stored();
    let pre = crate::stream::passes::preprocess(
        prepared,
        &mut data.store.lock().expect("no pass panicked"),
        &data.numeric,
    )?;
    check_keep_bound(prepared, &pre)?;
    Ok(pre)
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
    let data = prepared.stored();
    crate::stream::passes::analyse(
        prepared,
        pre,
        &mut data.store.lock().expect("no pass panicked"),
        &data.numeric,
    )
}

/// Keeps the scaled rows as one matrix in `pre.scaled` (rows × features), for
/// checks on small tables that read them after the analysis; the whole-matrix
/// methods hold them already.
pub fn hold_scaled_rows(prepared: &Prepared, pre: &mut Preprocessed) -> Result<(), Error> {
    if pre.scaled.matrix.is_none() {
        let data = prepared.stored();
        let store = data.store.lock().expect("no pass panicked");
        pre.scaled.matrix = Some(crate::stream::passes::scaled_rows(
            prepared,
            pre,
            &store,
            &data.numeric,
        )?);
    }
    Ok(())
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

/// Refuses a folder that may not be replaced; when it holds this recipe's
/// results from before `sextant pin` added the pin (the same analysis of the
/// same input), the refusal says so, since "a different recipe" would send the
/// user looking for a change they did not make.
fn check_replaceable_after_pin(prepared: &Prepared, replace: bool) -> Result<(), Error> {
    let target = &prepared.plan.output;
    let refused = check_replaceable(target, &fingerprint(prepared), replace);
    if refused.is_err()
        && let Some(unpinned) = crate::outputs::render::fingerprint_without_pin(prepared)
        && check_replaceable(target, &unpinned, false).is_ok()
    {
        return Err(crate::error::OutputError::PinnedSince {
            path: target.display().to_string(),
        }
        .into());
    }
    Ok(refused?)
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
    check_replaceable_after_pin(&prepared, options.replace)?;
    let (pre, analysis) = analyse_all(&prepared)?;
    // The table's values are not needed for the outputs: free them first.
    prepared.values = None;
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
