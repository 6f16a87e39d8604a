//! The CSV result tables. Numbers are written as the shortest text that reads
//! back to the same f64 (`ryu`), so files are exact and identical on every machine.

use crate::linalg::Matrix;
use crate::stages::decompose::Decomposition;
use crate::stages::missing::MissingReport;
use crate::stages::scale::ScaleReport;
use crate::stages::select::Selection;

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

/// scores.csv: one line per analysed row.
pub fn scores_csv(labels: &RowLabels, scores: &Matrix) -> Vec<u8> {
    let mut out = CsvOut::new();
    let mut header = vec!["row".to_string()];
    header.extend(labels.id.iter().map(|(n, _)| n.to_string()));
    header.extend(labels.groups.iter().map(|(n, _)| n.to_string()));
    header.extend(component_names(scores.cols));
    out.row(&header);
    for (i, &row) in labels.rows.iter().enumerate() {
        let mut fields = vec![(row + 1).to_string()];
        fields.extend(labels.id.iter().map(|(_, v)| v[row].clone()));
        fields.extend(labels.groups.iter().map(|(_, v)| v[row].clone()));
        fields.extend(scores.row(i).iter().map(|&v| number(v)));
        out.row(&fields);
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

/// variance.csv: eigenvalue, shares and the evidence of the rule, per computed component.
pub fn variance_csv(d: &Decomposition, s: &Selection) -> Vec<u8> {
    let mut out = CsvOut::new();
    out.row([
        "component",
        "eigenvalue",
        "share",
        "cumulative_share",
        "broken_stick_share",
        "kept",
    ]);
    let mut cumulative = 0.0;
    for a in 0..s.computed {
        let share = d.eigenvalues[a] / d.total_variance;
        cumulative += share;
        out.row([
            format!("PC{}", a + 1),
            number(d.eigenvalues[a]),
            number(share),
            number(cumulative),
            number(s.broken_stick[a]),
            if a < s.kept { "yes" } else { "no" }.to_string(),
        ]);
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
