//! `sextant apply`: score new rows with a saved model.
//!
//! New rows are preprocessed exactly as the analysed rows were: the same
//! transforms, missing cells filled from the training model (never re-estimated
//! on the new rows), the training centre and scale. They are projected on the
//! saved loadings and get T² and SPE with flags against the saved limits for new
//! rows (T² by the F form). Columns are matched by name, so their order does not
//! matter; extra columns are ignored and reported; a missing feature is an
//! error. Results are written all at once to their own folder, with a manifest
//! that names the model's SHA-256 and the digest of the run that made it.
//!
//! The results folder is not trusted blindly: its manifest must match its
//! digest, model.json its recorded SHA-256, and the model must pass its checks
//! ([`crate::outputs::model::parse`]) before a row is read. Loading
//! ([`load_model`]), scoring ([`score`], no I/O) and writing are separate steps.

mod batch;
mod report;
mod score;

pub use batch::{BatchOptions, parse_decimal, parse_delimiter};
pub use score::{Scored, ScoredRows, score};

use crate::error::{Error, InputError, OutputError};
use crate::outputs::folder::write_folder;
use crate::outputs::hashing::sha256_hex;
use crate::outputs::manifest::{self, FileRecord, InputRecord, RunInfo};
use crate::outputs::model::{Fill, Model};
use crate::outputs::reading;
use crate::outputs::replace::{Writer, check_replaceable_by};
use crate::stages::FeatureData;
use crate::table::read::MissingCode;
use crate::verify::read_trusted_manifest;
use serde_json::{Value, json};
use std::path::{Path, PathBuf};
use std::time::Instant;

/// Options of `sextant apply`.
#[derive(Debug, Clone, Default)]
pub struct ApplyOptions {
    /// The folder to write; default `<results>-apply-<table name>` beside the results.
    pub out: Option<PathBuf>,
    pub replace: bool,
    /// How the batch is read and ordered.
    pub batch: BatchOptions,
}

/// `apply` replaces only its own earlier results: a folder whose manifest
/// names the model it used and no recipe.
const APPLY: Writer = Writer {
    option: "--out",
    different: "a different model, table or reading of the table (--delimiter, --decimal, --order)",
    own: |old| old.pointer("/model/sha256").is_some() && old.get("recipe").is_none(),
    not_own: "holds the results of a run, not of apply; apply replaces only its own earlier results, even with --replace",
};

/// What `apply` reports.
#[derive(Debug, Clone)]
pub struct ApplySummary {
    pub folder: PathBuf,
    pub table: String,
    pub rows_in: usize,
    pub rows_scored: usize,
    pub notes: Vec<String>,
    /// (confidence, rows above the T² limit, rows above the SPE limit).
    pub flagged: Vec<(f64, usize, usize)>,
    pub filled: usize,
    pub digest: String,
}

fn not_results(folder: &Path, reason: String) -> Error {
    InputError::NotResults {
        path: folder.display().to_string(),
        reason,
    }
    .into()
}

/// Reads the model of a results folder: the manifest must match its digest,
/// model.json must be a regular file with the SHA-256 the manifest recorded,
/// and the model must pass [`crate::outputs::model::Model::check`].
pub fn load_model(results: &Path) -> Result<(Model, String, Value), Error> {
    let manifest = read_trusted_manifest(results)?;
    let file = match reading::open_regular(
        &results.join("model.json"),
        &crate::paths::resolve(results),
        reading::Links::Refuse,
    ) {
        Ok(file) => file,
        Err(reading::Unopened::Missing) => {
            return Err(not_results(results, "there is no model.json".into()));
        }
        Err(reading::Unopened::Refused(why)) => {
            return Err(not_results(results, format!("model.json is {why}")));
        }
    };
    let mut bytes = Vec::new();
    std::io::Read::read_to_end(&mut { file }, &mut bytes)
        .map_err(|e| not_results(results, format!("cannot read model.json ({e})")))?;
    let (model, sha) = model_from_bytes(results, &manifest, &bytes)?;
    Ok((model, sha, manifest))
}

/// The model in `bytes`, refused unless the manifest records its SHA-256 and
/// it passes the model's checks; also its SHA-256.
pub fn model_from_bytes(
    results: &Path,
    manifest: &Value,
    bytes: &[u8],
) -> Result<(Model, String), Error> {
    let sha = sha256_hex(bytes);
    let recorded = manifest["outputs"]
        .as_array()
        .and_then(|o| o.iter().find(|f| f["path"] == "model.json"))
        .and_then(|f| f["sha256"].as_str());
    if recorded != Some(sha.as_str()) {
        return Err(not_results(
            results,
            "model.json does not match the SHA-256 in manifest.json (it changed after the run); rerun the analysis or restore the file".into(),
        ));
    }
    let model = crate::outputs::model::parse(bytes).map_err(|p| InputError::BadModel {
        path: results.display().to_string(),
        field: p.field,
        problem: p.problem,
    })?;
    Ok((model, sha))
}

/// How the new table is read and how many unusual rows are detailed, as the
/// analysis recorded them in its manifest.
#[derive(Debug, Clone)]
pub struct ScoreSettings {
    /// The recipe's delimiter (a `.tsv` or `.tab` table is read with tabs).
    pub delimiter: u8,
    pub missing_tokens: Vec<String>,
    /// The training table's decimal mark and thousands separator.
    pub decimal: u8,
    pub thousands: Option<u8>,
    /// The training recipe's missing codes of single columns.
    pub missing_per_column: Vec<(String, Vec<MissingCode>)>,
    pub contributions_max_rows: usize,
}

impl ScoreSettings {
    /// The settings recorded in an analysis' manifest (defaults where absent).
    pub fn from_manifest(results: &Path, manifest: &Value) -> Result<ScoreSettings, Error> {
        let input = manifest
            .pointer("/recipe/resolved/input")
            .unwrap_or(&Value::Null);
        let delimiter = match &input["delimiter"] {
            Value::Null => b',',
            Value::String(d) => {
                crate::recipe::raw::Delimiter::try_from(d.clone())
                    .map_err(|why| {
                        not_results(
                            results,
                            format!("manifest.json: recipe.resolved.input.delimiter: {why}"),
                        )
                    })?
                    .0
            }
            other => {
                return Err(not_results(
                    results,
                    format!(
                        "manifest.json: recipe.resolved.input.delimiter is {other}, not a text"
                    ),
                ));
            }
        };
        let missing_tokens: Vec<String> = input["missing"]
            .as_array()
            .map(|a| {
                a.iter()
                    .filter_map(|t| t.as_str().map(str::to_string))
                    .collect()
            })
            .unwrap_or_else(|| {
                crate::recipe::raw::DEFAULT_MISSING_TOKENS
                    .iter()
                    .map(|s| s.to_string())
                    .collect()
            });
        let contributions_max_rows = manifest
            .pointer("/recipe/resolved/diagnostics/contributions_max_rows")
            .and_then(Value::as_u64)
            .map_or(1000, |m| usize::try_from(m).unwrap_or(usize::MAX));
        let (decimal, thousands, missing_per_column) = number_marks(results, input)?;
        Ok(ScoreSettings {
            delimiter,
            missing_tokens,
            decimal,
            thousands,
            missing_per_column,
            contributions_max_rows,
        })
    }

    /// The delimiter for `table`: tabs for a `.tsv` or `.tab` file.
    pub fn delimiter_for(&self, table: &Path) -> u8 {
        match table
            .extension()
            .and_then(|e| e.to_str())
            .map(str::to_ascii_lowercase)
            .as_deref()
        {
            Some("tsv") | Some("tab") => b'\t',
            _ => self.delimiter,
        }
    }
}

/// The decimal mark, thousands separator and missing codes of single columns
/// the manifest records (absent: a decimal point, no separator, no codes).
type NumberMarks = (u8, Option<u8>, Vec<(String, Vec<MissingCode>)>);

fn number_marks(results: &Path, input: &Value) -> Result<NumberMarks, Error> {
    let bad = |key: &str, why: String| {
        not_results(
            results,
            format!("manifest.json: recipe.resolved.input.{key}: {why}"),
        )
    };
    let decimal = match &input["decimal"] {
        Value::Null => b'.',
        v => {
            serde_json::from_value::<crate::recipe::raw::DecimalMark>(v.clone())
                .map_err(|e| bad("decimal", e.to_string()))?
                .0
        }
    };
    let thousands = match &input["thousands"] {
        Value::Null => None,
        v => Some(
            serde_json::from_value::<crate::recipe::raw::Thousands>(v.clone())
                .map_err(|e| bad("thousands", e.to_string()))?
                .0,
        ),
    };
    let codes = match &input["missing_per_column"] {
        Value::Null => Vec::new(),
        v => serde_json::from_value::<std::collections::BTreeMap<String, Vec<MissingCode>>>(
            v.clone(),
        )
        .map_err(|e| bad("missing_per_column", e.to_string()))?
        .into_iter()
        .collect(),
    };
    Ok((decimal, thousands, codes))
}

/// Scores the rows of `table_path` with the model in `results`.
pub fn apply(
    results: &Path,
    table_path: &Path,
    options: &ApplyOptions,
) -> Result<ApplySummary, Error> {
    let start = Instant::now();
    let started_utc = manifest::utc_now();
    // Refused before anything is read or computed: a replacement must never
    // delete what this command reads.
    let folder = options
        .out
        .clone()
        .unwrap_or_else(|| default_folder(results, table_path));
    guard_folder(&folder, results, table_path)?;
    let (model, model_sha, source) = load_model(results)?;
    let settings = ScoreSettings::from_manifest(results, &source)?;
    let shown = table_path.display().to_string();
    let bytes = crate::paths::read_regular(table_path).map_err(|source| InputError::Io {
        path: shown.clone(),
        source,
    })?;
    let table_sha = sha256_hex(&bytes);
    let scored = score(
        &model,
        &settings,
        settings.delimiter_for(table_path),
        &options.batch,
        &bytes,
        &shown,
    )?;
    let Scored {
        mut files,
        rows_in,
        rows_scored: n,
        columns,
        notes,
        limits,
        filled,
        delimiter,
        decimal,
        rows,
    } = scored;
    let mut notes = notes;
    let lock = crate::outputs::lock::lock(&folder)?;
    notes.extend(lock.notes.iter().cloned());
    // How the batch was read and ordered: with the model, it stands for the
    // recipe, so a rerun with the same model, table and reading replaces it.
    let reading = json!({
        "delimiter": String::from(char::from(delimiter)),
        "decimal": String::from(char::from(decimal)),
        "order": rows.order.as_ref().map(|o| o.0.clone()),
    });
    let fingerprint = (
        manifest::apply_key(&model_sha, &reading),
        vec![table_sha.clone()],
    );
    check_replaceable_by(&folder, &fingerprint, options.replace, &APPLY)?;
    let view = report::view(report::Parts {
        results,
        folder: &folder,
        table: &shown,
        table_sha: &table_sha,
        model: &model,
        model_sha: &model_sha,
        source: &source,
        rows_in,
        rows,
        notes: &notes,
    });
    files.push((
        "report.html".into(),
        crate::outputs::report::batch::render(&view).into_bytes(),
    ));
    let outputs: Vec<FileRecord> = files
        .iter()
        .map(|(path, b)| FileRecord {
            path: path.clone(),
            bytes: b.len() as u64,
            sha256: sha256_hex(b),
        })
        .collect();
    let flagged_counts: Vec<(f64, usize, usize)> = limits
        .iter()
        .map(|l| (l.confidence, l.t2_flagged, l.spe_flagged))
        .collect();
    let body = json!({
        "tool": { "name": "sextant", "version": env!("CARGO_PKG_VERSION") },
        "manifest_format": manifest::MANIFEST_FORMAT,
        "model": {
            "results": crate::paths::relative(&folder, results),
            "sha256": model_sha,
            "made_by_digest": source.get("digest").cloned().unwrap_or(Value::Null),
        },
        "batch": reading,
        "inputs": [InputRecord {
            path: crate::paths::relative(&folder, table_path),
            bytes: bytes.len() as u64,
            sha256: table_sha,
            rows: rows_in,
            columns,
        }],
        "steps": {
            "rows_in": rows_in,
            "rows_scored": n,
            "cells_filled": filled,
            "fill": fill_words(&model.fill),
            "t2_limit": "new-observation F form (NIST/SEMATECH e-Handbook 6.5.4.3.4), saved with the model",
            "limits": limits,
            "notes": notes,
        },
        "outputs": outputs,
    });
    let seconds = start.elapsed().as_secs_f64();
    let run = RunInfo {
        started_utc,
        seconds: (seconds * 1000.0).round() / 1000.0,
        host: manifest::host_name(),
        threads: rayon::current_num_threads(),
        platform: crate::outputs::manifest::platform(),
    };
    let (text, digest) = manifest::render_value(body, &run);
    let mut all = files;
    all.push(("manifest.json".into(), text.into_bytes()));
    write_folder(&folder, &all)?;
    drop(lock);
    Ok(ApplySummary {
        folder,
        table: shown,
        rows_in,
        rows_scored: n,
        notes,
        flagged: flagged_counts,
        filled,
        digest,
    })
}

/// How the model fills the missing cells of new rows, in words.
fn fill_words(fill: &Fill) -> &'static str {
    match fill {
        Fill::DropRows => "drop-rows",
        Fill::Constant { .. } => "training fill values",
        Fill::IterativePca { .. } => "projection on the training imputation model",
        Fill::Knn { .. } => "nearest training rows",
    }
}

/// Notes for new values far outside a feature's analysed range: more than the
/// width of that range beyond it, as a value in another unit would be.
fn range_notes(model: &Model, data: &FeatureData) -> Vec<String> {
    let mut notes = Vec::new();
    for (f, column) in model.features.iter().zip(&data.features) {
        let width = f.max - f.min;
        let far: Vec<usize> = (0..column.values.len())
            .filter(|&i| {
                let v = column.values[i];
                !v.is_nan() && (v < f.min - width || v > f.max + width)
            })
            .collect();
        if let Some(&first) = far.first() {
            notes.push(format!(
                "`{}`: {} value(s) far outside the analysed range [{}, {}]{}, first at line {} ({}); is it in another unit?",
                f.name,
                far.len(),
                crate::text::number(f.min),
                crate::text::number(f.max),
                f.transform
                    .map_or(String::new(), |t| format!(" (after {})", t.name())),
                data.lines[first],
                crate::text::number(column.values[first])
            ));
        }
    }
    notes
}

/// `<results>-apply-<table stem>` beside the results folder.
fn default_folder(results: &Path, table: &Path) -> PathBuf {
    let tidy = crate::paths::tidy(results);
    let name = tidy
        .file_name()
        .map_or("results".into(), |n| n.to_string_lossy().into_owned());
    let stem = table
        .file_stem()
        .map_or("new".into(), |n| n.to_string_lossy().into_owned());
    tidy.with_file_name(format!("{name}-apply-{stem}"))
}

/// The scores folder may not hold the results it reads or the table it scores.
fn guard_folder(folder: &Path, results: &Path, table: &Path) -> Result<(), OutputError> {
    use crate::paths::inside;
    let overlap = |what: &str, path: &Path| OutputError::Refused {
        path: folder.display().to_string(),
        reason: format!(
            "the output folder would overlap {what} {} (links followed); choose another --out",
            path.display()
        ),
    };
    if inside(table, folder) {
        return Err(overlap("the table", table));
    }
    if inside(results, folder) || inside(folder, results) {
        return Err(overlap("the results folder", results));
    }
    Ok(())
}
