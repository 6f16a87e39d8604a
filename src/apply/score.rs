//! Scoring a batch with a checked model: no file is read or written here.
//! The rows are read (`super::batch`), transformed, filled from the training
//! model, centred, scaled and projected with the same arithmetic as the
//! analysis; the result files and what the report needs come out together.

use super::ScoreSettings;
use super::batch::{self, BatchOptions};
use crate::error::{Error, InputError};
use crate::linalg::Matrix;
use crate::outputs::batch_view::{BatchFill, BatchFlagged, BatchLimit};
use crate::outputs::model::{Fill, Model};
use crate::outputs::tables;
use crate::row_results::RowResults;
use crate::stages::decompose::scores;
use crate::stages::diagnose::{Limits, contributions, diagnose_all, row_statistics, with_limits};
use crate::stages::impute::{fill_row_from_model, fill_row_from_reference};
use crate::stages::missing::FilledCell;
use crate::stages::scale::scale_value;
use crate::stages::transform::apply_transforms;
use crate::stages::{Feature, FeatureData};
use crate::table::{ColumnData, read_header};
use std::path::Path;

/// How many features a flagged row's largest contributions name.
const TOP_CONTRIBUTIONS: usize = 3;

/// The scored rows as the report draws them, in file order.
#[derive(Debug, Clone)]
pub struct ScoredRows {
    pub labels: Vec<String>,
    pub lines: Vec<u64>,
    pub t2: Vec<f64>,
    pub spe: Vec<f64>,
    /// Scores on the first two kept components (one when one is kept).
    pub scores: Vec<Vec<f64>>,
    /// The order column and each scored row's value in it.
    pub order: Option<(String, Vec<String>)>,
    /// Rows above a limit at any level, most severe first.
    pub flagged: Vec<BatchFlagged>,
    pub limits: Vec<BatchLimit>,
    pub fills: Vec<BatchFill>,
}

/// The scores of a new table, ready to be written.
#[derive(Debug, Clone)]
pub struct Scored {
    /// scores.csv, contributions.csv and imputed.csv.
    pub files: Vec<(String, Vec<u8>)>,
    pub rows_in: usize,
    pub rows_scored: usize,
    pub columns: usize,
    pub notes: Vec<String>,
    pub limits: Vec<Limits>,
    pub filled: usize,
    /// The delimiter and decimal mark the table was read with.
    pub delimiter: u8,
    pub decimal: u8,
    pub rows: ScoredRows,
}

/// Scores the rows of a table (`bytes`, shown as `shown`) with a checked model,
/// read with the analysis' delimiter `usual` unless `options` or the file say
/// otherwise. No file is read or written.
pub fn score(
    model: &Model,
    settings: &ScoreSettings,
    usual: u8,
    options: &BatchOptions,
    bytes: &[u8],
    shown: &str,
) -> Result<Scored, Error> {
    let (delimiter, found) =
        batch::choose_delimiter(bytes, shown, model, options.delimiter, usual)?;
    let header = read_header(bytes, shown, delimiter)?;
    let absent: Vec<String> = model
        .features
        .iter()
        .map(|f| f.name.clone())
        .filter(|n| !header.names.contains(n))
        .collect();
    if !absent.is_empty() {
        return Err(InputError::MissingFeatures {
            path: shown.to_string(),
            names: absent.join(", "),
        }
        .into());
    }
    let mut notes: Vec<String> = found.into_iter().collect();
    let id = model.id.clone().filter(|id| header.names.contains(id));
    if let (Some(want), None) = (&model.id, &id) {
        notes.push(format!(
            "the id column `{want}` is not in the table; rows are labelled by number"
        ));
    }
    let groups: Vec<String> = model
        .groups
        .iter()
        .filter(|g| header.names.contains(g))
        .cloned()
        .collect();
    if let Some(order) = &options.order
        && !header.names.contains(order)
    {
        return Err(InputError::NoOrderColumn {
            path: shown.to_string(),
            column: order.clone(),
            names: header
                .names
                .iter()
                .map(|n| format!("`{n}`"))
                .collect::<Vec<_>>()
                .join(", "),
        }
        .into());
    }
    let is_feature = |n: &String| model.features.iter().any(|f| &f.name == n);
    let known = |n: &String| {
        is_feature(n)
            || id.as_ref() == Some(n)
            || groups.contains(n)
            || options.order.as_ref() == Some(n)
    };
    let ignored: Vec<String> = header.names.iter().filter(|n| !known(n)).cloned().collect();
    if !ignored.is_empty() {
        notes.push(format!(
            "ignored columns that are not in the model: {}",
            ignored.join(", ")
        ));
    }
    let mut text_columns: Vec<String> = id.iter().cloned().chain(groups.iter().cloned()).collect();
    if let Some(order) = options.order.as_ref().filter(|o| !is_feature(o))
        && !text_columns.contains(order)
    {
        text_columns.push(order.clone());
    }
    let read = batch::read_batch(
        bytes,
        shown,
        model,
        delimiter,
        options.decimal,
        settings,
        text_columns,
    )?;
    notes.extend(read.notes.iter().cloned());
    let table = read.table;
    let rows_in = table.n_rows();
    // The order column's value in each row, as written.
    let order_values: Option<(String, Vec<String>)> = options.order.as_ref().map(|o| {
        let values = match table.column(o).map(|c| &c.data) {
            Some(ColumnData::Text(v)) => v.to_vec(),
            _ => {
                let j = model
                    .features
                    .iter()
                    .position(|f| &f.name == o)
                    .unwrap_or(0);
                read.features[j]
                    .iter()
                    .map(|v| {
                        if v.is_nan() {
                            String::new()
                        } else {
                            crate::text::number(*v)
                        }
                    })
                    .collect()
            }
        };
        (o.clone(), values)
    });

    // The features in the model's order, transformed like the training rows.
    let features: Vec<Feature> = model
        .features
        .iter()
        .zip(read.features)
        .map(|(f, values)| Feature {
            name: f.name.clone(),
            values,
            transform: f.transform,
        })
        .collect();
    let data = FeatureData {
        features,
        rows: (0..rows_in).collect(),
        lines: table.lines.clone(),
        source: shown.to_string(),
    };
    let (data, _) = apply_transforms(data)?;
    notes.extend(super::range_notes(model, &data));

    // Fill missing cells row by row from the training model.
    let p = model.features.len();
    let mut scored_rows = Vec::new();
    let mut filled = Vec::new();
    let mut skipped = 0;
    let mut x: Vec<Vec<f64>> = Vec::new();
    for i in 0..rows_in {
        let mut row: Vec<f64> = data.features.iter().map(|f| f.values[i]).collect();
        let gaps: Vec<usize> = (0..p).filter(|&j| row[j].is_nan()).collect();
        if !gaps.is_empty() {
            if fill_row(model, &mut row, &gaps).is_none() {
                skipped += 1;
                continue;
            }
            filled.extend(gaps.iter().map(|&j| FilledCell {
                row: i,
                feature: model.features[j].name.as_str().into(),
                value: row[j],
            }));
        }
        scored_rows.push(i);
        x.push(row);
    }
    if skipped > 0 {
        let rows = crate::text::count(skipped, "row", "rows");
        let were = if skipped == 1 { "was" } else { "were" };
        notes.push(match model.fill {
            Fill::DropRows => {
                format!("{rows} with missing cells {were} not scored (the model drops such rows)")
            }
            _ => format!("{rows} with no observed feature {were} not scored"),
        });
    }
    if scored_rows.is_empty() {
        return Err(InputError::NoRowsToScore {
            path: shown.to_string(),
        }
        .into());
    }

    // Centre, scale, project: the same arithmetic as the analysis.
    let n = scored_rows.len();
    let mut z = Matrix::zeros(n, p);
    for (r, row) in x.iter().enumerate() {
        for (j, f) in model.features.iter().enumerate() {
            z.set(r, j, scale_value(row[j], f.centre, f.scale));
        }
    }
    let k = model.kept;
    let mut loadings = Matrix::zeros(p, k);
    for j in 0..p {
        for a in 0..k {
            loadings.set(j, a, model.loadings[j][a]);
        }
    }
    let t = scores(&z, &loadings, k);
    let (t2, spe) = row_statistics(&z, &loadings, &t, &model.eigenvalues);
    let limits: Vec<Limits> = model
        .limits
        .iter()
        // New rows are flagged by the new-row T² limit; counted with the rows below.
        .map(|l| Limits::uncounted(l.confidence, l.t2_new_rows, l.t2_new_rows, l.spe))
        .collect();
    let spe_method = model.spe_limit;
    // More rows than are scored cannot be listed.
    let max_rows = settings.contributions_max_rows.min(n);
    let diagnostics = diagnose_all(
        with_limits(limits, spe_method, None, Vec::new(), max_rows),
        &t2,
        &spe,
    );

    // Result files.
    let text_of = |name: &str| match table.column(name).map(|c| &c.data) {
        Some(ColumnData::Text(v)) => v.as_slice(),
        _ => unreachable!("id and group columns are read as text"),
    };
    let feature_names: Vec<String> = model.features.iter().map(|f| f.name.clone()).collect();
    let filled_cells = crate::row_results::FilledCells::from_cells(&filled, &feature_names);
    let transforms: Vec<_> = model.features.iter().map(|f| f.transform).collect();
    let texts = |name: &str| -> Vec<String> {
        let values = text_of(name);
        scored_rows.iter().map(|&r| values[r].clone()).collect()
    };
    let rows = RowResults::from_parts(
        k,
        &scored_rows,
        &t.data,
        &t2,
        &spe,
        id.as_deref().map(|n| (n.to_string(), texts(n))),
        groups.iter().map(|g| (g.clone(), texts(g))).collect(),
    );
    let mut chosen = diagnostics.most_unusual(max_rows);
    chosen.sort_unstable();
    let mut details = crate::analysis::row_details(&rows, k, &chosen)?;
    for (&i, row) in &mut details {
        row.z = z.row(i).to_vec();
    }
    let flagged_details: Vec<(&crate::analysis::RowDetail, Vec<(f64, f64)>)> = details
        .values()
        .map(|d| {
            (
                d,
                contributions(&d.z, &loadings, &d.scores, &model.eigenvalues),
            )
        })
        .collect();
    let io = |e| crate::error::OutputError::io(Path::new("a scratch file"), e);
    let files: Vec<(String, Vec<u8>)> = vec![
        (
            "scores.csv".into(),
            tables::scores_csv(&rows, k, &diagnostics).map_err(io)?,
        ),
        (
            "contributions.csv".into(),
            tables::contributions_csv(&rows, &feature_names, &flagged_details),
        ),
        (
            "imputed.csv".into(),
            tables::imputed_csv(&filled_cells, &transforms, &rows).map_err(io)?,
        ),
    ];

    // What the report shows.
    let labels: Vec<String> = match &id {
        Some(name) => texts(name),
        None => scored_rows
            .iter()
            .map(|&r| format!("row {}", r + 1))
            .collect(),
    };
    let lines: Vec<u64> = scored_rows.iter().map(|&r| table.lines[r]).collect();
    let report_limits: Vec<BatchLimit> = diagnostics
        .limits
        .iter()
        .map(|l| BatchLimit {
            confidence: l.confidence,
            t2: l.t2,
            spe: l.spe,
        })
        .collect();
    let flagged_rows = flagged_list(
        &diagnostics,
        &z,
        &t,
        &loadings,
        model,
        &labels,
        &lines,
        &t2,
        &spe,
    );
    let position: std::collections::BTreeMap<usize, usize> = scored_rows
        .iter()
        .enumerate()
        .map(|(r, &i)| (i, r))
        .collect();
    let fills: Vec<BatchFill> = filled
        .iter()
        .map(|c| BatchFill {
            label: labels[position[&c.row]].clone(),
            line: table.lines[c.row],
            feature: c.feature.to_string(),
            value: c.value,
        })
        .collect();
    let report_rows = ScoredRows {
        scores: (0..n).map(|r| t.row(r)[..k.min(2)].to_vec()).collect(),
        order: order_values.map(|(c, v)| (c, scored_rows.iter().map(|&r| v[r].clone()).collect())),
        labels,
        lines,
        t2: t2.clone(),
        spe: spe.clone(),
        flagged: flagged_rows,
        limits: report_limits,
        fills,
    };
    Ok(Scored {
        files,
        rows_in,
        rows_scored: n,
        columns: table.columns.len(),
        notes,
        limits: diagnostics.limits,
        filled: filled_cells.len(),
        delimiter: read.delimiter,
        decimal: read.decimal,
        rows: report_rows,
    })
}

/// Fills the `gaps` of one row from the training model; `None` when the row
/// cannot be filled (the model drops such rows, or nothing was observed).
fn fill_row(model: &Model, row: &mut [f64], gaps: &[usize]) -> Option<()> {
    match &model.fill {
        Fill::DropRows => None,
        Fill::Constant { values } => {
            gaps.iter().for_each(|&j| row[j] = values[j]);
            Some(())
        }
        Fill::IterativePca { model: m } => fill_row_from_model(row, m),
        Fill::Knn {
            neighbours,
            reference,
        } => {
            let reference: Vec<Vec<f64>> = reference
                .iter()
                .map(|c| c.iter().map(|v| v.unwrap_or(f64::NAN)).collect())
                .collect();
            fill_row_from_reference(row, &reference, *neighbours)
        }
    }
}

/// The rows above a limit at any level, most severe first (the largest ratio
/// of a statistic to its lowest limit; ties in file order), each with its
/// largest contributions.
#[allow(clippy::too_many_arguments)]
fn flagged_list(
    diagnostics: &crate::stages::diagnose::Diagnostics,
    z: &Matrix,
    t: &Matrix,
    loadings: &Matrix,
    model: &Model,
    labels: &[String],
    lines: &[u64],
    t2: &[f64],
    spe: &[f64],
) -> Vec<BatchFlagged> {
    let lowest = |f: fn(&Limits) -> Option<f64>| {
        diagnostics
            .limits
            .iter()
            .filter_map(f)
            .filter(|v| v.is_finite() && *v > 0.0)
            .reduce(f64::min)
    };
    let (lt, ls) = (lowest(|l| l.t2), lowest(|l| l.spe));
    let ratio = |v: f64, l: Option<f64>| l.map_or(0.0, |l| v / l);
    let severity = |i: usize| ratio(t2[i], lt).max(ratio(spe[i], ls));
    let mut rows: Vec<usize> = (0..t2.len())
        .filter(|&i| diagnostics.flagged_at_any(t2[i], spe[i]))
        .collect();
    rows.sort_by(|&a, &b| severity(b).total_cmp(&severity(a)).then(a.cmp(&b)));
    rows.truncate(crate::outputs::report::MAX_FLAGGED_ROWS);
    let k = model.kept;
    rows.into_iter()
        .map(|i| {
            let parts = contributions(z.row(i), loadings, &t.row(i)[..k], &model.eigenvalues);
            let weight = |(a, b): &(f64, f64)| {
                (a.abs() / t2[i].max(f64::MIN_POSITIVE)).max(b / spe[i].max(f64::MIN_POSITIVE))
            };
            let mut order: Vec<usize> = (0..parts.len()).collect();
            order.sort_by(|&a, &b| {
                weight(&parts[b])
                    .total_cmp(&weight(&parts[a]))
                    .then(a.cmp(&b))
            });
            BatchFlagged {
                label: labels[i].clone(),
                line: lines[i],
                t2: t2[i],
                spe: spe[i],
                above: (0..diagnostics.limits.len())
                    .map(|l| {
                        let (a, b) = diagnostics.flags(t2[i], spe[i], l);
                        (diagnostics.limits[l].confidence, a, b)
                    })
                    .collect(),
                top: order
                    .iter()
                    .take(TOP_CONTRIBUTIONS)
                    .map(|&j| (model.features[j].name.clone(), parts[j].0, parts[j].1))
                    .collect(),
            }
        })
        .collect()
}
