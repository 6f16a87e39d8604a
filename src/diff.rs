//! `sextant diff`: what changed between two analyses, for a reviewer.
//!
//! Each side is a results folder or a recipe (run in memory, nothing written).
//! The report lists recipe settings that differ after defaults are resolved,
//! inputs whose hash changed, the number of kept components, eigenvalues and
//! shares side by side, the principal angles between the two kept-loading
//! subspaces (Björck & Golub 1973, "Numerical methods for computing angles
//! between linear subspaces", Math. Comp. 27:579–594; sines are used for small
//! angles, as in scipy.linalg.subspace_angles), the largest change in a score
//! after aligning signs, and the features whose loadings moved most.

use crate::error::{Error, InputError};
use crate::outputs::manifest::{RunInfo, render};
use crate::outputs::reading::{self, Links, Unopened};
use crate::run::{compute, prepare};
use crate::text::{percent as pct, trimmed};
use crate::verify::read_trusted_manifest;
use nalgebra::DMatrix;
use serde_json::Value;
use std::collections::BTreeMap;
use std::fmt::Write;
use std::path::Path;

/// One side of a comparison, read from the result tables.
#[derive(Debug, Clone)]
pub struct Side {
    pub label: String,
    /// The manifest without its `run` block.
    pub manifest: Value,
    /// (eigenvalue, share) per computed component.
    pub variance: Vec<(f64, f64)>,
    pub kept: usize,
    pub features: Vec<String>,
    /// `loadings[feature][component]` for the computed components.
    pub loadings: Vec<Vec<f64>>,
    /// Kept scores by row key (the id, or the row number).
    pub scores: BTreeMap<String, Vec<f64>>,
}

/// Loads a side from a results folder or, for a `.toml` path, by running the recipe.
///
/// A results folder's manifest must match its digest, and its tables must be
/// regular files of the folder that read as sextant wrote them: a malformed
/// one is an error naming the file and line (never a panic or a silent NaN).
pub fn load_side(path: &Path) -> Result<Side, Error> {
    let label = path.display().to_string();
    let recipe = path.is_file();
    let (manifest, files): (Value, BTreeMap<String, Vec<u8>>) = if recipe {
        let prepared = prepare(path)?;
        let (_, _, computed) = compute(&prepared)?;
        let run = RunInfo {
            started_utc: String::new(),
            seconds: 0.0,
            host: String::new(),
            threads: 0,
            platform: String::new(),
        };
        let (text, _) = render(&computed.body, &computed.outputs, &run);
        (
            serde_json::from_str(&text).expect("our own JSON"),
            computed.files.into_iter().collect(),
        )
    } else {
        let manifest = read_trusted_manifest(path)?;
        let mut files = BTreeMap::new();
        for name in ["variance.csv", "loadings.csv", "scores.csv"] {
            files.insert(name.to_string(), read_table_file(path, name)?);
        }
        (manifest, files)
    };
    let shown = |name: &str| {
        if recipe {
            format!("{name} computed from {label}")
        } else {
            path.join(name).display().to_string()
        }
    };
    side_from_tables(label.clone(), manifest, &files, &shown)
}

/// Reads one result table of a results folder: a regular file inside it.
fn read_table_file(folder: &Path, name: &str) -> Result<Vec<u8>, Error> {
    let path = folder.join(name);
    let shown = path.display().to_string();
    match reading::open_regular(&path, &crate::paths::resolve(folder), Links::Refuse) {
        Ok(mut file) => {
            let mut bytes = Vec::new();
            std::io::Read::read_to_end(&mut file, &mut bytes).map_err(|source| InputError::Io {
                path: shown,
                source,
            })?;
            Ok(bytes)
        }
        Err(Unopened::Missing) => Err(InputError::Io {
            path: shown,
            source: std::io::ErrorKind::NotFound.into(),
        }
        .into()),
        Err(Unopened::Refused(why)) => Err(InputError::NotResults {
            path: folder.display().to_string(),
            reason: format!("{name} is {why}"),
        }
        .into()),
    }
}

/// A side from its manifest and the bytes of variance.csv, loadings.csv and
/// scores.csv (`shown` names a table in messages). Checks every row it reads.
pub fn side_from_tables(
    label: String,
    mut manifest: Value,
    files: &BTreeMap<String, Vec<u8>>,
    shown: &dyn Fn(&str) -> String,
) -> Result<Side, Error> {
    if let Some(m) = manifest.as_object_mut() {
        m.remove("run");
    }
    let table = |name: &str| {
        let bytes = files.get(name).map_or(&[][..], Vec::as_slice);
        ResultTable::parse(shown(name), bytes)
    };
    let variance_table = table("variance.csv")?;
    let eigenvalue = variance_table.column("eigenvalue")?;
    let share = variance_table.column("share")?;
    let kept_column = variance_table.column("kept")?;
    let mut variance = Vec::new();
    let mut kept = 0;
    for row in variance_table.rows() {
        variance.push((
            variance_table.number(row, eigenvalue)?,
            variance_table.number(row, share)?,
        ));
        match row.1[kept_column].as_str() {
            "yes" => kept += 1,
            "no" => {}
            other => {
                return Err(
                    variance_table.bad(row.0, format!("`kept` is `{other}`, not yes or no"))
                );
            }
        }
    }
    if kept == 0 {
        return Err(variance_table.bad(1, "no component is marked as kept".into()));
    }

    let loading_table = table("loadings.csv")?;
    let header = &loading_table.header.1;
    let computed = header.len() - 1;
    if header[0] != "feature"
        || (1..=computed).any(|a| header[a] != format!("PC{a}"))
        || computed < kept
    {
        return Err(loading_table.bad(
            1,
            format!(
                "the header is not `feature,PC1,…,PCm` with m at least the {kept} kept component(s)"
            ),
        ));
    }
    let mut features = Vec::new();
    let mut loadings = Vec::new();
    for row in loading_table.rows() {
        let values = (1..=computed)
            .map(|c| loading_table.number(row, c))
            .collect::<Result<Vec<f64>, Error>>()?;
        if values.iter().any(|v| v.abs() > 1.0 + 1e-6) {
            return Err(loading_table.bad(
                row.0,
                "a loading is larger than 1 in size, which a loading of a unit-length component cannot be".into(),
            ));
        }
        features.push(row.1[0].clone());
        loadings.push(values);
    }
    if features.is_empty() {
        return Err(loading_table.bad(1, "there is no feature".into()));
    }

    let id = manifest
        .pointer("/recipe/resolved/input/id")
        .and_then(Value::as_str)
        .map(str::to_string);
    let score_table = table("scores.csv")?;
    let header = &score_table.header.1;
    let key_column = header
        .iter()
        .position(|h| Some(h) == id.as_ref())
        .unwrap_or(0);
    let pc_columns = (1..=kept)
        .map(|a| score_table.column(&format!("PC{a}")))
        .collect::<Result<Vec<usize>, Error>>()?;
    let mut scores = BTreeMap::new();
    for row in score_table.rows() {
        let values = pc_columns
            .iter()
            .map(|&c| score_table.number(row, c))
            .collect::<Result<Vec<f64>, Error>>()?;
        scores.insert(row.1[key_column].clone(), values);
    }
    Ok(Side {
        label,
        manifest,
        variance,
        kept,
        features,
        loadings,
        scores,
    })
}

/// A result table read for `diff`: its header and rows with their line
/// numbers, every row as wide as the header.
struct ResultTable {
    shown: String,
    header: (u64, Vec<String>),
    body: Vec<(u64, Vec<String>)>,
}

impl ResultTable {
    fn parse(shown: String, bytes: &[u8]) -> Result<ResultTable, Error> {
        let bad = |line: u64, problem: String| -> Error {
            InputError::BadResultsTable {
                path: shown.clone(),
                line,
                problem,
            }
            .into()
        };
        let mut reader = csv::ReaderBuilder::new()
            .has_headers(false)
            .from_reader(bytes);
        let mut rows = Vec::new();
        for record in reader.records() {
            let record = record.map_err(|e| {
                let line = e.position().map_or(1, |p| p.line());
                bad(line, format!("cannot be read as CSV ({e})"))
            })?;
            let line = record.position().map_or(0, |p| p.line());
            rows.push((line, record.iter().map(str::to_string).collect::<Vec<_>>()));
        }
        let mut rows = rows.into_iter();
        let header = rows
            .next()
            .filter(|h| h.1.len() >= 2)
            .ok_or_else(|| bad(1, "there is no header of at least two columns".into()))?;
        Ok(ResultTable {
            shown,
            header,
            body: rows.collect(),
        })
    }

    fn rows(&self) -> impl Iterator<Item = &(u64, Vec<String>)> {
        self.body.iter()
    }

    fn bad(&self, line: u64, problem: String) -> Error {
        InputError::BadResultsTable {
            path: self.shown.clone(),
            line,
            problem,
        }
        .into()
    }

    /// The index of the column named `name`.
    fn column(&self, name: &str) -> Result<usize, Error> {
        self.header
            .1
            .iter()
            .position(|h| h == name)
            .ok_or_else(|| self.bad(self.header.0, format!("there is no column `{name}`")))
    }

    /// The finite number in column `c` of `row`.
    fn number(&self, row: &(u64, Vec<String>), c: usize) -> Result<f64, Error> {
        let text = &row.1[c];
        match text.parse::<f64>() {
            Ok(v) if v.is_finite() => Ok(v),
            _ => Err(self.bad(
                row.0,
                format!(
                    "`{text}` in column `{}` is not a finite number",
                    self.header.1[c]
                ),
            )),
        }
    }
}

/// Flattens a JSON value into `a.b.c = value` pairs.
fn flatten(prefix: &str, v: &Value, out: &mut BTreeMap<String, String>) {
    match v {
        Value::Object(map) => {
            for (k, x) in map {
                let key = if prefix.is_empty() {
                    k.clone()
                } else {
                    format!("{prefix}.{k}")
                };
                flatten(&key, x, out);
            }
        }
        other => {
            out.insert(prefix.to_string(), other.to_string());
        }
    }
}

/// A component number with (eigenvalue, share) on each side, where it exists.
pub type VarianceRow = (usize, Option<(f64, f64)>, Option<(f64, f64)>);

/// The comparison of two sides.
#[derive(Debug, Clone)]
pub struct Comparison {
    /// (setting, before, after); "—" where a side lacks the setting.
    pub settings: Vec<(String, String, String)>,
    /// (input, before, after) for inputs whose hash or shape changed.
    pub inputs: Vec<(String, String, String)>,
    pub kept: (usize, usize),
    pub rules: (String, String),
    pub variance: Vec<VarianceRow>,
    /// Principal angles in degrees, largest first, on the common features.
    pub angles: Vec<f64>,
    pub common_features: usize,
    /// (row key, component, size) of the largest score change after sign alignment.
    pub largest_score_change: Option<(String, usize, f64)>,
    pub common_rows: usize,
    /// (feature, distance) for the features whose loadings moved most.
    pub moved: Vec<(String, f64)>,
}

/// Compares two sides.
pub fn compare(a: &Side, b: &Side) -> Comparison {
    let mut fa = BTreeMap::new();
    let mut fb = BTreeMap::new();
    flatten(
        "",
        a.manifest
            .pointer("/recipe/resolved")
            .unwrap_or(&Value::Null),
        &mut fa,
    );
    flatten(
        "",
        b.manifest
            .pointer("/recipe/resolved")
            .unwrap_or(&Value::Null),
        &mut fb,
    );
    let keys: std::collections::BTreeSet<&String> = fa.keys().chain(fb.keys()).collect();
    let dash = || "—".to_string();
    let settings = keys
        .into_iter()
        .filter(|k| fa.get(*k) != fb.get(*k))
        .map(|k| {
            (
                k.clone(),
                fa.get(k).cloned().unwrap_or_else(dash),
                fb.get(k).cloned().unwrap_or_else(dash),
            )
        })
        .collect();

    let input_list = |s: &Side| s.manifest["inputs"].as_array().cloned().unwrap_or_default();
    let (ia, ib) = (input_list(a), input_list(b));
    let describe = |v: Option<&Value>| match v {
        Some(v) => format!(
            "{} ({} rows × {} columns, sha256 {})",
            v["path"].as_str().unwrap_or("?"),
            v["rows"],
            v["columns"],
            v["sha256"]
                .as_str()
                .unwrap_or("?")
                .chars()
                .take(12)
                .collect::<String>()
        ),
        None => dash(),
    };
    let inputs = (0..ia.len().max(ib.len()))
        .filter(|&i| ia.get(i).map(|v| &v["sha256"]) != ib.get(i).map(|v| &v["sha256"]))
        .map(|i| {
            (
                format!("input {}", i + 1),
                describe(ia.get(i)),
                describe(ib.get(i)),
            )
        })
        .collect();

    let rule = |s: &Side| {
        s.manifest
            .pointer("/steps/components/rule")
            .and_then(Value::as_str)
            .unwrap_or("?")
            .to_string()
    };
    let variance = (0..a.variance.len().max(b.variance.len()))
        .map(|i| {
            (
                i + 1,
                a.variance.get(i).copied(),
                b.variance.get(i).copied(),
            )
        })
        .collect();

    // Loadings on the features both sides used, in A's order.
    let common: Vec<(usize, usize)> = a
        .features
        .iter()
        .enumerate()
        .filter_map(|(i, f)| b.features.iter().position(|g| g == f).map(|j| (i, j)))
        .collect();
    let basis = |s: &Side, rows: &[usize]| {
        DMatrix::from_fn(rows.len(), s.kept, |r, c| s.loadings[rows[r]][c])
    };
    let rows_a: Vec<usize> = common.iter().map(|c| c.0).collect();
    let rows_b: Vec<usize> = common.iter().map(|c| c.1).collect();
    let (la, lb) = (basis(a, &rows_a), basis(b, &rows_b));
    let angles = if common.is_empty() {
        Vec::new()
    } else {
        principal_angles(&la, &lb)
    };

    // Sign of each shared component: B's component flipped to point like A's.
    let shared = a.kept.min(b.kept);
    let signs: Vec<f64> = (0..shared)
        .map(|c| {
            let dot: f64 = (0..common.len()).map(|r| la[(r, c)] * lb[(r, c)]).sum();
            if dot < 0.0 { -1.0 } else { 1.0 }
        })
        .collect();
    let mut largest: Option<(String, usize, f64)> = None;
    let mut common_rows = 0;
    for (key, ta) in &a.scores {
        let Some(tb) = b.scores.get(key) else {
            continue;
        };
        common_rows += 1;
        for c in 0..shared {
            let d = (ta[c] - signs[c] * tb[c]).abs();
            if largest.as_ref().is_none_or(|l| d > l.2) {
                largest = Some((key.clone(), c + 1, d));
            }
        }
    }
    let mut moved: Vec<(String, f64)> = common
        .iter()
        .enumerate()
        .map(|(r, &(i, _))| {
            let d2: f64 = (0..shared)
                .map(|c| (la[(r, c)] - signs[c] * lb[(r, c)]).powi(2))
                .sum();
            (a.features[i].clone(), d2.sqrt())
        })
        .collect();
    moved.sort_by(|x, y| y.1.total_cmp(&x.1).then_with(|| x.0.cmp(&y.0)));
    moved.truncate(5);

    Comparison {
        settings,
        inputs,
        kept: (a.kept, b.kept),
        rules: (rule(a), rule(b)),
        variance,
        angles,
        common_features: common.len(),
        largest_score_change: largest,
        common_rows,
        moved,
    }
}

/// Principal angles (degrees, largest first) between the column spaces of `a` and `b`.
pub fn principal_angles(a: &DMatrix<f64>, b: &DMatrix<f64>) -> Vec<f64> {
    let qa = a.clone().qr().q();
    let qb = b.clone().qr().q();
    let m = qa.transpose() * &qb;
    let mut cosines = singular_values(&m);
    cosines.sort_by(|x, y| y.total_cmp(x));
    let residual = if qa.ncols() >= qb.ncols() {
        &qb - &qa * &m
    } else {
        &qa - &qb * m.transpose()
    };
    let mut sines = singular_values(&residual);
    sines.sort_by(|x, y| y.total_cmp(x));
    let count = qa.ncols().min(qb.ncols());
    (0..count)
        .map(|i| {
            // Largest angle first: pair the i-th largest sine with the i-th smallest cosine.
            let cos = cosines[count - 1 - i].clamp(-1.0, 1.0);
            let radians = if cos * cos >= 0.5 {
                libm::asin(sines.get(i).copied().unwrap_or(0.0).clamp(-1.0, 1.0))
            } else {
                libm::acos(cos)
            };
            radians.to_degrees()
        })
        .collect()
}

fn singular_values(m: &DMatrix<f64>) -> Vec<f64> {
    if m.nrows() == 0 || m.ncols() == 0 {
        return Vec::new();
    }
    m.clone()
        .svd(false, false)
        .singular_values
        .iter()
        .copied()
        .collect()
}

/// Output styles of `diff`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum DiffFormat {
    /// Aligned columns for a terminal.
    Text,
    /// A compact report to paste into a pull-request comment.
    Markdown,
}

/// Renders a comparison.
pub fn render_comparison(a: &Side, b: &Side, c: &Comparison, format: DiffFormat) -> String {
    let mut out = String::new();
    let md = format == DiffFormat::Markdown;
    let heading = |out: &mut String, title: &str| {
        if md {
            let _ = writeln!(out, "\n#### {title}\n");
        } else {
            let _ = writeln!(out, "\n{title}");
        }
    };
    if md {
        let _ = writeln!(
            out,
            "### sextant diff\n\n**A** `{}` → **B** `{}`",
            a.label, b.label
        );
    } else {
        let _ = writeln!(out, "A: {}\nB: {}", a.label, b.label);
    }

    heading(&mut out, "Recipe settings that differ (defaults resolved)");
    if c.settings.is_empty() {
        let _ = writeln!(out, "none");
    } else {
        let rows: Vec<Vec<String>> = c
            .settings
            .iter()
            .map(|(k, x, y)| vec![k.clone(), x.clone(), y.clone()])
            .collect();
        table(&mut out, md, &["setting", "A", "B"], &rows);
    }
    heading(&mut out, "Inputs whose content changed");
    if c.inputs.is_empty() {
        let _ = writeln!(out, "none: every input has the same SHA-256");
    } else {
        let rows: Vec<Vec<String>> = c
            .inputs
            .iter()
            .map(|(k, x, y)| vec![k.clone(), x.clone(), y.clone()])
            .collect();
        table(&mut out, md, &["input", "A", "B"], &rows);
    }

    heading(&mut out, "Components");
    let _ = writeln!(
        out,
        "kept: {} ({}) → {} ({})",
        c.kept.0, c.rules.0, c.kept.1, c.rules.1
    );
    if md {
        out.push('\n');
    }
    let cell = |v: Option<(f64, f64)>, share: bool| match v {
        Some((e, s)) => {
            if share {
                pct(s)
            } else {
                trimmed(e, 6)
            }
        }
        None => "—".to_string(),
    };
    let rows: Vec<Vec<String>> = c
        .variance
        .iter()
        .map(|(i, x, y)| {
            vec![
                format!("PC{i}"),
                cell(*x, false),
                cell(*y, false),
                cell(*x, true),
                cell(*y, true),
            ]
        })
        .collect();
    table(
        &mut out,
        md,
        &[
            "component",
            "eigenvalue A",
            "eigenvalue B",
            "share A",
            "share B",
        ],
        &rows,
    );

    heading(&mut out, "Kept-loading subspaces");
    let angles: Vec<String> = c.angles.iter().map(|a| format!("{a:.3}°")).collect();
    let _ = writeln!(
        out,
        "principal angles on the {} shared feature(s): {}",
        c.common_features,
        if angles.is_empty() {
            "none".into()
        } else {
            angles.join(", ")
        }
    );
    match &c.largest_score_change {
        Some((key, comp, d)) => {
            let _ = writeln!(
                out,
                "largest score change after sign alignment: {} on PC{comp} of row `{key}` ({} row(s) in both)",
                trimmed(*d, 6),
                c.common_rows
            );
        }
        None => {
            let _ = writeln!(out, "no row and component appear on both sides");
        }
    }
    if !c.moved.is_empty() {
        heading(
            &mut out,
            "Features whose loadings moved most (over the shared kept components)",
        );
        let rows: Vec<Vec<String>> = c
            .moved
            .iter()
            .map(|(f, d)| vec![f.clone(), trimmed(*d, 6)])
            .collect();
        table(&mut out, md, &["feature", "distance"], &rows);
    }
    out
}

fn table(out: &mut String, md: bool, header: &[&str], rows: &[Vec<String>]) {
    if md {
        let _ = writeln!(out, "| {} |", header.join(" | "));
        let _ = writeln!(out, "|{}", "---|".repeat(header.len()));
        for r in rows {
            let _ = writeln!(out, "| {} |", r.join(" | "));
        }
        return;
    }
    let mut widths: Vec<usize> = header.iter().map(|h| h.chars().count()).collect();
    for r in rows {
        for (w, c) in widths.iter_mut().zip(r) {
            *w = (*w).max(c.chars().count());
        }
    }
    let line = |cells: Vec<&str>| {
        cells
            .iter()
            .zip(&widths)
            .map(|(c, w)| format!("{c:<w$}"))
            .collect::<Vec<_>>()
            .join("  ")
            .trim_end()
            .to_string()
    };
    let _ = writeln!(out, "  {}", line(header.to_vec()));
    for r in rows {
        let _ = writeln!(out, "  {}", line(r.iter().map(String::as_str).collect()));
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(got: &[f64], want: &[f64], tol: f64) {
        assert_eq!(got.len(), want.len(), "{got:?} vs {want:?}");
        for (g, w) in got.iter().zip(want) {
            assert!((g - w).abs() <= tol, "{got:?} vs {want:?}");
        }
    }

    // Expected values from scipy 1.17.1 (numpy 2.4.6):
    //   import numpy as np; from scipy.linalg import subspace_angles
    //   A = np.array([[1., 0.], [0., 1.], [0., 0.], [0., 0.]])
    //   B = np.array([[0., 0.], [0., 0.], [1., 0.], [0., 1.]])
    //   np.degrees(subspace_angles(A, B))            # [90. 90.]
    //   C = np.array([[1., 2.], [.5, -1.], [.25, 0.], [2., 1.5], [-1., .5]])
    //   D = np.array([[1.1, 1.9, .3], [.4, -1.2, 1.], [.2, .1, 0.], [2.1, 1.4, -.5], [-.9, .6, .2]])
    //   np.degrees(subspace_angles(C, D))            # [4.14561418, 1.02762672]
    //   np.degrees(subspace_angles(C, C))            # [9.8e-15, 7.6e-16]
    //   E = np.array([[1.], [1e-9], [0.]]); F = np.array([[1.], [0.], [0.]])
    //   np.degrees(subspace_angles(E, F))            # [5.72957795e-08]
    #[test]
    fn principal_angles_match_scipy() {
        let a = DMatrix::from_row_slice(4, 2, &[1., 0., 0., 1., 0., 0., 0., 0.]);
        let b = DMatrix::from_row_slice(4, 2, &[0., 0., 0., 0., 1., 0., 0., 1.]);
        close(&principal_angles(&a, &b), &[90.0, 90.0], 1e-12);
        let c = DMatrix::from_row_slice(5, 2, &[1., 2., 0.5, -1., 0.25, 0., 2., 1.5, -1., 0.5]);
        let d = DMatrix::from_row_slice(
            5,
            3,
            &[
                1.1, 1.9, 0.3, 0.4, -1.2, 1.0, 0.2, 0.1, 0.0, 2.1, 1.4, -0.5, -0.9, 0.6, 0.2,
            ],
        );
        close(&principal_angles(&c, &d), &[4.14561418, 1.02762672], 1e-8);
        close(&principal_angles(&c, &c), &[0.0, 0.0], 1e-12);
        let e = DMatrix::from_row_slice(3, 1, &[1.0, 1e-9, 0.0]);
        let f = DMatrix::from_row_slice(3, 1, &[1.0, 0.0, 0.0]);
        close(&principal_angles(&e, &f), &[5.72957795e-08], 1e-15);
    }
}
