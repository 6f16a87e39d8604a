//! Reading one side of a comparison from its result tables: variance.csv,
//! loadings.csv and scores.csv, each row checked as sextant writes it (a
//! malformed table is an error naming the file and line, never a panic or a
//! silent NaN).

use super::Side;
use crate::error::{Error, InputError};
use crate::outputs::reading::{self, Links, Unopened};
use serde_json::Value;
use std::collections::{BTreeMap, BTreeSet};
use std::path::Path;

/// Reads one result table of a results folder: a regular file inside it.
pub(super) fn read_table_file(folder: &Path, name: &str) -> Result<Vec<u8>, Error> {
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
                "the header is not `feature,PC1,…,PCm` with m at least the {}",
                crate::text::count(kept, "kept component", "kept components")
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
    // `T2_above_95`, `SPE_above_99`, …: a row is flagged when any says yes.
    let flag_columns: Vec<usize> = (0..header.len())
        .filter(|&c| header[c].contains("_above_"))
        .collect();
    let mut scores = BTreeMap::new();
    let mut flagged = BTreeSet::new();
    for row in score_table.rows() {
        let values = pc_columns
            .iter()
            .map(|&c| score_table.number(row, c))
            .collect::<Result<Vec<f64>, Error>>()?;
        let key = row.1[key_column].clone();
        if flag_columns.iter().any(|&c| row.1[c] == "yes") {
            flagged.insert(key.clone());
        }
        scores.insert(key, values);
    }
    Ok(Side {
        label,
        manifest,
        variance,
        kept,
        features,
        loadings,
        scores,
        flagged,
        notes: Vec::new(),
        input_file: None,
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
