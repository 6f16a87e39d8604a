//! The tables that grow with the rows: scores.csv, imputed.csv and
//! contributions.csv, formatted in parallel blocks ([`super::BLOCK_ROWS`]) and
//! handed to a [`TableSink`] a stretch at a time, so that no such table is ever
//! whole in memory. The tests hold each to the serial writer it replaced.

use super::{
    CsvOut, Scratch, TableSink, above_text, component_names, header_and_rows_into, header_into,
    level_label, rows_into,
};
use crate::analysis::RowDetail;
use crate::recipe::plan::Transform;
use crate::row_results::{FilledCells, RowResults};
use crate::stages::diagnose::Diagnostics;
use crate::stages::transform::original_value;
use std::io;

/// Row labels by table row, for the serial writers in the tests.
#[cfg(test)]
pub struct RowLabels<'a> {
    /// 1-based data row number in the input table.
    pub rows: &'a [usize],
    pub id: Option<(&'a str, &'a [String])>,
    pub groups: Vec<(&'a str, &'a [String])>,
}

/// The label columns of a row: its number, then id and groups (the serial
/// writers in the tests build their lines from these).
#[cfg(test)]
fn label_fields(labels: &RowLabels, row: usize) -> Vec<String> {
    let mut fields = vec![(row + 1).to_string()];
    fields.extend(labels.id.iter().map(|(_, v)| v[row].clone()));
    fields.extend(labels.groups.iter().map(|(_, v)| v[row].clone()));
    fields
}

#[cfg(test)]
fn label_header(labels: &RowLabels) -> Vec<String> {
    let mut header = vec!["row".to_string()];
    header.extend(labels.id.iter().map(|(n, _)| n.to_string()));
    header.extend(labels.groups.iter().map(|(n, _)| n.to_string()));
    header
}

/// The label columns' names of result rows: row, then id and groups.
fn results_label_header(rows: &RowResults) -> Vec<String> {
    let mut header = vec!["row".to_string()];
    header.extend(rows.id.iter().cloned());
    header.extend(rows.groups.iter().cloned());
    header
}

/// scores.csv: one line per analysed row: labels, the `k` kept scores, T², SPE
/// and, per confidence level, whether each exceeds its limit.
pub fn scores_csv(rows: &RowResults, k: usize, diagnostics: &Diagnostics) -> io::Result<Vec<u8>> {
    let mut bytes = Vec::new();
    scores_csv_into(rows, k, diagnostics, &mut bytes)?;
    Ok(bytes)
}

/// The header of scores.csv: labels, PC1..PCk, T², SPE and a flag pair per level.
fn scores_header(rows: &RowResults, k: usize, diagnostics: &Diagnostics) -> Vec<String> {
    let mut header = results_label_header(rows);
    header.extend(component_names(k));
    header.extend(["T2".to_string(), "SPE".to_string()]);
    for l in &diagnostics.limits {
        let level = level_label(l.confidence);
        header.extend([format!("T2_above_{level}"), format!("SPE_above_{level}")]);
    }
    header
}

/// [`scores_csv`] handed to `sink` a stretch at a time, as the rows are read.
pub fn scores_csv_into(
    rows: &RowResults,
    k: usize,
    diagnostics: &Diagnostics,
    sink: &mut dyn TableSink,
) -> io::Result<()> {
    header_into(&scores_header(rows, k, diagnostics), sink);
    let groups = rows.groups.len();
    rows.each(|b| {
        let write_row = |out: &mut CsvOut, scratch: &mut Scratch, i: usize| {
            scratch.count(out, b.table_row(i) + 1);
            if let Some(id) = b.id(i) {
                out.field(id);
            }
            for g in 0..groups {
                out.field(b.group(g, i));
            }
            for &v in &b.scores(i)[..k] {
                scratch.number(out, v);
            }
            let (t2, spe) = (b.t2(i), b.spe(i));
            scratch.number(out, t2);
            scratch.number(out, spe);
            for l in &diagnostics.limits {
                out.field(above_text(l.t2, t2));
                out.field(above_text(l.spe, spe));
            }
        };
        rows_into(b.len(), write_row, sink);
    })
}

/// imputed.csv: every filled cell: the row's labels (from `rows`, whose rows
/// hold every row a cell was filled in), the feature, the value filled in, in
/// the feature's own units, then the value on the analysed (transformed)
/// scale and the transform (`none` when the feature has none; the two values
/// are then the same). Cells are filled on the transformed scale, so
/// `filled_value` undoes the transform. `transforms` is indexed like
/// `cells.features`.
pub fn imputed_csv(
    cells: &FilledCells,
    transforms: &[Option<Transform>],
    rows: &RowResults,
) -> io::Result<Vec<u8>> {
    let mut bytes = Vec::new();
    imputed_csv_into(cells, transforms, rows, &mut bytes)?;
    Ok(bytes)
}

/// The header's last columns in imputed.csv.
const IMPUTED_COLUMNS: [&str; 4] = ["feature", "filled_value", "transformed_value", "transform"];

/// [`imputed_csv`] handed to `sink` a stretch at a time, as the cells are read.
pub fn imputed_csv_into(
    cells: &FilledCells,
    transforms: &[Option<Transform>],
    rows: &RowResults,
    sink: &mut dyn TableSink,
) -> io::Result<()> {
    let mut header = results_label_header(rows);
    header.extend(IMPUTED_COLUMNS.map(String::from));
    header_into(&header, sink);
    let mut labels = rows.labels()?;
    let mut failed = None;
    let width = usize::from(rows.id.is_some()) + rows.groups.len();
    cells.each(|b| {
        if failed.is_some() {
            return;
        }
        // The labels of this run's cells, read ahead of the parallel formatting.
        let mut texts = Vec::with_capacity(b.len() * width);
        for i in 0..b.len() {
            match labels.of(b.table_row(i)) {
                Ok(t) => texts.extend_from_slice(t),
                Err(e) => {
                    failed = Some(e);
                    return;
                }
            }
        }
        let write_row = |out: &mut CsvOut, scratch: &mut Scratch, i: usize| {
            scratch.count(out, b.table_row(i) + 1);
            for text in &texts[i * width..(i + 1) * width] {
                out.field(text);
            }
            out.field(b.feature(i).as_bytes());
            let transform = transforms.get(b.feature_index(i)).copied().flatten();
            let v = b.value(i);
            scratch.number(out, transform.map_or(v, |t| original_value(t, v)));
            scratch.number(out, v);
            out.field(transform.map_or("none", Transform::name).as_bytes());
        };
        rows_into(b.len(), write_row, sink);
    })?;
    failed.map_or(Ok(()), Err)
}

/// contributions.csv: for each flagged row, each feature's contribution to its T²
/// and to its SPE (in scaled units; each sums over features to the row's value).
/// `rows` names the label columns; `flagged` holds the rows, in row order.
pub fn contributions_csv(
    rows: &RowResults,
    features: &[String],
    flagged: &[(&RowDetail, Vec<(f64, f64)>)],
) -> Vec<u8> {
    let mut bytes = Vec::new();
    contributions_csv_into(rows, features, flagged, &mut bytes);
    bytes
}

/// [`contributions_csv`] handed to `sink` a stretch at a time: a line per
/// flagged row and feature, formatted in parallel blocks like scores.csv.
pub fn contributions_csv_into(
    rows: &RowResults,
    features: &[String],
    flagged: &[(&RowDetail, Vec<(f64, f64)>)],
    sink: &mut dyn TableSink,
) {
    let mut header = results_label_header(rows);
    header.extend(["feature", "T2_contribution", "SPE_contribution"].map(String::from));
    let p = features.len().max(1);
    let write_row = |out: &mut CsvOut, scratch: &mut Scratch, line: usize| {
        let (row, parts) = &flagged[line / p];
        let j = line % p;
        scratch.count(out, row.table_row + 1);
        for text in &row.texts {
            out.field(text);
        }
        out.field(features[j].as_bytes());
        let (t2, spe) = parts[j];
        scratch.number(out, t2);
        scratch.number(out, spe);
    };
    header_and_rows_into(&header, flagged.len() * features.len(), write_row, sink);
}

#[cfg(test)]
mod tests {
    use super::super::BLOCK_ROWS;
    use super::*;
    use crate::linalg::Matrix;
    use crate::recipe::raw::SpeLimit;
    use crate::row_results::CellIn;
    use crate::stages::diagnose::{Limits, with_limits};
    use crate::stages::missing::FilledCell;
    use crate::text::number;

    /// The serial writer the parallel ones replaced, kept as their reference.
    fn scores_csv_serial(
        labels: &RowLabels,
        scores: &Matrix,
        (t2, spe): (&[f64], &[f64]),
        diagnostics: &Diagnostics,
    ) -> Vec<u8> {
        let mut out = CsvOut::new();
        let mut header = label_header(labels);
        header.extend(component_names(scores.cols));
        header.extend(["T2".to_string(), "SPE".to_string()]);
        for l in &diagnostics.limits {
            let level = level_label(l.confidence);
            header.extend([format!("T2_above_{level}"), format!("SPE_above_{level}")]);
        }
        out.row(header);
        for (i, &row) in labels.rows.iter().enumerate() {
            let mut fields = label_fields(labels, row);
            fields.extend(scores.row(i).iter().map(|&v| number(v)));
            fields.extend([number(t2[i]), number(spe[i])]);
            for l in &diagnostics.limits {
                fields
                    .extend([above_text(l.t2, t2[i]), above_text(l.spe, spe[i])].map(String::from));
            }
            out.row(&fields);
        }
        out.finish()
    }

    /// The rows' results for `labels`, with `extra` more scores per row than
    /// `scores` holds (which scores.csv leaves out): in memory, or through a
    /// store that spills at once, in runs of `run` rows.
    fn results(
        labels: &RowLabels,
        scores: &Matrix,
        (t2, spe): (&[f64], &[f64]),
        spill_in_runs: Option<(usize, &std::path::Path)>,
    ) -> RowResults {
        let cols = scores.cols + 1;
        let n = labels.rows.len();
        let joined: Vec<f64> = (0..n)
            .flat_map(|i| scores.row(i).iter().copied().chain([f64::NAN]))
            .collect();
        let texts = |v: &[String]| labels.rows.iter().map(|&r| v[r].clone()).collect();
        let id = labels.id.map(|(name, v)| (name.to_string(), texts(v)));
        let groups: Vec<(String, Vec<String>)> = labels
            .groups
            .iter()
            .map(|(name, v)| (name.to_string(), texts(v)))
            .collect();
        let Some((run, dir)) = spill_in_runs else {
            return RowResults::from_parts(cols, labels.rows, &joined, t2, spe, id, groups);
        };
        let names = groups.iter().map(|g| g.0.clone()).collect();
        let mut out = RowResults::new(cols, id.as_ref().map(|i| i.0.clone()), names, 0, dir);
        for first in (0..n).step_by(run.max(1)) {
            let last = n.min(first + run);
            out.push(crate::row_results::RowsIn {
                table_rows: &labels.rows[first..last],
                scores: &joined[first * cols..last * cols],
                t2: &t2[first..last],
                spe: &spe[first..last],
                texts: (first..last)
                    .flat_map(|i| {
                        id.iter()
                            .map(move |(_, v)| v[i].clone())
                            .chain(groups.iter().map(move |(_, v)| v[i].clone()))
                    })
                    .collect(),
            })
            .unwrap();
        }
        assert!(out.spilled());
        out
    }

    fn imputed_csv_serial(labels: &RowLabels, filled: &[FilledCell]) -> Vec<u8> {
        let mut out = CsvOut::new();
        let mut header = label_header(labels);
        header.extend(IMPUTED_COLUMNS.map(String::from));
        out.row(&header);
        for cell in filled {
            let mut fields = label_fields(labels, cell.row);
            let (original, name) = match &*cell.feature {
                "x" => (libm::exp(cell.value), "ln"),
                _ => (cell.value, "none"),
            };
            fields.extend([
                cell.feature.to_string(),
                number(original),
                number(cell.value),
                name.to_string(),
            ]);
            out.row(&fields);
        }
        out.finish()
    }

    /// Labels that need quoting (delimiter, quote, CR, LF, CRLF), an empty one,
    /// spaces and non-ASCII text, repeated over more than two blocks of rows.
    fn awkward(n: usize) -> (Vec<usize>, Vec<String>, Vec<String>) {
        let ids = [
            "plain",
            "a,b",
            "say \"hi\"",
            "two\nlines",
            "cr\rhere",
            "crlf\r\nend",
            "",
            " lead",
            "\"",
            ",",
            "Ölçüm;№7",
            "tab\there",
        ];
        let groups = ["g1", "g,2", "", "\"q\"\"q\"", "x\ny"];
        // Rows skip some table rows, as when rows are dropped.
        let rows: Vec<usize> = (0..n).map(|i| i + i / 50).collect();
        let size = rows.last().map_or(0, |r| r + 1);
        let id = (0..size)
            .map(|r| {
                format!(
                    "{}{}",
                    ids[r % ids.len()],
                    if r < ids.len() {
                        String::new()
                    } else {
                        r.to_string()
                    }
                )
            })
            .collect();
        let group = (0..size)
            .map(|r| groups[r % groups.len()].to_string())
            .collect();
        (rows, id, group)
    }

    /// Values with every kind of text ryu gives: integers, exponents, negative
    /// zero, the extremes, NaN and infinities.
    fn value(i: usize, j: usize) -> f64 {
        let special = [
            0.0,
            -0.0,
            1.0,
            -2.5,
            1e-7,
            1e22,
            123456789.0,
            f64::MIN_POSITIVE,
            5e-324,
            f64::MAX,
            f64::NAN,
            f64::INFINITY,
            f64::NEG_INFINITY,
            0.1 + 0.2,
        ];
        if (i + j).is_multiple_of(7) {
            special[(i / 7 + j) % special.len()]
        } else {
            ((i * 31 + j * 17) as f64).sin() * 10f64.powi((i % 9) as i32 - 4)
        }
    }

    fn on_threads<T: Send>(n: usize, f: impl FnOnce() -> T + Send) -> T {
        rayon::ThreadPoolBuilder::new()
            .num_threads(n)
            .build()
            .unwrap()
            .install(f)
    }

    #[test]
    fn scores_are_the_serial_writers_bytes_on_any_thread_count() {
        let n = 2 * BLOCK_ROWS + 37;
        let (rows, id, group) = awkward(n);
        let labels = RowLabels {
            rows: &rows,
            id: Some(("sample, \"id\"", &id)),
            groups: vec![("batch\nname", &group)],
        };
        let k = 10;
        let scores = Matrix {
            rows: n,
            cols: k,
            data: (0..n * k).map(|x| value(x / k, x % k)).collect(),
        };
        let limit = |confidence, t2, spe| Limits::uncounted(confidence, t2, t2, spe);
        let t2: Vec<f64> = (0..n).map(|i| value(i, 11).abs()).collect();
        let spe: Vec<f64> = (0..n).map(|i| value(i, 12).abs()).collect();
        let diagnostics = with_limits(
            vec![
                limit(0.95, Some(0.5), None),
                limit(0.99, Some(2.0), Some(0.01)),
            ],
            SpeLimit::default(),
            None,
            Vec::new(),
            0,
        );
        let reference = scores_csv_serial(&labels, &scores, (&t2, &spe), &diagnostics);
        // The reference itself must hold quoted labels and both flags, or the
        // comparison proves little.
        let text = String::from_utf8(reference.clone()).unwrap();
        assert!(text.starts_with("row,\"sample, \"\"id\"\"\",\"batch\nname\",PC1,"));
        for needle in [
            "\"a,b",
            "\"say \"\"hi\"\"\"",
            "\"crlf\r\nend",
            ",\"\"\"\",",
            ",yes,",
            ",no,",
            "NaN",
            "-inf",
            "5e-324",
        ] {
            assert!(text.contains(needle), "{needle:?} is not in the reference");
        }
        let whole = results(&labels, &scores, (&t2, &spe), None);
        let dir = tempfile::tempdir().unwrap();
        for threads in [1, 2, 8] {
            let got = on_threads(threads, || scores_csv(&whole, k, &diagnostics).unwrap());
            assert!(got == reference, "scores.csv differs on {threads} threads");
        }
        // Rows read back from a scratch file, in runs that cut the blocks anywhere.
        for run in [1, 999, BLOCK_ROWS + 1] {
            let spilled = results(
                &labels,
                &scores,
                (&t2, &spe),
                Some((run, &dir.path().join("out"))),
            );
            let got = scores_csv(&spilled, k, &diagnostics).unwrap();
            assert!(got == reference, "scores.csv differs in runs of {run}");
        }
        // Fewer rows than a block, and none at all.
        for m in [0, 1, 5] {
            let labels = RowLabels {
                rows: &rows[..m],
                id: labels.id,
                groups: labels.groups.clone(),
            };
            let scores = Matrix {
                rows: m,
                cols: k,
                data: scores.data[..m * k].to_vec(),
            };
            let parts = (&t2[..m], &spe[..m]);
            let reference = scores_csv_serial(&labels, &scores, parts, &diagnostics);
            let whole = results(&labels, &scores, parts, None);
            assert_eq!(
                on_threads(2, || scores_csv(&whole, k, &diagnostics).unwrap()),
                reference,
                "{m} rows"
            );
        }
    }

    #[test]
    fn imputed_cells_are_the_serial_writers_bytes_on_any_thread_count() {
        let n = BLOCK_ROWS + 5;
        let (rows, id, group) = awkward(n);
        let labels = RowLabels {
            rows: &rows,
            id: Some(("id", &id)),
            groups: vec![("g", &group), ("h", &id)],
        };
        let filled: Vec<FilledCell> = (0..3 * n)
            .map(|c| FilledCell {
                row: rows[c / 3],
                feature: ["x", "y,z", "\"w\""][c % 3].into(),
                value: value(c, 1),
            })
            .collect();
        let reference = imputed_csv_serial(&labels, &filled);
        assert!(
            String::from_utf8(reference.clone())
                .unwrap()
                .contains(",\"y,z\",")
        );
        let features: Vec<String> = ["\"w\"", "x", "y,z"].map(String::from).to_vec();
        let transforms = [None, Some(Transform::Ln), None];
        let no_scores = Matrix {
            rows: n,
            cols: 0,
            data: Vec::new(),
        };
        let zeros = vec![0.0; n];
        let rows_whole = results(&labels, &no_scores, (&zeros, &zeros), None);
        let whole = FilledCells::from_cells(&filled, &features);
        for threads in [1, 2, 8] {
            let got = on_threads(threads, || {
                imputed_csv(&whole, &transforms, &rows_whole).unwrap()
            });
            assert!(got == reference, "imputed.csv differs on {threads} threads");
        }
        assert_eq!(
            imputed_csv(
                &FilledCells::from_cells(&[], &features),
                &transforms,
                &rows_whole
            )
            .unwrap(),
            imputed_csv_serial(&labels, &[])
        );
        // Cells and rows read back from scratch files, in runs of 1,000 cells
        // and of 999 rows (so the labels come from another chunk now and then).
        let dir = tempfile::tempdir().unwrap();
        let rows_spilled = results(
            &labels,
            &no_scores,
            (&zeros, &zeros),
            Some((999, &dir.path().join("out"))),
        );
        let mut spilled = FilledCells::new(features.clone(), 0, &dir.path().join("out"));
        whole
            .each(|b| {
                for from in (0..b.len()).step_by(1000) {
                    let to = b.len().min(from + 1000);
                    let batch: Vec<CellIn> = (from..to)
                        .map(|i| CellIn {
                            table_row: b.table_row(i),
                            feature: features.iter().position(|f| f == b.feature(i)).unwrap(),
                            value: b.value(i),
                        })
                        .collect();
                    spilled.push(&batch).unwrap();
                }
            })
            .unwrap();
        assert_eq!(spilled.len(), 3 * n);
        assert!(imputed_csv(&spilled, &transforms, &rows_spilled).unwrap() == reference);
        // A cell of a row that is not among the rows is an error, not a guess.
        let stray = FilledCells::from_cells(
            &[FilledCell {
                row: 50,
                feature: "x".into(),
                value: 1.0,
            }],
            &features,
        );
        assert!(!rows.contains(&50), "table row 50 is skipped");
        assert!(imputed_csv(&stray, &transforms, &rows_whole).is_err());
    }

    /// The serial contributions writer the parallel one replaced.
    fn contributions_csv_serial(
        labels: &RowLabels,
        features: &[String],
        flagged: &[(usize, Vec<(f64, f64)>)],
    ) -> Vec<u8> {
        // (i: the row's index among the analysed rows)
        let mut out = CsvOut::new();
        let mut header = label_header(labels);
        header.extend(["feature", "T2_contribution", "SPE_contribution"].map(String::from));
        out.row(&header);
        for (i, parts) in flagged {
            let base = label_fields(labels, labels.rows[*i]);
            for (name, (t2, spe)) in features.iter().zip(parts) {
                let mut fields = base.clone();
                fields.extend([name.clone(), number(*t2), number(*spe)]);
                out.row(&fields);
            }
        }
        out.finish()
    }

    #[test]
    fn contributions_are_the_serial_writers_bytes_on_any_thread_count() {
        let n = 1200;
        let (rows, id, group) = awkward(n);
        let labels = RowLabels {
            rows: &rows,
            id: Some(("id", &id)),
            groups: vec![("g", &group)],
        };
        let features: Vec<String> = (0..47)
            .map(|j| ["x", "y,z", "\"w\"", "line\nbreak"][j % 4].to_string() + &j.to_string())
            .collect();
        // Every third row flagged, so the lines span several blocks.
        let flagged: Vec<(usize, Vec<(f64, f64)>)> = (0..n)
            .step_by(3)
            .map(|i| (i, (0..47).map(|j| (value(i, j), value(j, i))).collect()))
            .collect();
        assert!(flagged.len() * features.len() > 2 * BLOCK_ROWS);
        let reference = contributions_csv_serial(&labels, &features, &flagged);
        let no_scores = Matrix {
            rows: n,
            cols: 0,
            data: Vec::new(),
        };
        let zeros = vec![0.0; n];
        let whole = results(&labels, &no_scores, (&zeros, &zeros), None);
        let rows_flagged: Vec<usize> = flagged.iter().map(|(i, _)| *i).collect();
        let details = crate::analysis::row_details(&whole, 0, &rows_flagged).unwrap();
        let parts: Vec<(&RowDetail, Vec<(f64, f64)>)> = flagged
            .iter()
            .map(|(i, parts)| (&details[i], parts.clone()))
            .collect();
        for threads in [1, 2, 8] {
            let got = on_threads(threads, || contributions_csv(&whole, &features, &parts));
            assert!(
                got == reference,
                "contributions.csv differs on {threads} threads"
            );
        }
        assert_eq!(
            contributions_csv(&whole, &features, &[]),
            contributions_csv_serial(&labels, &features, &[])
        );
    }

    /// Times the serial and the parallel scores writer on 1,000,000 rows:
    /// `cargo test --release --lib outputs::tables::tests::time_scores -- --ignored --nocapture`
    #[test]
    #[ignore = "a measurement, not a check"]
    fn time_scores_on_a_million_rows() {
        let n = 1_000_000;
        let k = 10;
        let rows: Vec<usize> = (0..n).collect();
        let id: Vec<String> = (0..n).map(|i| format!("S{i:07}")).collect();
        let group: Vec<String> = (0..n)
            .map(|i| ["a", "b", "c, d"][i % 3].to_string())
            .collect();
        let labels = RowLabels {
            rows: &rows,
            id: Some(("id", &id)),
            groups: vec![("group", &group)],
        };
        let scores = Matrix {
            rows: n,
            cols: k,
            data: (0..n * k).map(|x| ((x as f64) * 0.7).sin() * 3.0).collect(),
        };
        let t2: Vec<f64> = (0..n)
            .map(|i| (i as f64 * 0.3).cos().abs() * 20.0)
            .collect();
        let spe: Vec<f64> = (0..n).map(|i| (i as f64 * 0.9).sin().abs()).collect();
        let diagnostics = with_limits(
            vec![Limits::uncounted(0.95, Some(12.0), None, Some(0.8))],
            SpeLimit::default(),
            None,
            Vec::new(),
            0,
        );
        let whole = results(&labels, &scores, (&t2, &spe), None);
        let time = |name: &str, f: &dyn Fn() -> Vec<u8>| {
            let mut best = f64::INFINITY;
            let mut bytes = Vec::new();
            for _ in 0..3 {
                let start = std::time::Instant::now();
                bytes = f();
                best = best.min(start.elapsed().as_secs_f64());
            }
            eprintln!("{name}: {best:.3} s (best of 3), {} bytes", bytes.len());
            bytes
        };
        let serial = time("serial", &|| {
            scores_csv_serial(&labels, &scores, (&t2, &spe), &diagnostics)
        });
        let one = time("blocks, 1 thread", &|| {
            on_threads(1, || scores_csv(&whole, k, &diagnostics).unwrap())
        });
        let all = time(
            &format!("blocks, {} threads", rayon::current_num_threads()),
            &|| scores_csv(&whole, k, &diagnostics).unwrap(),
        );
        assert!(serial == one && one == all);
    }
}
