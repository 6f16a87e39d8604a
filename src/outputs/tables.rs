//! The CSV result tables. Numbers are written as the shortest text that reads
//! back to the same f64 (`ryu`), so files are exact and identical on every machine.

use crate::linalg::Matrix;
use crate::stages::decompose::Decomposition;
use crate::stages::diagnose::Diagnostics;
use crate::stages::missing::MissingReport;
use crate::stages::scale::ScaleReport;
use crate::stages::select::{Selection, bartlett_rest};

/// A number as the shortest round-trip text; negative zero is written as 0.
pub fn number(v: f64) -> String {
    if v == 0.0 {
        return "0".to_string();
    }
    let mut buffer = ryu::Buffer::new();
    let s = buffer.format(v);
    s.strip_suffix(".0").unwrap_or(s).to_string()
}

/// Builds CSV bytes with the `csv` crate, which quotes names that need it.
struct CsvOut(csv::Writer<Vec<u8>>);

impl CsvOut {
    fn new() -> Self {
        CsvOut(
            csv::WriterBuilder::new()
                .terminator(csv::Terminator::Any(b'\n'))
                .from_writer(Vec::new()),
        )
    }

    fn row<I: IntoIterator<Item = S>, S: AsRef<[u8]>>(&mut self, fields: I) {
        self.0
            .write_record(fields)
            .expect("writing to memory cannot fail");
    }

    fn finish(self) -> Vec<u8> {
        self.0.into_inner().expect("writing to memory cannot fail")
    }
}

/// Component column names PC1..PCk.
pub fn component_names(k: usize) -> Vec<String> {
    (1..=k).map(|a| format!("PC{a}")).collect()
}

/// Row labels carried into scores.csv.
pub struct RowLabels<'a> {
    /// 1-based data row number in the input table.
    pub rows: &'a [usize],
    pub id: Option<(&'a str, &'a [String])>,
    pub groups: Vec<(&'a str, &'a [String])>,
}

/// A confidence level as a column suffix: 0.95 → "95", 0.975 → "97.5".
pub fn level_label(confidence: f64) -> String {
    number(confidence * 100.0)
}

/// The label columns of a row: its number, then id and groups.
fn label_fields(labels: &RowLabels, row: usize) -> Vec<String> {
    let mut fields = vec![(row + 1).to_string()];
    fields.extend(labels.id.iter().map(|(_, v)| v[row].clone()));
    fields.extend(labels.groups.iter().map(|(_, v)| v[row].clone()));
    fields
}

fn label_header(labels: &RowLabels) -> Vec<String> {
    let mut header = vec!["row".to_string()];
    header.extend(labels.id.iter().map(|(n, _)| n.to_string()));
    header.extend(labels.groups.iter().map(|(n, _)| n.to_string()));
    header
}

fn yes_no(flag: bool) -> String {
    if flag { "yes" } else { "no" }.to_string()
}

/// scores.csv: one line per analysed row: labels, scores, T², SPE and, per
/// confidence level, whether each exceeds its limit.
pub fn scores_csv(labels: &RowLabels, scores: &Matrix, diagnostics: &Diagnostics) -> Vec<u8> {
    let mut out = CsvOut::new();
    let mut header = label_header(labels);
    header.extend(component_names(scores.cols));
    header.extend(["T2".to_string(), "SPE".to_string()]);
    for l in &diagnostics.limits {
        let level = level_label(l.confidence);
        header.extend([format!("T2_above_{level}"), format!("SPE_above_{level}")]);
    }
    out.row(&header);
    for (i, &row) in labels.rows.iter().enumerate() {
        let mut fields = label_fields(labels, row);
        fields.extend(scores.row(i).iter().map(|&v| number(v)));
        fields.extend([number(diagnostics.t2[i]), number(diagnostics.spe[i])]);
        for level in 0..diagnostics.limits.len() {
            let (t2, spe) = diagnostics.flags(i, level);
            fields.extend([yes_no(t2), yes_no(spe)]);
        }
        out.row(&fields);
    }
    out.finish()
}

/// imputed.csv: every filled cell: the row's labels, the feature and the value
/// filled in (on the transformed scale when the feature is transformed).
pub fn imputed_csv(labels: &RowLabels, filled: &[crate::stages::missing::FilledCell]) -> Vec<u8> {
    let mut out = CsvOut::new();
    let mut header = label_header(labels);
    header.extend(["feature", "filled_value"].map(String::from));
    out.row(&header);
    for cell in filled {
        let mut fields = label_fields(labels, cell.row);
        fields.extend([cell.feature.clone(), number(cell.value)]);
        out.row(&fields);
    }
    out.finish()
}

/// contributions.csv: for each flagged row, each feature's contribution to its T²
/// and to its SPE (in scaled units; each sums over features to the row's value).
pub fn contributions_csv(
    labels: &RowLabels,
    features: &[String],
    flagged: &[(usize, Vec<(f64, f64)>)],
) -> Vec<u8> {
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
        match bartlett_rest(&d.eigenvalues, d.rank, n, a + 1) {
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

#[cfg(test)]
mod tests {
    use super::number;

    #[test]
    fn numbers_round_trip_and_are_short() {
        assert_eq!(number(1.0), "1");
        assert_eq!(number(-0.0), "0");
        assert_eq!(number(0.1), "0.1");
        assert_eq!(number(1e-7), "1e-7");
        let v = 0.1 + 0.2;
        assert_eq!(number(v).parse::<f64>().unwrap(), v);
    }
}
