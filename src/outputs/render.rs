//! Rendering a run's results: the result tables, figures, report, model and
//! manifest body, from the prepared input, the preprocessed data and the
//! analysis. Everything is made in memory; when the orchestrator hands over a
//! staging folder, the files are written into it (the tables that grow with the
//! rows a stretch at a time, while they are hashed). Nothing here chooses what
//! is read or where results go: that is `run`'s.

use super::folder::Staging;
use super::hashing::sha256_hex;
use super::manifest::{FileRecord, ManifestBody};
use super::tables;
use crate::analysis::{Analysis, Prepared, Preprocessed, RowDetail, matrix_name, scratch_dir};
use crate::error::{Error, RecipeError, RecipeProblem};
use crate::recipe::resolved::resolved_recipe;
use crate::stages::diagnose::{Diagnostics, contributions};
use serde_json::{Value, json};
use std::path::Path;
use std::sync::Arc;

/// The bytes of every result file and the hashed part of the manifest.
pub struct Computed {
    /// Result files in their fixed order, without the manifest.
    pub files: Vec<(String, Vec<u8>)>,
    pub outputs: Vec<FileRecord>,
    pub body: ManifestBody,
    /// The resolved recipe's hash and the inputs' hashes.
    pub fingerprint: (String, Vec<String>),
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
pub fn fingerprint(prepared: &Prepared) -> (String, Vec<String>) {
    (
        resolved_with_hash(prepared).1,
        vec![prepared.input.sha256.clone()],
    )
}

/// [`fingerprint`] of the same recipe without its `input.sha256` pin, when it
/// has one: what the results of this recipe carried before `sextant pin`.
pub fn fingerprint_without_pin(prepared: &Prepared) -> Option<(String, Vec<String>)> {
    let (mut resolved, _) = resolved_with_hash(prepared);
    let pin = resolved.pointer_mut("/input/sha256")?;
    if pin.is_null() {
        return None;
    }
    *pin = Value::Null;
    let sha = sha256_hex(&serde_json::to_vec(&resolved).expect("JSON values serialise"));
    Some((sha, vec![prepared.input.sha256.clone()]))
}

/// The results digest the report shows and `run` prints: the SHA-256 of the
/// lines "sha256  path" of every output but report.html, in order. (The
/// manifest's own `digest` covers the report too, so the report cannot show
/// that one.)
pub fn results_digest(outputs: &[FileRecord]) -> String {
    let listing: String = outputs
        .iter()
        .filter(|r| r.path != REPORT)
        .map(|r| format!("{}  {}\n", r.sha256, r.path))
        .collect();
    sha256_hex(listing.as_bytes())
}

/// The report's file name.
const REPORT: &str = "report.html";

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
                let transforms = filled_transforms(&pre.filled.features, &pre.transforms);
                tables::imputed_csv_into(&pre.filled, &transforms, &analysis.rows, sink)
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
        ("results digest".into(), results_digest(outputs)),
    ];
    (
        REPORT.into(),
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

/// The transform of each feature of the filled cells, by name.
fn filled_transforms(
    features: &[String],
    applied: &[crate::stages::transform::Applied],
) -> Vec<Option<crate::recipe::plan::Transform>> {
    features
        .iter()
        .map(|f| {
            applied
                .iter()
                .find(|a| &a.feature == f)
                .map(|a| a.transform)
        })
        .collect()
}
