//! The CSV result tables. Numbers are written as the shortest text that reads
//! back to the same f64 (`ryu`), so files are exact and identical on every machine.
//!
//! The long tables (`scores.csv`, `imputed.csv`, `contributions.csv`; in
//! `tables/long.rs`) are formatted in parallel: rows are cut into blocks of a fixed
//! [`BLOCK_ROWS`], each block is written by its own `csv` writer with the same
//! settings, and the blocks are joined in order. The writer keeps no state from
//! one record to the next that changes the bytes, so the file is identical to a
//! single serial writer's on any number of threads.

use crate::stages::decompose::Decomposition;
use crate::stages::missing::MissingReport;
use crate::stages::scale::ScaleReport;
use crate::stages::select::{Selection, bartlett_rest};
use crate::text::{number, number_in};
use rayon::prelude::*;
use std::fmt::Write as _;

mod long;
pub use long::{
    contributions_csv, contributions_csv_into, imputed_csv, imputed_csv_into, scores_csv,
    scores_csv_into,
};

/// Rows per block when a long table is formatted in parallel. Fixed, so where the
/// table is cut never depends on the number of threads (not that the bytes
/// could: each block is plain text joined in order).
pub const BLOCK_ROWS: usize = 8192;

/// Builds CSV bytes with the `csv` crate, which quotes names that need it.
struct CsvOut(csv::Writer<Vec<u8>>);

impl CsvOut {
    fn new() -> Self {
        CsvOut::into_buffer(Vec::new())
    }

    /// Writes after the bytes already in `buffer` (normally empty, kept for its capacity).
    fn into_buffer(buffer: Vec<u8>) -> Self {
        CsvOut(
            csv::WriterBuilder::new()
                .terminator(csv::Terminator::Any(b'\n'))
                .from_writer(buffer),
        )
    }

    fn row<I: IntoIterator<Item = S>, S: AsRef<[u8]>>(&mut self, fields: I) {
        self.0
            .write_record(fields)
            .expect("writing to memory cannot fail");
    }

    /// One field of the record being written; [`CsvOut::end`] closes the record.
    fn field(&mut self, field: impl AsRef<[u8]>) {
        self.0
            .write_field(field)
            .expect("writing to memory cannot fail");
    }

    fn end(&mut self) {
        self.0
            .write_record(None::<&[u8]>)
            .expect("writing to memory cannot fail");
    }

    fn finish(self) -> Vec<u8> {
        self.0.into_inner().expect("writing to memory cannot fail")
    }
}

/// Reusable buffers for the fields of one block of rows.
#[derive(Default)]
struct Scratch {
    float: ryu::Buffer,
    int: String,
}

impl Scratch {
    fn number(&mut self, out: &mut CsvOut, v: f64) {
        out.field(number_in(&mut self.float, v));
    }

    fn count(&mut self, out: &mut CsvOut, n: usize) {
        self.int.clear();
        write!(self.int, "{n}").expect("writing to a string cannot fail");
        out.field(&self.int);
    }
}

/// Where a table's bytes go: into memory, or on to a file a stretch at a time,
/// so that a large table is never whole in memory.
pub trait TableSink {
    fn put(&mut self, bytes: Vec<u8>);

    /// An empty buffer to format the next stretch into: one the sink has
    /// finished with, when it has one, so that a long table reuses a few
    /// buffers instead of asking the system for fresh memory for every stretch.
    fn spare(&mut self) -> Vec<u8> {
        Vec::new()
    }
}

impl TableSink for Vec<u8> {
    fn put(&mut self, bytes: Vec<u8>) {
        if self.is_empty() {
            *self = bytes;
        } else {
            self.extend_from_slice(&bytes);
        }
    }
}

/// Blocks formatted at the same time before they are handed on in order.
const BLOCKS_AT_ONCE: usize = 8;

/// The header line, then `n` rows written by `write_row`, formatted in blocks of
/// [`BLOCK_ROWS`] rows at the same time and handed to `sink` in order, a run of
/// blocks at a time.
fn header_and_rows_into<F>(header: &[String], n: usize, write_row: F, sink: &mut dyn TableSink)
where
    F: Fn(&mut CsvOut, &mut Scratch, usize) + Sync,
{
    header_into(header, sink);
    rows_into(n, write_row, sink);
}

fn header_into(header: &[String], sink: &mut dyn TableSink) {
    let mut head = CsvOut::new();
    head.row(header);
    sink.put(head.finish());
}

/// `n` rows written by `write_row`, in blocks as [`header_and_rows_into`] writes them.
fn rows_into<F>(n: usize, write_row: F, sink: &mut dyn TableSink)
where
    F: Fn(&mut CsvOut, &mut Scratch, usize) + Sync,
{
    let blocks = n.div_ceil(BLOCK_ROWS);
    for first in (0..blocks).step_by(BLOCKS_AT_ONCE) {
        let last = blocks.min(first + BLOCKS_AT_ONCE);
        let buffers: Vec<Vec<u8>> = (first..last).map(|_| sink.spare()).collect();
        let run: Vec<Vec<u8>> = (first..last)
            .into_par_iter()
            .zip(buffers)
            .map(|(b, buffer)| {
                let mut out = CsvOut::into_buffer(buffer);
                let mut scratch = Scratch::default();
                for i in b * BLOCK_ROWS..n.min((b + 1) * BLOCK_ROWS) {
                    write_row(&mut out, &mut scratch, i);
                    out.end();
                }
                out.finish()
            })
            .collect();
        for block in run {
            sink.put(block);
        }
    }
}

/// Component column names PC1..PCk.
pub fn component_names(k: usize) -> Vec<String> {
    (1..=k).map(|a| format!("PC{a}")).collect()
}

/// A confidence level as a column suffix: 0.95 → "95", 0.975 → "97.5".
pub fn level_label(confidence: f64) -> String {
    number(confidence * 100.0)
}

fn yes_no(flag: bool) -> String {
    yes_no_str(flag).to_string()
}

fn yes_no_str(flag: bool) -> &'static str {
    if flag { "yes" } else { "no" }
}

/// Whether `value` is above `limit`, for scores.csv: empty when the limit is
/// not defined for this data (for example Jackson–Mudholkar with h₀ ≤ 0),
/// since "no" would claim the row was checked and passed; the manifest's and
/// the report's notes say why the limit is missing.
fn above_text(limit: Option<f64>, value: f64) -> &'static str {
    limit.map_or("", |u| yes_no_str(value > u))
}

/// loadings.csv: one line per feature, one column per computed component.
pub fn loadings_csv(names: &[String], d: &Decomposition, computed: usize) -> Vec<u8> {
    let mut out = CsvOut::new();
    let mut header = vec!["feature".to_string()];
    header.extend(component_names(computed));
    out.row(&header);
    for (i, name) in names.iter().enumerate() {
        let mut fields = vec![name.clone()];
        fields.extend((0..computed).map(|a| number(d.loadings.get(i, a))));
        out.row(&fields);
    }
    out.finish()
}

/// variance.csv: per computed component, the eigenvalue, shares and the evidence
/// of the rules (broken stick always; Bartlett's test of the remaining
/// eigenvalues; parallel-analysis thresholds and PRESS when those rules ran).
pub fn variance_csv(d: &Decomposition, s: &Selection, n: usize) -> Vec<u8> {
    let mut out = CsvOut::new();
    let mut header: Vec<String> = [
        "component",
        "eigenvalue",
        "share",
        "cumulative_share",
        "broken_stick_share",
    ]
    .map(String::from)
    .to_vec();
    if s.parallel_analysis.is_some() {
        header.extend(["random_eigenvalue_mean", "random_eigenvalue_threshold"].map(String::from));
    }
    if s.cross_validation.is_some() {
        header.extend(["press", "press_standard_error"].map(String::from));
    }
    header.extend(
        [
            "bartlett_chi2_rest",
            "bartlett_df_rest",
            "bartlett_p_rest",
            "kept",
        ]
        .map(String::from),
    );
    out.row(&header);
    let mut cumulative = 0.0;
    for a in 0..s.computed {
        let share = d.eigenvalues[a] / d.total_variance;
        cumulative += share;
        let mut row = vec![
            format!("PC{}", a + 1),
            number(d.eigenvalues[a]),
            number(share),
            number(cumulative),
            number(s.broken_stick[a]),
        ];
        if let Some(pa) = &s.parallel_analysis {
            row.extend([number(pa.means[a]), number(pa.thresholds[a])]);
        }
        if let Some(cv) = &s.cross_validation {
            let cell = |v: &[f64]| v.get(a + 1).map_or(String::new(), |x| number(*x));
            row.extend([cell(&cv.press), cell(&cv.standard_error)]);
        }
        // Bartlett's test needs every eigenvalue (not known after the randomized method).
        let bartlett = d
            .has_every_eigenvalue()
            .then(|| bartlett_rest(&d.eigenvalues, d.rank, n, a + 1))
            .flatten();
        match bartlett {
            Some((chi2, df, p)) => row.extend([number(chi2), number(df), number(p)]),
            None => row.extend([String::new(), String::new(), String::new()]),
        }
        row.push(yes_no(a < s.kept));
        out.row(&row);
    }
    out.finish()
}

/// preprocessing.csv: per feature, what happened before the decomposition.
pub fn preprocessing_csv(
    features: &[String],
    transforms: &[Option<crate::recipe::plan::Transform>],
    missing: &MissingReport,
    scale: &ScaleReport,
) -> Vec<u8> {
    let mut out = CsvOut::new();
    out.row([
        "feature",
        "status",
        "missing",
        "missing_share",
        "filled",
        "fill_value",
        "transform",
        "mean",
        "sd",
        "centre",
        "scale",
    ]);
    for (name, transform) in features.iter().zip(transforms) {
        let m = missing
            .features
            .iter()
            .find(|m| &m.feature == name)
            .expect("every feature has a missing report");
        let s = scale.features.iter().find(|s| &s.feature == name);
        let status = match (&m.dropped, s) {
            (Some(why), _) => format!("dropped: {why}"),
            (None, None) => "dropped: constant".to_string(),
            (None, Some(_)) => "used".to_string(),
        };
        let opt = |v: Option<f64>| v.map(number).unwrap_or_default();
        out.row([
            name.clone(),
            status,
            m.missing.to_string(),
            number(m.share),
            m.filled.to_string(),
            opt(m.fill_value),
            transform.map(|t| t.name().to_string()).unwrap_or_default(),
            opt(s.map(|s| s.mean)),
            opt(s.map(|s| s.sd)),
            opt(s.map(|s| s.centre)),
            opt(s.map(|s| s.scale)),
        ]);
    }
    out.finish()
}
