//! The analysis in passes over the [`Store`], for both engines: each pass reads
//! the rows in table order and feeds them, chunk by chunk, to the statistics
//! of the stages ([`crate::stages::accumulate`]), and takes the stages'
//! decisions through the stages' own functions (which feature is dropped, the
//! fill value, a constant feature, the errors). The methods that need the
//! whole matrix (median, kNN and iterative-PCA fills; the n × n and randomized
//! routes, parallel analysis, cross-validation, uncentred data) take a matrix
//! view of the store (`matrix_view`, [`scaled_rows`]); a model's fills are
//! written back into the store, so the later passes read them like any value.
//!
//! 1. transforms checked, missing cells counted, observed sums and ranges; then
//!    the transforms applied to the store once, in place;
//! 2. fill values; the scaling means and ranges of the filled values;
//! 3. the sums of squared deviations (standard deviations);
//! 4. the cross-products ZᵀZ in the same 1,024-row blocks, and Σ z² (or the
//!    scaled rows as one matrix, for the whole-matrix methods);
//! 5. scores, T² and SPE, row by row;
//! 6. the scaled values of the rows whose contributions are reported.

use crate::analysis::{Analysis, Prepared, Preprocessed, rows_needing_values};
use crate::error::Error;
use crate::linalg::crossprod::row_times;
use crate::recipe::plan::MethodPlan;
use crate::recipe::plan::Transform;
use crate::recipe::raw::MissingMethod;
use crate::recipe::raw::{DEFAULT_COMPUTE, Keep};
use crate::stages::accumulate::{PerFeature, Statistic, by_columns};
use crate::stages::crossval::cross_validate;
use crate::stages::decompose::{RowsSummary, SummaryMatrix, decompose_qr};
use crate::stages::decompose::{decompose_keeping, decompose_randomized};
use crate::stages::diagnose::{RowStatistics, residual_moments};
use crate::stages::missing::{
    FillModel, Filled, MissingReport, ModelSettings, Observed, ObservedReport, fill_by_model,
    keep_features, mean_fill, median_fill, too_few_rows,
};
use crate::stages::parallel::parallel_analysis;
use crate::stages::scale::{
    Deviations, FeatureScale, Moments, Scaled, Squares, check_squares, decide, scale_value,
};
use crate::stages::select::{Evidence, choose};
use crate::stages::transform::{Applied, domain_error, transform_value};
use crate::store::{Chunk, Store};
use rayon::prelude::*;

/// How each analysed feature is read from the store and brought to the scale
/// of the analysis.
#[derive(Debug, Clone)]
pub struct Features {
    names: Vec<String>,
    /// The store column of each feature (its values already transformed).
    column: Vec<usize>,
    /// The value a missing cell is filled with (`NaN` when rows are dropped).
    fill: Vec<f64>,
    centre: Vec<f64>,
    scale: Vec<f64>,
    drop_incomplete: bool,
}

impl Features {
    fn width(&self) -> usize {
        self.names.len()
    }

    /// A row of a chunk on the analysis scale (before centring): filled;
    /// `false` for a row dropped for a missing cell.
    fn filled_row(&self, chunk_row: &[f64], out: &mut [f64]) -> bool {
        for (j, o) in out.iter_mut().enumerate() {
            let v = chunk_row[self.column[j]];
            *o = if v.is_nan() {
                if self.drop_incomplete {
                    return false;
                }
                self.fill[j]
            } else {
                v
            };
        }
        true
    }

    /// The analysed rows of a chunk, row-major, filled (and scaled when
    /// `scaled`), into `values`, with each row's index in the chunk in `rows`.
    /// The buffers are reused from chunk to chunk.
    fn rows_of(
        &self,
        chunk: &Chunk,
        width: usize,
        scaled: bool,
        values: &mut Vec<f64>,
        rows: &mut Vec<usize>,
    ) {
        let q = self.width();
        values.resize(chunk.rows * q, 0.0);
        let kept: Vec<bool> = values
            .par_chunks_mut(q.max(1))
            .zip(chunk.values.par_chunks(width.max(1)))
            .map(|(out, row)| {
                let keep = self.filled_row(row, out);
                if keep && scaled {
                    self.scale_row(out);
                }
                keep
            })
            .collect();
        rows.clear();
        let mut at = 0;
        for (r, &k) in kept.iter().enumerate() {
            if k {
                if at != r {
                    values.copy_within(r * q..(r + 1) * q, at * q);
                }
                at += 1;
                rows.push(r);
            }
        }
        values.truncate(at * q);
    }

    fn scale_row(&self, row: &mut [f64]) {
        for (j, o) in row.iter_mut().enumerate() {
            *o = scale_value(*o, self.centre[j], self.scale[j]);
        }
    }
}

impl Features {
    /// The analysed features as the preprocessing passes left them.
    fn of(prepared: &Prepared, pre: &Preprocessed, numeric: &[usize]) -> Features {
        let plan = &prepared.plan;
        let drop_incomplete = plan.missing_method == MissingMethod::DropRows;
        let names = pre.scaled.names.clone();
        // By name, in O(p log p): wide tables have thousands of features.
        let in_plan: std::collections::BTreeMap<&str, usize> = (plan.features.iter())
            .enumerate()
            .map(|(j, f)| (f.as_str(), j))
            .collect();
        Features {
            column: store_columns(prepared, numeric, &names),
            fill: names
                .iter()
                .map(|n| {
                    pre.missing.features[in_plan[n.as_str()]]
                        .fill_value
                        .unwrap_or(f64::NAN)
                })
                .collect(),
            centre: pre.scaling.features.iter().map(|f| f.centre).collect(),
            scale: pre.scaling.features.iter().map(|f| f.scale).collect(),
            names,
            drop_incomplete,
        }
    }
}

/// The store column holding each of the named table columns.
fn store_columns(prepared: &Prepared, numeric: &[usize], names: &[String]) -> Vec<usize> {
    let by_table_column: std::collections::BTreeMap<usize, usize> =
        numeric.iter().enumerate().map(|(s, &t)| (t, s)).collect();
    let by_name: std::collections::BTreeMap<&str, usize> = (prepared.table.columns.iter())
        .enumerate()
        .map(|(t, c)| (c.name.as_str(), t))
        .collect();
    names
        .iter()
        .map(|name| {
            let t = by_name[name.as_str()];
            *by_table_column
                .get(&t)
                .expect("features are numeric columns")
        })
        .collect()
}

/// Per-feature state of pass 1: the missing stage's counts and observed sums,
/// and the first value outside the transform's domain (its line and value).
#[derive(Clone, Default)]
struct FirstPass {
    observed: Observed,
    bad: Option<(u64, f64)>,
}

/// Runs the missing, transform and scaling stages in passes 1–3.
pub fn preprocess(
    prepared: &Prepared,
    store: &mut Store,
    numeric: &[usize],
) -> Result<Preprocessed, Error> {
    let plan = &prepared.plan;
    assert!(
        !store.cells_filled,
        "a model's fills replaced the missing cells: a store is preprocessed once"
    );
    let table = &prepared.table;
    let source = table.display.clone();
    let n = table.n_rows();
    if n < 2 {
        return Err(too_few_rows(&source, n, 0));
    }
    let width = store.width();
    let all_columns = store_columns(prepared, numeric, &plan.features);

    // Pass 1.
    crate::progress::current().stage("pass 1 of 6: missing cells and observed sums");
    let t = std::time::Instant::now();
    let mut first = vec![FirstPass::default(); plan.features.len()];
    // The transforms still to apply (none when an earlier preprocessing of
    // this store applied them).
    let pending: Vec<Option<Transform>> = if store.transformed {
        vec![None; plan.features.len()]
    } else {
        plan.transforms.clone()
    };
    let mut offset = 0;
    store.pass(|chunk: &Chunk| -> Result<(), Error> {
        by_columns(&mut first, |from, part| {
            for r in 0..chunk.rows {
                let row = &chunk.values[r * width..(r + 1) * width];
                for (j, f) in (from..).zip(part.iter_mut()) {
                    let v = row[all_columns[j]];
                    // Missing cells first: most features have no transform, and
                    // this keeps the common path to one test and one add.
                    if v.is_nan() {
                        f.observed.add_missing();
                        continue;
                    }
                    let v = match pending[j] {
                        Some(t) => match transform_value(t, v) {
                            Some(out) => out,
                            None => {
                                f.bad.get_or_insert((chunk.lines[r], v));
                                continue;
                            }
                        },
                        None => v,
                    };
                    f.observed.add_observed(v);
                }
            }
        });
        offset += chunk.rows;
        Ok(())
    })?;
    // Transform errors in feature order, as the transform stage reports them.
    for (j, f) in first.iter().enumerate() {
        if let (Some((line, v)), Some(t)) = (f.bad, pending[j]) {
            return Err(domain_error(&source, line, &plan.features[j], v, t).into());
        }
    }
    // Every value is in its transform's domain: transform the store once, so
    // that the later passes read the values as they are.
    if pending.iter().any(Option::is_some) {
        let columns: Vec<(usize, Transform)> = all_columns
            .iter()
            .zip(&pending)
            .filter_map(|(&c, t)| t.map(|t| (c, t)))
            .collect();
        store.update(|chunk| {
            chunk.values.par_chunks_mut(width.max(1)).for_each(|row| {
                for &(c, t) in &columns {
                    if !row[c].is_nan() {
                        row[c] = transform_value(t, row[c]).expect("checked in pass 1");
                    }
                }
            })
        })?;
        store.transformed = true;
    }
    let transforms: Vec<Applied> = plan
        .features
        .iter()
        .zip(&plan.transforms)
        .filter_map(|(name, t)| {
            t.map(|transform| Applied {
                feature: name.clone(),
                transform,
            })
        })
        .collect();

    // The missing stage's decisions.
    let max_share = plan.max_feature_missing;
    let observed: Vec<ObservedReport> = first.iter().map(|f| f.observed.finish()).collect();
    let (mut reports, kept) = keep_features(&source, &plan.features, &observed, n, max_share)?;
    let method = plan.missing_method;
    let drop_incomplete = method == MissingMethod::DropRows;
    let kept_columns: Vec<usize> = kept.iter().map(|&j| all_columns[j]).collect();
    // The methods that need the whole table take a matrix view of the kept
    // features (transformed, `NaN` where missing).
    let (fill, by_model) = match method {
        MissingMethod::DropRows => (vec![f64::NAN; kept.len()], None),
        MissingMethod::Mean => (
            kept.iter().map(|&j| mean_fill(&observed[j])).collect(),
            None,
        ),
        MissingMethod::Median => (
            matrix_view(store, &kept_columns)?
                .iter()
                .map(|c| median_fill(c))
                .collect(),
            None,
        ),
        MissingMethod::Knn | MissingMethod::IterativePca => {
            let mut columns = matrix_view(store, &kept_columns)?;
            let gaps: Vec<Vec<bool>> = columns
                .iter()
                .map(|c| c.iter().map(|v| v.is_nan()).collect())
                .collect();
            let done = fill_by_model(&mut columns, &model_settings(plan))?;
            write_back(store, &kept_columns, &columns)?;
            store.cells_filled = true;
            (vec![f64::NAN; kept.len()], Some((done, columns, gaps)))
        }
    };
    let features = Features {
        names: kept.iter().map(|&j| plan.features[j].clone()).collect(),
        column: kept_columns,
        fill,
        centre: Vec::new(),
        scale: Vec::new(),
        drop_incomplete,
    };
    let q = features.width();

    let t = crate::timing::lap("  pass 1: counts and observed sums", t);
    // Pass 2: the analysed rows, the filled cells, sums and ranges.
    crate::progress::current().stage("pass 2 of 6: filled values");
    // Per feature: the sum, lowest and highest of the filled values.
    let mut filled_stats = PerFeature::new(vec![Moments::new(); q]);
    let mut filled = crate::row_results::FilledCells::new(
        plan.features.clone(),
        if store.spilled() { 0 } else { u64::MAX },
        &plan.output,
    );
    if let Some((_, columns, gaps)) = &by_model {
        // The filled cells, in row order (the store holds their values now).
        filled
            .push(&model_cells(&kept, columns, gaps))
            .map_err(|e| scratch_error(prepared, e))?;
    }
    let mut analysed = 0;
    let mut offset = 0;
    let (mut values, mut local) = (Vec::new(), Vec::new());
    store.pass(|chunk: &Chunk| -> Result<(), Error> {
        features.rows_of(chunk, width, false, &mut values, &mut local);
        // The sums by feature and the filled cells by blocks of rows, at the
        // same time; the blocks' cells are joined in row order.
        let (_, cells) = rayon::join(
            || filled_stats.push(&values),
            || {
                if drop_incomplete {
                    return Vec::new();
                }
                values
                    .par_chunks(4096 * q.max(1))
                    .zip(local.par_chunks(4096))
                    .map(|(block, block_rows)| {
                        let mut cells = Vec::new();
                        for (row, &r) in block.chunks_exact(q.max(1)).zip(block_rows) {
                            let raw = &chunk.values[r * width..(r + 1) * width];
                            for j in 0..q {
                                if raw[features.column[j]].is_nan() {
                                    cells.push(crate::row_results::CellIn {
                                        table_row: offset + r,
                                        // The plan's index of the feature.
                                        feature: kept[j],
                                        value: row[j],
                                    });
                                }
                            }
                        }
                        cells
                    })
                    .collect::<Vec<_>>()
            },
        );
        let cells: Vec<crate::row_results::CellIn> = cells.into_iter().flatten().collect();
        filled
            .push(&cells)
            .map_err(|e| scratch_error(prepared, e))?;
        analysed += local.len();
        offset += chunk.rows;
        Ok(())
    })?;
    let moments = filled_stats.finish();
    let rows_dropped = n - analysed;
    let mut warnings = Vec::new();
    for (k, &j) in kept.iter().enumerate() {
        let range = &observed[j].moments;
        let mut values = Filled::within(range.min, range.max);
        match &by_model {
            _ if drop_incomplete => continue,
            // Each filled cell's own value, in row order.
            Some((_, columns, gaps)) => {
                for (&v, &gap) in columns[k].iter().zip(&gaps[k]) {
                    if gap {
                        values.add(v);
                    }
                }
            }
            // Every missing cell of the feature took the one fill value.
            None => {
                let value = features.fill[k];
                for _ in 0..observed[j].missing {
                    values.add(value);
                }
                reports[j].fill_value = Some(value);
            }
        }
        reports[j].record_fill(&values.finish(), &mut warnings);
    }
    if analysed < 2 {
        return Err(too_few_rows(&source, analysed, rows_dropped));
    }
    let (fill_model, iterative_pca) = match by_model {
        Some((done, _, _)) => (done.model, done.iterative),
        None if drop_incomplete => (FillModel::DropRows, None),
        None => (FillModel::Constant(features.fill.clone()), None),
    };
    let missing = MissingReport {
        method,
        max_feature_missing: max_share,
        rows_in: n,
        rows_dropped,
        cells_filled: reports.iter().map(|r| r.filled).sum(),
        features: reports,
        iterative_pca,
        knn_neighbours: (method == MissingMethod::Knn).then_some(plan.knn.neighbours.0.get()),
        warnings,
    };

    let t = crate::timing::lap("  pass 2: filled sums and ranges", t);
    // Pass 3: squared deviations.
    crate::progress::current().stage("pass 3 of 6: spreads");
    let mut deviations =
        PerFeature::new(moments.iter().map(|m| Deviations::about(m.mean)).collect());
    store.pass(|chunk: &Chunk| -> Result<(), Error> {
        features.rows_of(chunk, width, false, &mut values, &mut local);
        deviations.push(&values);
        Ok(())
    })?;
    let sds = deviations.finish();

    crate::timing::lap("  pass 3: squared deviations", t);
    // The scaling stage's decisions, feature by feature.
    let method = plan.scaling;
    let stats = (0..q)
        .map(|j| FeatureScale::from_moments(&features.names[j], &moments[j], sds[j], method))
        .collect();
    let (scaling, keep_scaled) = decide(&source, stats, method, plan.constant_features)?;
    let mut pre = Preprocessed {
        scaled: Scaled {
            analysed,
            names: keep_scaled
                .iter()
                .map(|&j| features.names[j].clone())
                .collect(),
            matrix: None,
        },
        filled,
        fill_model,
        missing,
        transforms,
        scaling,
    };
    if needs_matrix(plan, analysed, keep_scaled.len()) {
        let z = scaled_rows(prepared, &pre, store, numeric)?;
        let squares = Squares::of(&z);
        check_squares(&source, &pre.scaling, &squares)?;
        pre.scaled.matrix = Some(z);
    }
    Ok(pre)
}

/// Whether the analysis needs the scaled rows as one matrix: for the n × n
/// route (fewer rows than features), and for what the recipe rules out of
/// passes ([`super::matrix_reason`]: uncentred data, the randomized method,
/// parallel analysis, cross-validation). Otherwise passes over the store give
/// everything.
fn needs_matrix(plan: &crate::recipe::plan::Plan, n: usize, p: usize) -> bool {
    let method = plan.method.kind();
    n < p || super::matrix_reason(plan.scaling, method, Some(&plan.components.keep)).is_some()
}

/// A matrix view of the store: the values of `columns`, one vector per
/// column, every row in order.
fn matrix_view(store: &Store, columns: &[usize]) -> Result<Vec<Vec<f64>>, Error> {
    let width = store.width();
    let mut out: Vec<Vec<f64>> = vec![Vec::with_capacity(store.rows()); columns.len()];
    store.pass(|chunk: &Chunk| -> Result<(), Error> {
        for row in chunk.values.chunks_exact(width.max(1)) {
            for (column, &c) in out.iter_mut().zip(columns) {
                column.push(row[c]);
            }
        }
        Ok(())
    })?;
    Ok(out)
}

/// Writes the filled `values` (one vector per column, every row) back into
/// the store's `columns`.
fn write_back(store: &mut Store, columns: &[usize], values: &[Vec<f64>]) -> Result<(), Error> {
    let width = store.width();
    let mut first = 0;
    store.update(|chunk| {
        for (r, row) in chunk.values.chunks_exact_mut(width.max(1)).enumerate() {
            for (&c, column) in columns.iter().zip(values) {
                row[c] = column[first + r];
            }
        }
        first += chunk.rows;
    })?;
    Ok(())
}

/// The cells filled by a model, in row order (features in order within a row).
fn model_cells(
    kept: &[usize],
    columns: &[Vec<f64>],
    gaps: &[Vec<bool>],
) -> Vec<crate::row_results::CellIn> {
    let n = columns.first().map_or(0, Vec::len);
    let mut cells = Vec::new();
    for i in 0..n {
        for (k, &j) in kept.iter().enumerate() {
            if gaps[k][i] {
                cells.push(crate::row_results::CellIn {
                    table_row: i,
                    feature: j,
                    value: columns[k][i],
                });
            }
        }
    }
    cells
}

fn model_settings(plan: &crate::recipe::plan::Plan) -> ModelSettings {
    ModelSettings {
        method: plan.missing_method,
        iterative: plan.iterative_pca.clone(),
        knn: plan.knn.clone(),
        components: plan.imputation_components,
        scaling: plan.scaling,
    }
}

/// The scaled values of every analysed row, rows × features: the matrix view
/// the whole-matrix methods take.
pub fn scaled_rows(
    prepared: &Prepared,
    pre: &Preprocessed,
    store: &Store,
    numeric: &[usize],
) -> Result<crate::linalg::Matrix, Error> {
    let features = Features::of(prepared, pre, numeric);
    let (width, p) = (store.width(), features.width());
    let mut data = Vec::with_capacity(pre.scaled.n_rows() * p);
    let (mut z, mut local) = (Vec::new(), Vec::new());
    store.pass(|chunk: &Chunk| -> Result<(), Error> {
        features.rows_of(chunk, width, true, &mut z, &mut local);
        data.extend_from_slice(&z);
        Ok(())
    })?;
    Ok(crate::linalg::Matrix {
        rows: data.len() / p.max(1),
        cols: p,
        data,
    })
}

/// Passes 4–6: the decomposition, the choice of k, scores and diagnostics.
pub fn analyse(
    prepared: &Prepared,
    pre: &Preprocessed,
    store: &mut Store,
    numeric: &[usize],
) -> Result<Analysis, Error> {
    let plan = &prepared.plan;
    assert!(
        !store.texts_taken,
        "pass 5 moves the labels to the results: a store is analysed once"
    );
    let features = &Features::of(prepared, pre, numeric);
    let width = store.width();
    let (n, p) = (pre.scaled.n_rows(), pre.scaled.n_features());
    let centred = plan.scaling.centers();

    let t = std::time::Instant::now();
    let want = crate::analysis::loadings_wanted(plan);
    let source = &prepared.table.display;
    let mut evidence = Evidence::default();
    let mut randomized = None;
    let (mut decomposition, summary, squares) = match &pre.scaled.matrix {
        Some(z) => {
            let decomposition = match &plan.method {
                MethodPlan::Exact => decompose_keeping(z, centred, None, want)?,
                MethodPlan::Qr => decompose_qr(z, centred)?,
                MethodPlan::Randomized(settings) => {
                    let (d, report) = decompose_randomized(z, centred, want, settings)?;
                    randomized = Some(report);
                    d
                }
            };
            decomposition.check_variance(source)?;
            evidence = whole_matrix_evidence(plan, z, centred, decomposition.rank)?;
            (decomposition, None, Squares::of(z))
        }
        None => {
            // Pass 4.
            crate::progress::current().stage("pass 4 of 6: cross-products");
            let accurate = plan.method == MethodPlan::Qr;
            let (summary, squares) = summarise_rows(features, store, p, accurate)?;
            check_squares(source, &pre.scaling, &squares)?;
            let decomposition = summary.decompose(&squares, n, centred, want)?;
            decomposition.check_variance(source)?;
            (decomposition, Some(summary), squares)
        }
    };
    let t = crate::timing::lap("  cross-products and eigendecomposition", t);
    // Loadings beyond those computed, when the rule keeps more: by the same
    // route (the randomized method computes no more than it was asked for).
    let more = |want: usize| match (&summary, &pre.scaled.matrix) {
        (Some(summary), _) => summary.decompose(&squares, n, centred, want),
        (None, Some(z)) => decompose_keeping(z, centred, None, want),
        (None, None) => unreachable!("one of the two routes ran"),
    };
    let selection = choose(
        &mut decomposition,
        p,
        &plan.components,
        evidence,
        randomized.is_none().then_some(more),
        |e| crate::analysis::keep_error(prepared, pre, e.keep, e.available),
    )?;
    assert!(selection.computed <= decomposition.loadings.cols);
    let (kept, computed) = (selection.kept, selection.computed);
    let loadings = &decomposition.loadings;

    // Pass 5.
    crate::progress::current().stage("pass 5 of 6: scores, T² and SPE");
    let v_kept = loadings.columns(0, kept).data;
    let v_more = loadings.columns(kept, computed).data;
    let statistics = RowStatistics::new(loadings, kept, &decomposition.eigenvalues);
    let moments = residual_moments(
        &decomposition,
        kept,
        randomized.as_ref().zip(pre.scaled.matrix.as_ref()),
    );
    let mut diagnostics = crate::analysis::diagnostics_for(plan, n, kept, moments);
    let mut results = results_for(prepared, computed, store.spilled());
    let labels = label_texts(prepared);
    let texts = store.text_width();
    // Per row of the results: its table row, scores (kept, then the others),
    // T² and SPE, computed straight into the layout the results keep.
    let w = crate::row_results::RowResults::row_width(computed);
    let mut first = 0;
    let mut offset = 0;
    let (mut z, mut local) = (Vec::new(), Vec::new());
    // The chunks' texts move on to the results (nothing reads them after this
    // pass): the labels are never copied.
    store.pass_taking(|chunk: &mut Chunk| -> Result<(), Error> {
        features.rows_of(chunk, width, true, &mut z, &mut local);
        let m = z.len() / p;
        let mut laid = vec![0.0; m * w];
        // Rows are independent: blocks of them in parallel, each row's numbers
        // written in place (the per-row arithmetic of `decompose::scores` and
        // `diagnose::row_statistics`, which `apply` uses).
        const ROWS: usize = 256;
        let jobs: Vec<_> = z
            .chunks(ROWS * p)
            .zip(laid.chunks_mut(ROWS * w))
            .zip(local.chunks(ROWS))
            .collect();
        jobs.into_par_iter().for_each(|((zb, lb), rows)| {
            let mut fitted = vec![0.0; p];
            for ((zr, out), &r) in zb.chunks_exact(p).zip(lb.chunks_exact_mut(w)).zip(rows) {
                let (head, tail) = out.split_at_mut(1 + computed);
                head[0] = (offset + r) as f64;
                let (tr, mr) = head[1..].split_at_mut(kept);
                row_times(zr, &v_kept, tr);
                row_times(zr, &v_more, mr);
                (tail[0], tail[1]) = statistics.of_row(zr, tr, &mut fitted);
            }
        });
        for (i, row) in laid.chunks_exact(w).enumerate() {
            diagnostics.count_row(first + i, row[w - 2], row[w - 1]);
        }
        let mut own = std::mem::take(&mut chunk.texts);
        let mut row_texts = Vec::with_capacity(local.len() * labels.len());
        for &r in &local {
            for &t in &labels {
                row_texts.push(std::mem::take(&mut own[r * texts + t]));
            }
        }
        results
            .push_rows(laid, row_texts)
            .map_err(|e| scratch_error(prepared, e))?;
        first += m;
        offset += chunk.rows;
        Ok(())
    })?;
    store.texts_taken = true;
    diagnostics.finish();
    let t = crate::timing::lap("  pass 5: scores, T² and SPE", t);

    // Pass 6: only the wanted rows are brought to the analysis scale.
    crate::progress::current().stage("pass 6 of 6: rows for contributions");
    // The wanted rows' details from the results (one reading of them), then
    // their scaled values from the store, found by table row.
    let mut details =
        crate::analysis::row_details(&results, kept, &rows_needing_values(&diagnostics, plan))?;
    let wanted: std::collections::BTreeMap<usize, usize> =
        details.iter().map(|(&i, row)| (row.table_row, i)).collect();
    if !wanted.is_empty() {
        let mut first = 0;
        store.pass(|chunk: &Chunk| -> Result<(), Error> {
            for (&t, i) in wanted.range(first..first + chunk.rows) {
                let raw = &chunk.values[(t - first) * width..(t - first + 1) * width];
                let mut out = vec![0.0; p];
                let complete = features.filled_row(raw, &mut out);
                debug_assert!(complete, "an analysed row is complete");
                features.scale_row(&mut out);
                details.get_mut(i).expect("listed above").z = out;
            }
            first += chunk.rows;
            Ok(())
        })?;
    }
    crate::timing::lap("  pass 6: rows for contributions", t);
    Ok(Analysis {
        decomposition,
        selection,
        diagnostics,
        column_squares: squares,
        rows: std::sync::Arc::new(results),
        details,
        randomized,
    })
}

/// Pass 4: the summary of the scaled rows the decomposition needs (the
/// cross-products ZᵀZ in 1,024-row blocks, or R of the QR route when
/// `accurate`), and each feature's Σ z².
fn summarise_rows(
    features: &Features,
    store: &Store,
    p: usize,
    accurate: bool,
) -> Result<(SummaryMatrix, Vec<f64>), Error> {
    let width = store.width();
    let mut summary = RowsSummary::new(accurate, p);
    let mut squares = Squares::new(p);
    let (mut z, mut local) = (Vec::new(), Vec::new());
    store.pass(|chunk: &Chunk| -> Result<(), Error> {
        features.rows_of(chunk, width, true, &mut z, &mut local);
        let z = &z;
        let ((), ()) = rayon::join(|| summary.add_rows(z), || squares.push(z));
        Ok(())
    })?;
    Ok((summary.finish(), squares.finish()))
}

/// The evidence of the rules that refit the model on the whole matrix:
/// parallel analysis and cross-validation.
fn whole_matrix_evidence(
    plan: &crate::recipe::plan::Plan,
    z: &crate::linalg::Matrix,
    centred: bool,
    rank: usize,
) -> Result<Evidence, Error> {
    let components = &plan.components;
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
            let max_k = components.compute.unwrap_or(DEFAULT_COMPUTE).min(rank);
            evidence.cross_validation = Some(cross_validate(
                z,
                centred,
                max_k,
                &components.cross_validation,
            )?);
        }
        _ => {}
    }
    Ok(evidence)
}

/// Where the rows' results go: in memory, or all to a scratch file beside the
/// results folder when the table's values did not fit the budget.
fn results_for(
    prepared: &Prepared,
    computed: usize,
    spill: bool,
) -> crate::row_results::RowResults {
    let plan = &prepared.plan;
    crate::row_results::RowResults::new(
        computed,
        plan.input.id.clone(),
        plan.input.groups.clone(),
        if spill { 0 } else { u64::MAX },
        &plan.output,
    )
}

/// Where the store keeps the texts of the id column (if any) and of the group
/// columns, in that order.
fn label_texts(prepared: &Prepared) -> Vec<usize> {
    let plan = &prepared.plan;
    let data = prepared.stored();
    plan.input
        .id
        .iter()
        .chain(&plan.input.groups)
        .map(|name| {
            data.text_index(&prepared.table, name)
                .expect("id and group columns are read as text")
        })
        .collect()
}

fn scratch_error(prepared: &Prepared, e: std::io::Error) -> Error {
    crate::error::OutputError::io(&crate::analysis::scratch_dir(&prepared.plan), e).into()
}
