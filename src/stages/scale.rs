//! Centring and scaling, feature by feature.
//!
//! Definitions (van den Berg et al. 2006, "Centering, scaling, and transformations",
//! BMC Genomics 7:142): unit variance divides by the standard deviation, Pareto by
//! its square root, range by max − min; all of them centre on the mean first.
//! Standard deviations use the divisor n − 1.

use super::FeatureData;
use super::accumulate::Statistic;
use crate::error::{AnalysisError, Error, InputError};
use crate::linalg::Matrix;
use crate::linalg::sum::Sum;
use crate::recipe::raw::{ConstantPolicy, ScalingMethod};
use serde::Serialize;

/// How one feature was centred and scaled: scaled = (x − centre) / scale.
#[derive(Debug, Clone, Serialize)]
pub struct FeatureScale {
    pub feature: String,
    pub mean: f64,
    pub sd: f64,
    pub min: f64,
    pub max: f64,
    pub centre: f64,
    pub scale: f64,
}

/// The scaling stage's report.
#[derive(Debug, Clone, Serialize)]
pub struct ScaleReport {
    pub method: ScalingMethod,
    pub constant_features: ConstantPolicy,
    pub features: Vec<FeatureScale>,
    /// Constant features dropped under `constant_features = "drop"`.
    pub dropped_constant: Vec<String>,
}

/// The scaled data: rows × features, ready for the decomposition.
#[derive(Debug, Clone)]
pub struct Scaled {
    pub names: Vec<String>,
    /// The scaled rows as one matrix, held only when a method needs the whole
    /// matrix (see `needs_matrix` in the passes); otherwise every statistic is
    /// taken in passes over the row store.
    pub matrix: Option<Matrix>,
    /// The number of analysed rows.
    pub analysed: usize,
}

impl Scaled {
    pub fn n_rows(&self) -> usize {
        self.analysed
    }

    pub fn n_features(&self) -> usize {
        self.names.len()
    }

    /// The scaled rows, when they are held as one matrix.
    pub fn data(&self) -> &Matrix {
        self.matrix
            .as_ref()
            .expect("the scaled rows are held for the whole-matrix methods")
    }
}

/// Centres and scales features held as columns: [`FeatureScale::measure`]
/// then the stage's decisions ([`decide`]), the same as the engine takes from
/// the statistics it sums in passes. For tables built in tests.
pub fn scale(
    data: FeatureData,
    method: ScalingMethod,
    constant: ConstantPolicy,
) -> Result<(Scaled, ScaleReport), Error> {
    let stats = data
        .features
        .iter()
        .map(|f| FeatureScale::measure(&f.name, &f.values, method))
        .collect();
    let (report, kept) = decide(&data.source, stats, method, constant)?;
    let columns: Vec<Vec<f64>> = kept
        .iter()
        .zip(&report.features)
        .map(|(&j, stats)| {
            data.features[j]
                .values
                .iter()
                .map(|&v| stats.apply(v))
                .collect()
        })
        .collect();
    let matrix = Matrix::from_columns(&columns);
    check_squares(&data.source, &report, &Squares::of(&matrix))?;
    Ok((
        Scaled {
            names: report.features.iter().map(|f| f.feature.clone()).collect(),
            matrix: Some(matrix),
            analysed: data.rows.len(),
        },
        report,
    ))
}

/// The scaling stage's decisions, feature by feature, from each feature's
/// statistics: a constant feature is refused or dropped as the recipe says,
/// and values whose mean or spread overflow are refused. Returns the report
/// and the indices of the features kept.
pub fn decide(
    source: &str,
    stats: Vec<FeatureScale>,
    method: ScalingMethod,
    constant: ConstantPolicy,
) -> Result<(ScaleReport, Vec<usize>), Error> {
    let mut report = ScaleReport::new(method, constant);
    let mut kept = Vec::new();
    for (j, stats) in stats.into_iter().enumerate() {
        if !report.admit(source, &stats)? {
            continue;
        }
        // The squares of the scaled values are checked once they are made
        // ([`check_squares`]).
        check_finite(source, &stats.feature, &stats, 0.0, method)?;
        kept.push(j);
        report.features.push(stats);
    }
    report.some_left(source)?;
    Ok((report, kept))
}

/// Refuses scaled values whose squares overflow ([`check_finite`]); `squares`
/// holds Σ z² of each kept feature.
pub fn check_squares(
    source: &str,
    report: &ScaleReport,
    squares: &[f64],
) -> Result<(), AnalysisError> {
    for (stats, &s) in report.features.iter().zip(squares) {
        check_finite(source, &stats.feature, stats, s, report.method)?;
    }
    Ok(())
}

impl ScaleReport {
    /// A report with no feature scaled yet.
    pub fn new(method: ScalingMethod, constant: ConstantPolicy) -> ScaleReport {
        ScaleReport {
            method,
            constant_features: constant,
            features: Vec::new(),
            dropped_constant: Vec::new(),
        }
    }

    /// The rule for a feature whose values are all equal under a scaling that
    /// divides by their spread: stop with an error, or drop it (recorded
    /// here). `Ok(true)` when the feature is scaled.
    pub fn admit(&mut self, source: &str, stats: &FeatureScale) -> Result<bool, Error> {
        if !(self.method.divides() && stats.min == stats.max) {
            return Ok(true);
        }
        match self.constant_features {
            ConstantPolicy::Error => Err(InputError::ConstantFeature {
                path: source.to_string(),
                column: stats.feature.clone(),
                value: crate::text::number(stats.min),
                scaling: self.method.name(),
            }
            .into()),
            ConstantPolicy::Drop => {
                self.dropped_constant.push(stats.feature.clone());
                Ok(false)
            }
        }
    }

    /// Refuses a table whose every feature was dropped as constant.
    pub fn some_left(&self, source: &str) -> Result<(), Error> {
        if self.features.is_empty() {
            return Err(InputError::NoFeatures {
                path: source.to_string(),
                why: " (every feature is constant)".into(),
            }
            .into());
        }
        Ok(())
    }
}

/// One value on the scale of the analysis: (x − centre) / scale. The one
/// definition every engine, imputation and `apply` use.
#[inline]
pub fn scale_value(x: f64, centre: f64, scale: f64) -> f64 {
    (x - centre) / scale
}

/// The divisor used to standardise a column inside a fill method (iterative
/// PCA, the neighbours' distances): the column's scale, or 1 when the scale is
/// zero, so that a column with no spread is centred only and never divides by
/// zero. The analysis itself never takes this rule: a zero scale there is
/// refused or dropped ([`ScaleReport::admit`], [`check_finite`]).
pub fn standardising_divisor(scale: f64) -> f64 {
    if scale > 0.0 { scale } else { 1.0 }
}

/// The count, sum and range of a feature's values: their mean, minimum and
/// maximum. Summed in row order in two doubles ([`crate::linalg::sum::Sum`]),
/// so the mean is within one rounding of the exact mean however large the
/// values' offset (a plain running sum was several units in the last place
/// off for values near 1e8, and centring moved every value by that much).
#[derive(Debug, Clone, Copy)]
pub struct Moments {
    count: usize,
    sum: Sum,
    low: f64,
    high: f64,
}

/// What [`Moments`] gives.
#[derive(Debug, Clone, Copy)]
pub struct MomentsReport {
    pub count: usize,
    pub mean: f64,
    pub min: f64,
    pub max: f64,
}

impl Moments {
    pub fn new() -> Moments {
        Moments {
            count: 0,
            sum: Sum::new(),
            low: f64::INFINITY,
            high: f64::NEG_INFINITY,
        }
    }
}

impl Default for Moments {
    fn default() -> Self {
        Moments::new()
    }
}

impl Statistic for Moments {
    type Report = MomentsReport;

    #[inline]
    fn add(&mut self, v: f64) {
        self.count += 1;
        self.sum.add(v);
        self.low = self.low.min(v);
        self.high = self.high.max(v);
    }

    fn merge(&mut self, other: &Moments) {
        self.count += other.count;
        self.sum.merge(&other.sum);
        self.low = self.low.min(other.low);
        self.high = self.high.max(other.high);
    }

    fn finish(&self) -> MomentsReport {
        MomentsReport {
            count: self.count,
            mean: self.sum.mean(self.count),
            min: self.low,
            max: self.high,
        }
    }
}

/// The sum of squared deviations from a mean known beforehand (the second of
/// two passes, for accuracy): the standard deviation with divisor n − 1.
#[derive(Debug, Clone, Copy)]
pub struct Deviations {
    mean: f64,
    count: usize,
    squares: f64,
}

impl Deviations {
    pub fn about(mean: f64) -> Deviations {
        Deviations {
            mean,
            count: 0,
            squares: crate::linalg::SUM_START,
        }
    }
}

impl Statistic for Deviations {
    /// The standard deviation (divisor n − 1).
    type Report = f64;

    #[inline]
    fn add(&mut self, v: f64) {
        let d = v - self.mean;
        self.count += 1;
        self.squares += d * d;
    }

    fn merge(&mut self, other: &Deviations) {
        self.count += other.count;
        self.squares += other.squares;
    }

    fn finish(&self) -> f64 {
        (self.squares / (self.count as f64 - 1.0)).sqrt()
    }
}

/// Σ z² of one feature's scaled values, in row order from
/// [`crate::linalg::SUM_START`]. (A start of +0 gives the same bits once a row
/// is added, since a square is never −0; the decomposition's total variance,
/// the overflow check and the correlation loadings all read this one sum.)
#[derive(Debug, Clone, Copy)]
pub struct Square(f64);

impl Square {
    pub fn new() -> Square {
        Square(crate::linalg::SUM_START)
    }
}

impl Default for Square {
    fn default() -> Self {
        Square::new()
    }
}

impl Statistic for Square {
    type Report = f64;

    #[inline]
    fn add(&mut self, v: f64) {
        self.0 += v * v;
    }

    fn merge(&mut self, other: &Square) {
        self.0 += other.0;
    }

    fn finish(&self) -> f64 {
        self.0
    }
}

/// [`Square`] of every column of row-major rows, taken a row at a time (the
/// rows are read once, in memory order).
#[derive(Debug, Clone)]
pub struct Squares {
    columns: Vec<Square>,
}

impl Squares {
    pub fn new(width: usize) -> Squares {
        Squares {
            columns: vec![Square::new(); width],
        }
    }

    /// Adds whole rows of `width` values each.
    pub fn push(&mut self, rows: &[f64]) {
        let p = self.columns.len().max(1);
        for row in rows.chunks_exact(p) {
            for (s, &v) in self.columns.iter_mut().zip(row) {
                s.add(v);
            }
        }
    }

    pub fn merge(&mut self, other: &Squares) {
        for (s, o) in self.columns.iter_mut().zip(&other.columns) {
            s.merge(o);
        }
    }

    pub fn finish(&self) -> Vec<f64> {
        self.columns.iter().map(Statistic::finish).collect()
    }

    /// Σᵢ zᵢⱼ² of every column of a matrix held in memory.
    pub fn of(z: &Matrix) -> Vec<f64> {
        let mut squares = Squares::new(z.cols);
        squares.push(&z.data);
        squares.finish()
    }
}

/// Refuses values whose mean, spread or squares overflow double precision: the
/// decomposition sums squares of the scaled values, and an infinity there would
/// silently turn into a zero loading or a meaningless total. Also refuses a
/// dividing scaling whose divisor underflowed to zero although the values
/// differ (deviations below about 1e-162 have squares that round to zero): the
/// scaled values would be infinite, which is not an overflow of the data.
pub fn check_finite(
    source: &str,
    name: &str,
    stats: &FeatureScale,
    squares: f64,
    method: ScalingMethod,
) -> Result<(), AnalysisError> {
    use crate::error::OverflowPart;
    let overflow = |what| AnalysisError::Overflow {
        path: source.to_string(),
        column: name.to_string(),
        what,
        scaling: method.name(),
        bounded: method.bounds_values(),
    };
    if !stats.mean.is_finite() {
        return Err(overflow(OverflowPart::Sum));
    }
    if !stats.sd.is_finite() || !stats.scale.is_finite() {
        return Err(overflow(OverflowPart::Spread));
    }
    if method.divides() && stats.scale == 0.0 && stats.min != stats.max {
        return Err(AnalysisError::Underflow {
            path: source.to_string(),
            column: name.to_string(),
            min: crate::text::number(stats.min),
            max: crate::text::number(stats.max),
            spread: method.spread_name(),
        });
    }
    if !squares.is_finite() {
        return Err(overflow(OverflowPart::ScaledSquares));
    }
    Ok(())
}

impl FeatureScale {
    /// The scaling of one feature held in memory, from the same statistics the
    /// passes engine feeds chunk by chunk.
    pub fn measure(name: &str, values: &[f64], method: ScalingMethod) -> FeatureScale {
        let mut moments = Moments::new();
        moments.push(values);
        let moments = moments.finish();
        let mut deviations = Deviations::about(moments.mean);
        deviations.push(values);
        FeatureScale::from_moments(name, &moments, deviations.finish(), method)
    }

    /// The centre and scale `method` takes from a feature's moments and
    /// standard deviation (however they were summed).
    pub fn from_moments(
        name: &str,
        moments: &MomentsReport,
        sd: f64,
        method: ScalingMethod,
    ) -> FeatureScale {
        let (mean, min, max) = (moments.mean, moments.min, moments.max);
        FeatureScale {
            feature: name.to_string(),
            mean,
            sd,
            min,
            max,
            centre: if method.centers() { mean } else { 0.0 },
            scale: method.scale_of(sd, min, max),
        }
    }

    /// A value of this feature on the scale of the analysis.
    #[inline]
    pub fn apply(&self, x: f64) -> f64 {
        scale_value(x, self.centre, self.scale)
    }
}

/// What each scaling method means. The rules that differ between methods live
/// here (with `name`, `centers` and `divides` beside the enum), so a new method
/// is the enum's variant, these matches, its test and its documentation.
impl ScalingMethod {
    /// The divisor from a feature's standard deviation and range.
    pub fn scale_of(self, sd: f64, min: f64, max: f64) -> f64 {
        match self {
            ScalingMethod::None | ScalingMethod::Center => 1.0,
            ScalingMethod::UnitVariance => sd,
            ScalingMethod::Pareto => sd.sqrt(),
            ScalingMethod::Range => max - min,
            #[cfg(test)]
            ScalingMethod::TwiceSd => 2.0 * sd,
        }
    }

    /// The spread a dividing method divides by, in words.
    pub fn spread_name(self) -> &'static str {
        match self {
            ScalingMethod::Range => "range",
            _ => "standard deviation",
        }
    }

    /// Whether the scaled values are bounded whatever the data's unit, so that
    /// the sum of their squares cannot overflow.
    pub fn bounds_values(self) -> bool {
        matches!(self, ScalingMethod::UnitVariance | ScalingMethod::Range)
    }

    /// Whether the loadings times the square roots of the eigenvalues are the
    /// correlations of the features with the components.
    pub fn gives_correlations(self) -> bool {
        self == ScalingMethod::UnitVariance
    }

    /// The name of the matrix whose eigenvectors are the loadings.
    pub fn matrix_name(self) -> &'static str {
        match self {
            ScalingMethod::None => "second moments (uncentred)",
            ScalingMethod::Center => "covariance",
            ScalingMethod::UnitVariance => "correlation",
            ScalingMethod::Pareto => "covariance of Pareto-scaled features",
            ScalingMethod::Range => "covariance of range-scaled features",
            #[cfg(test)]
            ScalingMethod::TwiceSd => "correlation (halved)",
        }
    }

    /// One sentence for `sextant explain`.
    pub fn explanation(self) -> &'static str {
        match self {
            ScalingMethod::None => {
                "Neither centre nor scale the features, so the analysis is of the uncentred second-moment matrix XᵀX / (n − 1)."
            }
            ScalingMethod::Center => {
                "Centre each feature on its mean without scaling, so the analysis is of the covariance matrix and features with large spread weigh most."
            }
            ScalingMethod::UnitVariance => {
                "Centre each feature on its mean and divide it by its standard deviation (divisor n − 1), so the analysis is of the correlation matrix and every feature weighs the same."
            }
            ScalingMethod::Pareto => {
                "Centre each feature on its mean and divide it by the square root of its standard deviation (Pareto scaling)."
            }
            ScalingMethod::Range => {
                "Centre each feature on its mean and divide it by its range (max − min)."
            }
            #[cfg(test)]
            ScalingMethod::TwiceSd => {
                "Centre each feature on its mean and divide it by twice its standard deviation."
            }
        }
    }

    /// Every method, in the recipe's order (for checks over all of them).
    pub const ALL: [ScalingMethod; 5] = [
        ScalingMethod::None,
        ScalingMethod::Center,
        ScalingMethod::UnitVariance,
        ScalingMethod::Pareto,
        ScalingMethod::Range,
    ];
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stages::Feature;

    fn data(columns: &[&[f64]]) -> FeatureData {
        let n = columns[0].len();
        FeatureData {
            features: columns
                .iter()
                .enumerate()
                .map(|(j, values)| Feature {
                    name: format!("f{j}"),
                    values: values.to_vec(),
                    transform: None,
                })
                .collect(),
            rows: (0..n).collect(),
            lines: (2..n as u64 + 2).collect(),
            source: "t.csv".into(),
        }
    }

    /// The list of dividing methods the recipe check reads is the rule the
    /// stage applies.
    #[test]
    fn dividing_names_are_the_dividing_methods() {
        let dividing: Vec<&str> = ScalingMethod::ALL
            .iter()
            .filter(|m| m.divides())
            .map(|m| m.name())
            .collect();
        assert_eq!(dividing, ScalingMethod::DIVIDING);
    }

    /// A method that exists only in the unit tests (`ScalingMethod::TwiceSd`,
    /// written in the recipe enum and this stage only) scales, refuses a
    /// constant feature and explains itself like the shipped ones: adding a
    /// method needs no other file (the whole library compiles with it here).
    #[test]
    fn a_new_scaling_needs_only_the_enum_and_the_stage() {
        let method = ScalingMethod::TwiceSd;
        let (scaled, report) = scale(
            data(&[&[1.0, 2.0, 3.0, 6.0]]),
            method,
            ConstantPolicy::Error,
        )
        .unwrap();
        let f = &report.features[0];
        assert_eq!((f.mean, f.centre), (3.0, 3.0));
        assert_eq!(f.scale, 2.0 * f.sd);
        let z = scaled.data();
        assert_eq!(z.get(3, 0), (6.0 - 3.0) / (2.0 * f.sd));
        let e = scale(data(&[&[4.0, 4.0, 4.0]]), method, ConstantPolicy::Error).unwrap_err();
        assert!(
            e.to_string()
                .contains("`twice-sd` scaling would divide by zero"),
            "{e}"
        );
        let (_, dropped) = scale(
            data(&[&[4.0, 4.0, 4.0], &[1.0, 2.0, 3.0]]),
            method,
            ConstantPolicy::Drop,
        )
        .unwrap();
        assert_eq!(dropped.dropped_constant, vec!["f0".to_string()]);
        assert!(
            method
                .explanation()
                .contains("twice its standard deviation")
        );
        assert!(!method.gives_correlations() && !method.bounds_values());
    }

    /// Σ z² from −0 (the sum's start) and from +0 give the same bits once a
    /// row is added, so one accumulator serves the overflow check, the total
    /// variance and the correlation loadings.
    #[test]
    fn squares_from_either_zero_agree() {
        for column in [&[0.0, 0.0][..], &[-0.0, 1e-200], &[3.0, -4.0]] {
            let mut s = Square::new();
            s.push(column);
            let plus = column.iter().fold(0.0, |a, v| a + v * v);
            assert_eq!(s.finish().to_bits(), plus.to_bits());
        }
    }
}
