//! What the batch report shows, gathered from the scores, the model and the
//! results folder: the rows in chart order, the training rows' scores (read
//! from the results' scores.csv only when its SHA-256 is the one the
//! manifest records, so an edited file is never drawn as the training set)
//! and the provenance.

use super::batch::order_rows;
use super::score::ScoredRows;
use crate::outputs::batch_view::BatchView;
use crate::outputs::model::Model;
use crate::outputs::reading;
use serde_json::Value;
use std::path::Path;

/// The largest training scores.csv read for the score plot.
const TRAINING_LIMIT: u64 = 1 << 30;

/// What the report is built from.
pub struct Parts<'a> {
    pub results: &'a Path,
    pub folder: &'a Path,
    pub table: &'a str,
    pub table_sha: &'a str,
    pub model: &'a Model,
    pub model_sha: &'a str,
    /// The results folder's manifest.
    pub source: &'a Value,
    pub rows_in: usize,
    pub rows: ScoredRows,
    pub notes: &'a [String],
}

/// The report's view: rows put in chart order, training scores read.
pub fn view(parts: Parts) -> BatchView {
    let rows = parts.rows;
    let order: Vec<usize> = match &rows.order {
        Some((_, values)) => order_rows(values),
        None => (0..rows.t2.len()).collect(),
    };
    let pick = |v: &[f64]| order.iter().map(|&i| v[i]).collect::<Vec<f64>>();
    let training = if parts.model.kept < 2 {
        Err("the model keeps one component".to_string())
    } else {
        training_scores(parts.results, parts.source)
    };
    let mut view = BatchView {
        table: parts.table.to_string(),
        results: crate::paths::relative(parts.folder, parts.results),
        rows_in: parts.rows_in,
        kept: parts.model.kept,
        labels: order.iter().map(|&i| rows.labels[i].clone()).collect(),
        lines: order.iter().map(|&i| rows.lines[i]).collect(),
        t2: pick(&rows.t2),
        spe: pick(&rows.spe),
        scores: order.iter().map(|&i| rows.scores[i].clone()).collect(),
        order: rows
            .order
            .map(|(c, v)| (c, order.iter().map(|&i| v[i].clone()).collect())),
        limits: rows.limits,
        training,
        flagged: rows.flagged,
        flagged_count: 0,
        fill_method: super::fill_words(&parts.model.fill).to_string(),
        fills: rows.fills,
        notes: parts.notes.to_vec(),
        provenance: Vec::new(),
    };
    view.flagged_count = (0..view.t2.len()).filter(|&i| view.is_flagged(i)).count();
    view.provenance = vec![
        (
            "tool".into(),
            format!("sextant {}", env!("CARGO_PKG_VERSION")),
        ),
        ("results folder".into(), view.results.clone()),
        ("model.json SHA-256".into(), parts.model_sha.to_string()),
        (
            "digest of the run that made the model".into(),
            parts
                .source
                .get("digest")
                .and_then(Value::as_str)
                .unwrap_or("not recorded")
                .to_string(),
        ),
        ("batch".into(), parts.table.to_string()),
        ("batch SHA-256".into(), parts.table_sha.to_string()),
    ];
    view
}

/// The training rows' scores on PC1 and PC2 from the results' scores.csv, or
/// why they are not shown.
fn training_scores(results: &Path, manifest: &Value) -> Result<Vec<[f64; 2]>, String> {
    let recorded = manifest["outputs"]
        .as_array()
        .and_then(|o| o.iter().find(|f| f["path"] == "scores.csv"))
        .and_then(|f| f["sha256"].as_str())
        .ok_or("the results folder lists no scores.csv")?;
    let file = reading::open_regular(
        &results.join("scores.csv"),
        &crate::paths::resolve(results),
        reading::Links::Refuse,
    )
    .map_err(|_| "the results folder has no readable scores.csv".to_string())?;
    let bytes = reading::read_at_most(file, TRAINING_LIMIT)
        .ok()
        .flatten()
        .ok_or("the results' scores.csv cannot be read or is too large")?;
    if crate::outputs::hashing::sha256_hex(&bytes) != recorded {
        return Err("the results' scores.csv changed after the run".into());
    }
    let mut reader = csv::ReaderBuilder::new().from_reader(bytes.as_slice());
    let header = reader
        .headers()
        .map_err(|_| "the results' scores.csv has no header".to_string())?
        .clone();
    let at = |name: &str| header.iter().position(|h| h == name);
    let (Some(a), Some(b)) = (at("PC1"), at("PC2")) else {
        return Err("the results' scores.csv has no PC1 and PC2".into());
    };
    let mut points = Vec::new();
    for record in reader.records() {
        let record = record.map_err(|_| "the results' scores.csv cannot be read".to_string())?;
        let value = |j: usize| record.get(j).and_then(|v| v.parse::<f64>().ok());
        if let (Some(x), Some(y)) = (value(a), value(b)) {
            points.push([x, y]);
        }
    }
    Ok(points)
}
