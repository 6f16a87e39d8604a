//! Builds the plain views that figures and the report are drawn from, and the
//! report's summary sentences and cautions.

use super::view::{FlaggedLine, PlotView, ReportView, Scores3d, ScreeEvidence, VarianceLine};
use crate::analysis::{Analysis, Prepared, Preprocessed};
use crate::analysis::{REPORT_FLAGGED_ROWS, UNUSUAL_3D};
use crate::recipe::raw::Keep;
use crate::stages::diagnose::contributions;
use crate::text::percent_figure as pct;
use rayon::prelude::*;
use std::sync::Arc;

/// Pearson correlation of two equally long columns.
fn correlation(a: &[f64], b: &[f64]) -> f64 {
    let n = a.len() as f64;
    let (ma, mb) = (a.iter().sum::<f64>() / n, b.iter().sum::<f64>() / n);
    let (mut sab, mut saa, mut sbb) = (0.0, 0.0, 0.0);
    for (x, y) in a.iter().zip(b) {
        sab += (x - ma) * (y - mb);
        saa += (x - ma) * (x - ma);
        sbb += (y - mb) * (y - mb);
    }
    if saa == 0.0 || sbb == 0.0 {
        0.0
    } else {
        sab / (saa * sbb).sqrt()
    }
}

/// Correlations of centred features with the components' scores, in closed form:
/// the covariance of feature j with scores a is λₐ vⱼₐ, so the correlation is
/// vⱼₐ √λₐ / sⱼ, with sⱼ the feature's standard deviation after scaling (the
/// usual correlation loadings). One sequential pass over the rows gives the sⱼ.
fn correlations_of_centred(
    squares: &[f64],
    n_rows: usize,
    d: &crate::stages::decompose::Decomposition,
    computed: usize,
) -> Vec<Vec<f64>> {
    let divisor = (n_rows - 1) as f64;
    (0..squares.len())
        .map(|j| {
            let sd = (squares[j] / divisor).sqrt();
            (0..computed)
                .map(|a| {
                    let l = d.eigenvalues[a];
                    if sd > 0.0 && l > 0.0 {
                        d.loadings.get(j, a) * l.sqrt() / sd
                    } else {
                        0.0
                    }
                })
                .collect()
        })
        .collect()
}

/// The view every plot is drawn from.
pub fn plot_view(prepared: &Prepared, pre: &Preprocessed, analysis: &Analysis) -> PlotView {
    let d = &analysis.decomposition;
    let s = &analysis.selection;
    let computed = s.computed;
    let (n, p) = (pre.scaled.n_rows(), pre.scaled.n_features());
    let loadings = (0..p)
        .map(|j| (0..computed).map(|a| d.loadings.get(j, a)).collect())
        .collect();
    let correlations = if prepared.plan.scaling.centers() {
        correlations_of_centred(&analysis.column_squares, n, d, computed)
    } else {
        // Uncentred data: the closed form does not hold; correlate directly (the
        // analysis holds uncentred data as one matrix, see `needs_matrix`).
        let z = pre.scaled.data();
        let mut score_columns: Vec<Vec<f64>> = vec![Vec::with_capacity(n); computed];
        analysis.rows.scan(|b| {
            for i in 0..b.len() {
                for (column, &t) in score_columns.iter_mut().zip(b.scores(i)) {
                    column.push(t);
                }
            }
        });
        (0..p)
            .into_par_iter()
            .map(|j| {
                let feature = z.column(j);
                score_columns
                    .iter()
                    .map(|t| correlation(&feature, t))
                    .collect()
            })
            .collect()
    };
    let diag = &analysis.diagnostics;
    let first = diag.limits.first();
    let plan = &prepared.plan;
    PlotView {
        features: pre.scaled.names.clone(),
        n_rows: n,
        eigenvalues: d.eigenvalues[..computed].to_vec(),
        total_variance: d.total_variance,
        p,
        kept: s.kept,
        computed,
        rule: s.rule.to_string(),
        rule_reason: s.reason.clone(),
        evidence: ScreeEvidence {
            broken_stick: s.broken_stick[..computed].to_vec(),
            mean_eigenvalue: s.mean_eigenvalue,
            variance_target: match plan.components.keep {
                Keep::Variance(v) => Some(v.0),
                _ => None,
            },
            parallel_thresholds: s
                .parallel_analysis
                .as_ref()
                .map(|pa| pa.thresholds[..computed].to_vec()),
            press: s.cross_validation.as_ref().map(|cv| cv.press.clone()),
        },
        loadings,
        correlations,
        rows: Arc::clone(&analysis.rows),
        confidence: first.map_or(0.95, |l| l.confidence),
        t2_limit: first.and_then(|l| l.t2),
        spe_limit: first.and_then(|l| l.spe),
        scaling: plan.scaling,
    }
}

/// The summary sentences of the report.
pub fn summary(prepared: &Prepared, pre: &Preprocessed, analysis: &Analysis) -> Vec<String> {
    let plan = &prepared.plan;
    let m = &pre.missing;
    let d = &analysis.decomposition;
    let s = &analysis.selection;
    let mut out = vec![format!(
        "The table {} has {} rows and {} columns; {} rows and {} features were analysed.",
        prepared.input.path,
        prepared.table.n_rows(),
        prepared.table.columns.len(),
        pre.scaled.n_rows(),
        pre.scaled.n_features()
    )];
    let dropped: Vec<String> = m
        .features
        .iter()
        .filter_map(|f| {
            f.dropped
                .as_ref()
                .map(|_| format!("{} ({} % missing)", f.feature, pct(f.share)))
        })
        .chain(
            pre.scaling
                .dropped_constant
                .iter()
                .map(|f| format!("{f} (constant)")),
        )
        .collect();
    if !dropped.is_empty() {
        out.push(format!("Dropped features: {}.", dropped.join(", ")));
    }
    out.push(missing_sentence(m));
    if !pre.transforms.is_empty() {
        let names: Vec<String> = pre
            .transforms
            .iter()
            .map(|t| format!("{} ({})", t.feature, t.transform_name()))
            .collect();
        out.push(format!("Transformed before scaling: {}.", names.join(", ")));
    }
    out.push(format!(
        "Scaling: {}, so the loadings are eigenvectors of the {} matrix.",
        plan.scaling.name(),
        crate::analysis::matrix_name(plan)
    ));
    let kept_share: f64 = d.eigenvalues[..s.kept].iter().sum::<f64>() / d.total_variance;
    out.push(format!(
        "{} kept by the rule `{}`, explaining {} % of the variance: {}.",
        match s.kept {
            1 => "1 component was".to_string(),
            k => format!("{k} components were"),
        },
        s.rule,
        pct(kept_share),
        s.reason
    ));
    for limit in &analysis.diagnostics.limits {
        out.push(limit_sentence(limit));
    }
    // Why a limit is missing, or how far to trust one.
    out.extend(analysis.diagnostics.notes.iter().map(|n| {
        let mut note = n.clone();
        if let Some(first) = note.get(..1) {
            note.replace_range(..1, &first.to_uppercase());
        }
        format!("{note}.")
    }));
    out
}

/// How many rows are above the limits at one level; a limit that does not
/// exist for the data is said to be missing, not counted as flagging nobody.
fn limit_sentence(limit: &crate::stages::diagnose::Limits) -> String {
    let level = super::tables::level_label(limit.confidence);
    match (limit.t2, limit.spe) {
        (Some(_), Some(_)) => format!(
            "At {level} % confidence, {} above the T² limit and {} above the SPE limit.",
            rows_are(limit.t2_flagged),
            limit.spe_flagged
        ),
        (Some(_), None) => format!(
            "At {level} % confidence, {} above the T² limit; there is no SPE limit.",
            rows_are(limit.t2_flagged)
        ),
        (None, Some(_)) => format!(
            "At {level} % confidence, there is no T² limit; {} above the SPE limit.",
            rows_are(limit.spe_flagged)
        ),
        (None, None) => format!("At {level} % confidence, there is no T² or SPE limit."),
    }
}

/// "1 row is" or "n rows are".
fn rows_are(n: usize) -> String {
    match n {
        1 => "1 row is".to_string(),
        _ => format!("{n} rows are"),
    }
}

/// What the missing stage did, in one sentence; a complete table says so.
fn missing_sentence(m: &crate::stages::missing::MissingReport) -> String {
    use crate::recipe::raw::MissingMethod;
    let how = match m.method {
        MissingMethod::DropRows if m.rows_dropped == 0 => {
            return "No row had a missing cell in the used features, so none was dropped.".into();
        }
        MissingMethod::DropRows => {
            return format!("{} rows with a missing cell were dropped.", m.rows_dropped);
        }
        MissingMethod::Mean => "with their feature's mean".to_string(),
        MissingMethod::Median => "with their feature's median".to_string(),
        MissingMethod::IterativePca => match &m.iterative_pca {
            Some(r) => format!(
                "by iterative PCA with {} component{} ({} refit{} of the model; {} a change of {} against the tolerance {})",
                r.components,
                if r.components == 1 { "" } else { "s" },
                r.iterations,
                if r.iterations == 1 { "" } else { "s" },
                if r.converged { "converged at" } else { "NOT converged, stopped at" },
                crate::text::readable(r.final_change),
                crate::text::readable(r.tolerance)
            ),
            None => "by iterative PCA".to_string(),
        },
        MissingMethod::Knn => match m.knn_neighbours {
            Some(1) => "by the nearest neighbour (k = 1): each with the value of the nearest row that observes it".to_string(),
            Some(k) => format!(
                "by k nearest neighbours (k = {k}): each with the mean of the {k} nearest rows that observe it"
            ),
            None => "from the nearest rows that observe them".to_string(),
        },
    };
    if m.cells_filled == 0 {
        return "The used features had no missing cells, so nothing was filled.".into();
    }
    format!(
        "{} missing cells were filled {how}; filling shrinks the variance, so small components deserve less trust.",
        m.cells_filled
    )
}

/// The cautions printed in every report.
pub fn cautions() -> Vec<String> {
    [
        "Scaling changes the answer: unscaled PCA follows the features with the largest numeric spread; unit variance weighs every feature equally, noisy ones included.",
        "Filling missing cells shrinks variances and weakens correlations; check how many cells were filled before reading small components.",
        "Components are directions of variance, not causes, and groups that look apart in a score plot are not shown to be distinct populations.",
        "A few extreme rows can create or rotate a component; look at the flagged rows and rerun without them to see what changes.",
        "The rules for the number of components often disagree; they are evidence, not proof.",
        "Decisions that affect people, health or compliance belong to qualified judgement and local rules, not to a component score.",
    ]
    .map(String::from)
    .to_vec()
}

/// Regularly spaced rows in the rotating view of a large table.
pub const POINTS_3D: usize = 5_000;

/// The rows the rotating view shows: all of a small table; of a large one, every
/// k-th row and up to [`UNUSUAL_3D`] of the most unusual flagged rows, in row order.
fn rows_for_3d(n: usize, diag: &crate::stages::diagnose::Diagnostics) -> Vec<usize> {
    if n <= POINTS_3D {
        return (0..n).collect();
    }
    let stride = n.div_ceil(POINTS_3D);
    let mut rows: Vec<usize> = (0..n).step_by(stride).collect();
    rows.extend(diag.most_unusual(UNUSUAL_3D));
    rows.sort_unstable();
    rows.dedup();
    rows
}

/// The first three scores, labels and first group of the `shown` rows (in
/// row order), read in one pass over the rows.
fn scores_3d(view: &PlotView, rows: &crate::row_results::RowResults, shown: &[usize]) -> Scores3d {
    let mut points = Vec::with_capacity(shown.len());
    let mut labels = Vec::with_capacity(shown.len());
    let mut group = Vec::new();
    let first_group = rows.groups.first().map(|_| 0);
    rows.scan(|b| {
        let from = shown.partition_point(|&i| i < b.first);
        let to = shown.partition_point(|&i| i < b.first + b.len());
        for &i in &shown[from..to] {
            let r = i - b.first;
            let t = b.scores(r);
            points.push([t[0], t[1], t[2]]);
            labels.push(b.label(r).into_owned());
            if let Some(g) = first_group {
                group.push(b.group(g, r).to_string());
            }
        }
    });
    Scores3d {
        axis_titles: [view.axis_title(0), view.axis_title(1), view.axis_title(2)],
        points,
        labels,
        group: rows.groups.first().map(|name| (name.clone(), group)),
    }
}

/// The report view; `figures` and `provenance` are filled by the caller.
pub fn report_view(
    prepared: &Prepared,
    pre: &Preprocessed,
    analysis: &Analysis,
    view: &PlotView,
) -> ReportView {
    let d = &analysis.decomposition;
    let s = &analysis.selection;
    let mut cumulative = 0.0;
    let variance = (0..s.computed)
        .map(|a| {
            let share = d.eigenvalues[a] / d.total_variance;
            cumulative += share;
            VarianceLine {
                component: a + 1,
                eigenvalue: d.eigenvalues[a],
                share,
                cumulative,
                kept: a < s.kept,
            }
        })
        .collect();
    let top_loadings = (0..s.kept)
        .map(|a| {
            let mut list: Vec<(String, f64)> = view
                .features
                .iter()
                .zip(&view.loadings)
                .map(|(f, l)| (f.clone(), l[a]))
                .collect();
            list.sort_by(|x, y| y.1.abs().total_cmp(&x.1.abs()).then_with(|| x.0.cmp(&y.0)));
            list.truncate(5);
            list
        })
        .collect();
    let diag = &analysis.diagnostics;
    let flagged = diag
        .most_unusual(REPORT_FLAGGED_ROWS)
        .into_iter()
        .map(|i| {
            let row = &analysis.details[&i];
            let (t2_above, spe_above) = if diag.limits.is_empty() {
                (false, false)
            } else {
                diag.flags(row.t2, row.spe, 0)
            };
            let parts = contributions(&row.z, &d.loadings, &row.scores, &d.eigenvalues);
            let weight = |(t2, spe): &(f64, f64)| {
                (t2.abs() / row.t2.max(f64::MIN_POSITIVE)).max(spe / row.spe.max(f64::MIN_POSITIVE))
            };
            let mut order: Vec<usize> = (0..parts.len()).collect();
            order.sort_by(|&a, &b| {
                weight(&parts[b])
                    .total_cmp(&weight(&parts[a]))
                    .then(a.cmp(&b))
            });
            FlaggedLine {
                label: row.label.clone(),
                t2: row.t2,
                spe: row.spe,
                t2_above,
                spe_above,
                top: order
                    .iter()
                    .take(3)
                    .map(|&j| (view.features[j].clone(), parts[j].0, parts[j].1))
                    .collect(),
            }
        })
        .collect();
    let n = analysis.rows.len();
    let shown = rows_for_3d(n, diag);
    let scores3d = (s.computed >= 3).then(|| scores_3d(view, &analysis.rows, &shown));
    let mut summary = summary(prepared, pre, analysis);
    let all_flagged = diag.flagged;
    if all_flagged > REPORT_FLAGGED_ROWS {
        summary.push(format!(
            "The flagged-rows table lists the {REPORT_FLAGGED_ROWS} most unusual of the {all_flagged} flagged rows; scores.csv flags them all."
        ));
    }
    if shown.len() < n {
        summary.push(format!(
            "The rotating view shows {} of the {} rows: every {}th row and the most unusual flagged rows.",
            shown.len(),
            n,
            n.div_ceil(POINTS_3D)
        ));
    }
    ReportView {
        title: prepared
            .plan
            .title
            .clone()
            .unwrap_or_else(|| format!("PCA of {}", prepared.input.path)),
        notes: prepared.plan.notes.clone(),
        summary,
        variance,
        top_loadings,
        confidence: view.confidence,
        flagged,
        figures: Vec::new(),
        scores3d,
        cautions: cautions(),
        provenance: Vec::new(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::linalg::Matrix;
    use crate::stages::decompose::{decompose, scores};

    #[test]
    fn closed_form_correlations_equal_pearson_correlations() {
        // A centred 6 × 3 table with correlated columns.
        let raw = [
            [1.0, 2.0, 0.5],
            [2.0, 3.5, 0.1],
            [3.0, 3.9, -0.4],
            [4.0, 6.1, 0.3],
            [5.0, 7.2, -1.0],
            [6.0, 9.0, 0.2],
        ];
        let columns: Vec<Vec<f64>> = (0..3)
            .map(|j| {
                let c: Vec<f64> = raw.iter().map(|r| r[j]).collect();
                let m = c.iter().sum::<f64>() / 6.0;
                c.iter().map(|v| v - m).collect()
            })
            .collect();
        let z = Matrix::from_columns(&columns);
        let d = decompose(&z, true, None).unwrap();
        let closed = correlations_of_centred(&crate::stages::scale::Squares::of(&z), z.rows, &d, 2);
        let t = scores(&z, &d.loadings, 2);
        for j in 0..3 {
            for a in 0..2 {
                let direct = correlation(&z.column(j), &t.column(a));
                assert!(
                    (closed[j][a] - direct).abs() < 1e-12,
                    "{j} {a}: {} vs {direct}",
                    closed[j][a]
                );
            }
        }
    }
}
