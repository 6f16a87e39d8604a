//! The recipe exactly as written: plain structs that mirror the TOML file.
//!
//! Every struct denies unknown keys, and every choice is an enum or a checked
//! newtype, so the `toml` crate reports a typo or an out-of-range value with its
//! line, column and the valid choices. Nothing here knows about the data; the
//! `plan` module turns a raw recipe into a checked plan once the table is read.

use serde::{Deserialize, Deserializer, Serialize};
use std::num::NonZeroUsize;
use toml::Spanned;

/// The whole recipe file.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawRecipe {
    /// Recipe format version; only 1 exists.
    pub format: Spanned<Whole>,
    pub title: Option<String>,
    pub notes: Option<String>,
    pub input: RawInput,
    #[serde(default)]
    pub missing: RawMissing,
    #[serde(default)]
    pub transform: RawTransform,
    #[serde(default)]
    pub scaling: RawScaling,
    #[serde(default)]
    pub components: RawComponents,
    #[serde(default)]
    pub diagnostics: RawDiagnostics,
    /// `[[plot]]` tables, one per figure.
    #[serde(default, rename = "plot")]
    pub plots: Vec<Spanned<RawPlot>>,
    pub output: RawOutput,
}

/// One `[[plot]]` table. Which keys apply depends on the kind; the plan rejects
/// a key that does not apply.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawPlot {
    pub kind: PlotKind,
    /// File name inside the results folder's plots/ (default from kind and components).
    pub file: Option<Spanned<String>>,
    pub title: Option<String>,
    /// Components on the horizontal and vertical axes (1-based).
    pub x: Option<Spanned<Count>>,
    pub y: Option<Spanned<Count>>,
    /// The component of a loadings bar chart (1-based).
    pub component: Option<Spanned<Count>>,
    /// A group column that colours the points.
    pub color: Option<Spanned<String>>,
    /// Which points get their id written beside them.
    pub labels: Option<Spanned<PointLabels>>,
    /// Draw the Hotelling T² ellipse at this confidence (scores plots).
    pub ellipse: Option<Spanned<Confidence>>,
    /// Above this many points, scatter plots draw a density of binned points
    /// plus the flagged points instead of every point.
    pub density_above: Option<Spanned<Count>>,
}

/// The kinds of figure.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum PlotKind {
    /// Eigenvalues as bars, cumulative share as a line, the rule's evidence beside them.
    Scree,
    /// Scores of two components.
    Scores,
    /// Loadings of one component (bars) or two (scatter).
    Loadings,
    /// Scores and loading arrows together.
    Biplot,
    /// Correlations of the features with two components, in the unit circle.
    CorrelationCircle,
    /// T² against SPE with both limits.
    OutlierMap,
}

impl PlotKind {
    pub fn name(self) -> &'static str {
        match self {
            PlotKind::Scree => "scree",
            PlotKind::Scores => "scores",
            PlotKind::Loadings => "loadings",
            PlotKind::Biplot => "biplot",
            PlotKind::CorrelationCircle => "correlation-circle",
            PlotKind::OutlierMap => "outlier-map",
        }
    }
}

/// Which points of a scatter plot get their id written beside them.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Deserialize, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum PointLabels {
    None,
    /// Only rows above a T² or SPE limit.
    #[default]
    Flagged,
    All,
}

/// A confidence level strictly between 0 and 1.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Confidence(pub f64);

impl<'de> Deserialize<'de> for Confidence {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        deserializer.deserialize_any(NumberVisitor(
            "a confidence level between 0 and 1, such as 0.95",
            |v| check_confidence(v).map(Confidence),
        ))
    }
}

/// `[input]`: which table, and the role of its columns.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawInput {
    pub file: Spanned<String>,
    /// Optional pin: the run refuses a file whose SHA-256 differs.
    pub sha256: Option<Spanned<Sha256Hex>>,
    pub id: Option<Spanned<String>>,
    #[serde(default)]
    pub groups: Vec<Spanned<String>>,
    /// Names or glob patterns; absent means every numeric column.
    pub features: Option<Vec<Spanned<String>>>,
    #[serde(default)]
    pub exclude: Vec<Spanned<String>>,
    /// Cell texts that mean "missing".
    pub missing: Option<Vec<String>>,
    pub delimiter: Option<Delimiter>,
}

/// The cell texts read as missing when the recipe does not say.
pub const DEFAULT_MISSING_TOKENS: [&str; 4] = ["", "NA", "N/A", "-"];

/// `[missing]`: what to do with empty cells.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawMissing {
    #[serde(default)]
    pub method: MissingMethod,
    #[serde(default = "default_max_feature_missing")]
    pub max_feature_missing: Share,
    /// Only with `method = "iterative-pca"` (see [`super::applies`]).
    pub iterative_pca: Option<Spanned<RawIterative>>,
    /// Only with `method = "knn"` (see [`super::applies`]).
    pub knn: Option<Spanned<RawKnn>>,
}

impl Default for RawMissing {
    fn default() -> Self {
        RawMissing {
            method: MissingMethod::default(),
            max_feature_missing: default_max_feature_missing(),
            iterative_pca: None,
            knn: None,
        }
    }
}

impl RawMissing {
    /// The iterative PCA settings, defaults filled in.
    pub fn iterative(&self) -> RawIterative {
        self.iterative_pca
            .as_ref()
            .map(|s| s.get_ref().clone())
            .unwrap_or_default()
    }

    /// The nearest-neighbour settings, defaults filled in.
    pub fn knn(&self) -> RawKnn {
        self.knn
            .as_ref()
            .map(|s| s.get_ref().clone())
            .unwrap_or_default()
    }
}

fn default_max_feature_missing() -> Share {
    Share(0.3)
}

/// How missing cells are handled.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Deserialize, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum MissingMethod {
    /// Drop every row with a missing cell in a kept feature.
    DropRows,
    /// Fill with the feature's mean over its observed cells.
    #[default]
    Mean,
    /// Fill with the feature's median over its observed cells.
    Median,
    /// Alternate a PCA fit and re-estimation of the missing cells (Josse & Husson 2012).
    IterativePca,
    /// Fill from the nearest rows on the observed features.
    Knn,
}

impl MissingMethod {
    pub fn name(self) -> &'static str {
        match self {
            MissingMethod::DropRows => "drop-rows",
            MissingMethod::Mean => "mean",
            MissingMethod::Median => "median",
            MissingMethod::IterativePca => "iterative-pca",
            MissingMethod::Knn => "knn",
        }
    }
}

/// `[missing.iterative_pca]`: iterative PCA imputation.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawIterative {
    /// Components of the imputation model; absent means the recipe's fixed
    /// `keep`, or 2 when `keep` is a rule.
    pub components: Option<Count>,
    #[serde(default)]
    pub variant: IterativeVariant,
    /// Stop when the relative change of the filled cells falls below this.
    #[serde(default = "default_tolerance")]
    pub tolerance: Tolerance,
    #[serde(default = "default_max_iterations")]
    pub max_iterations: Count,
    /// The first guess of each missing cell.
    #[serde(default)]
    pub start: StartValue,
    /// Accept the last iterate when the tolerance is not reached (reported);
    /// otherwise that is an error.
    #[serde(default)]
    pub allow_unconverged: bool,
}

impl Default for RawIterative {
    fn default() -> Self {
        RawIterative {
            components: None,
            variant: IterativeVariant::default(),
            tolerance: default_tolerance(),
            max_iterations: default_max_iterations(),
            start: StartValue::default(),
            allow_unconverged: false,
        }
    }
}

fn default_tolerance() -> Tolerance {
    Tolerance(1e-9)
}

fn default_max_iterations() -> Count {
    Count(NonZeroUsize::new(1000).expect("non-zero"))
}

/// The two variants of iterative PCA imputation.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Deserialize, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum IterativeVariant {
    /// Singular values shrunk by the estimated noise variance (Josse & Husson 2012).
    #[default]
    Regularized,
    /// The plain EM fit, without shrinkage; may overfit and fill extreme values.
    Em,
}

/// The first guess of each missing cell.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Deserialize, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum StartValue {
    #[default]
    Mean,
    Median,
}

/// `[missing.knn]`: nearest-neighbour filling.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawKnn {
    #[serde(default = "default_neighbours")]
    pub neighbours: Count,
}

impl Default for RawKnn {
    fn default() -> Self {
        RawKnn {
            neighbours: default_neighbours(),
        }
    }
}

fn default_neighbours() -> Count {
    Count(NonZeroUsize::new(5).expect("non-zero"))
}

/// A positive tolerance below 1.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Tolerance(pub f64);

impl<'de> Deserialize<'de> for Tolerance {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        deserializer.deserialize_any(NumberVisitor("a small positive number such as 1e-9", |v| {
            (v > 0.0 && v < 1.0)
                .then_some(Tolerance(v))
                .ok_or_else(|| format!("{v} is not a tolerance; expected a number between 0 and 1"))
        }))
    }
}

/// `[transform]`: per-feature transforms applied before scaling.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawTransform {
    #[serde(default)]
    pub log10: Vec<Spanned<String>>,
    #[serde(default)]
    pub ln: Vec<Spanned<String>>,
    #[serde(default)]
    pub sqrt: Vec<Spanned<String>>,
}

/// `[scaling]`: centring and scaling of each feature.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawScaling {
    #[serde(default)]
    pub method: ScalingMethod,
    /// Only with a dividing method (see [`super::applies`]).
    pub constant_features: Option<Spanned<ConstantPolicy>>,
}

impl RawScaling {
    /// What happens to a constant feature, the default filled in.
    pub fn constant_policy(&self) -> ConstantPolicy {
        self.constant_features
            .as_ref()
            .map_or(ConstantPolicy::default(), |c| *c.get_ref())
    }
}

/// How features are centred and scaled before the decomposition.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Deserialize, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum ScalingMethod {
    /// Neither centred nor scaled: the decomposition is of XᵀX / (n − 1).
    None,
    /// Centred on the mean.
    Center,
    /// Centred and divided by the standard deviation (n − 1): correlation PCA.
    #[default]
    UnitVariance,
    /// Centred and divided by the square root of the standard deviation.
    Pareto,
    /// Centred and divided by the range (max − min).
    Range,
    /// Only in the library's unit tests: centred and divided by twice the
    /// standard deviation. It shows that a new method is this enum, the scaling
    /// stage (`stages::scale`, where every other rule that differs between
    /// methods lives) and their tests.
    #[cfg(test)]
    TwiceSd,
}

impl ScalingMethod {
    pub fn name(self) -> &'static str {
        match self {
            ScalingMethod::None => "none",
            ScalingMethod::Center => "center",
            ScalingMethod::UnitVariance => "unit-variance",
            ScalingMethod::Pareto => "pareto",
            ScalingMethod::Range => "range",
            #[cfg(test)]
            ScalingMethod::TwiceSd => "twice-sd",
        }
    }

    /// The methods that divide by a measure of spread, as the recipe writes
    /// them (where `constant_features` applies; a unit test holds it to
    /// [`ScalingMethod::divides`]).
    pub const DIVIDING: &'static [&'static str] = &["unit-variance", "pareto", "range"];

    /// Whether the scaling divides by a measure of spread.
    pub fn divides(self) -> bool {
        match self {
            ScalingMethod::None | ScalingMethod::Center => false,
            ScalingMethod::UnitVariance | ScalingMethod::Pareto | ScalingMethod::Range => true,
            #[cfg(test)]
            ScalingMethod::TwiceSd => true,
        }
    }

    pub fn centers(self) -> bool {
        self != ScalingMethod::None
    }
}

/// What happens to a feature with zero spread under a dividing scaling.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Deserialize, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum ConstantPolicy {
    /// Stop with an error naming the feature.
    #[default]
    Error,
    /// Drop the feature and report it.
    Drop,
}

/// `[components]`: how many components are computed and kept.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawComponents {
    pub keep: Option<Spanned<Keep>>,
    pub compute: Option<Spanned<Count>>,
    /// How the eigenvalues and loadings are computed; absent means exact.
    pub method: Option<Spanned<DecompositionMethod>>,
    /// Settings of the randomized method; only allowed with `method = "randomized"`.
    pub randomized: Option<Spanned<RawRandomized>>,
    /// Only with `keep = "parallel-analysis"` (see [`super::applies`]).
    pub parallel_analysis: Option<Spanned<RawParallel>>,
    /// Only with `keep = "cross-validation"` (see [`super::applies`]).
    pub cross_validation: Option<Spanned<RawCrossValidation>>,
}

impl RawComponents {
    /// The parallel-analysis settings, defaults filled in.
    pub fn parallel(&self) -> RawParallel {
        self.parallel_analysis
            .as_ref()
            .map(|s| s.get_ref().clone())
            .unwrap_or_default()
    }

    /// The cross-validation settings, defaults filled in.
    pub fn cross_validation(&self) -> RawCrossValidation {
        self.cross_validation
            .as_ref()
            .map(|s| s.get_ref().clone())
            .unwrap_or_default()
    }
}

/// How the eigenvalues and loadings are computed.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Deserialize, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum DecompositionMethod {
    /// Every eigenvalue, from the full p × p (or n × n) matrix, and the loadings
    /// of the components computed.
    #[default]
    Exact,
    /// Only the leading components, from a seeded random sketch of the data
    /// (Halko, Martinsson & Tropp 2011); for wide or large tables.
    Randomized,
}

impl DecompositionMethod {
    pub fn name(self) -> &'static str {
        match self {
            DecompositionMethod::Exact => "exact",
            DecompositionMethod::Randomized => "randomized",
        }
    }
}

/// `[components.randomized]`: the randomized range finder with power iterations
/// (Halko, Martinsson & Tropp 2011, "Finding structure with randomness", SIAM
/// Review 53:217–288, Algorithms 4.4 and 5.1).
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawRandomized {
    /// Random directions drawn beyond the components wanted.
    #[serde(default = "default_oversampling")]
    pub oversampling: Steps,
    /// Passes of multiplying by XᵀX before the final sketch; each sharpens the
    /// leading components when the eigenvalues decay slowly.
    #[serde(default = "default_power_iterations")]
    pub power_iterations: Steps,
    /// Seed of the random stream; the same seed gives the same bits.
    #[serde(default = "default_seed", deserialize_with = "seed")]
    pub seed: u64,
}

impl Default for RawRandomized {
    fn default() -> Self {
        RawRandomized {
            oversampling: default_oversampling(),
            power_iterations: default_power_iterations(),
            seed: default_seed(),
        }
    }
}

fn default_oversampling() -> Steps {
    Steps(10)
}

fn default_power_iterations() -> Steps {
    Steps(4)
}

/// A whole number from 0 to [`Steps::MAX`] (oversampling, power iterations).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct Steps(pub usize);

impl Steps {
    /// More than this gains nothing over the exact method and only costs time.
    pub const MAX: usize = 1000;
}

impl<'de> Deserialize<'de> for Steps {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        deserializer.deserialize_any(WholeVisitor("a whole number from 0 to 1000", |v| {
            usize::try_from(v)
                .ok()
                .filter(|&s| s <= Steps::MAX)
                .map(Steps)
                .ok_or_else(|| format!("{v} is not a whole number from 0 to 1000"))
        }))
    }
}

/// `[components.parallel_analysis]`: Horn's (1965) parallel analysis.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawParallel {
    /// Random tables generated.
    #[serde(default = "default_replicates")]
    pub replicates: Count,
    /// The percentile of the random eigenvalues a component must exceed.
    #[serde(default = "default_percentile")]
    pub percentile: Percent,
    /// Seed of the random stream; the same seed gives the same thresholds.
    #[serde(default = "default_seed", deserialize_with = "seed")]
    pub seed: u64,
    #[serde(default)]
    pub random_data: RandomData,
}

impl Default for RawParallel {
    fn default() -> Self {
        RawParallel {
            replicates: default_replicates(),
            percentile: default_percentile(),
            seed: default_seed(),
            random_data: RandomData::default(),
        }
    }
}

fn default_replicates() -> Count {
    Count(NonZeroUsize::new(200).expect("non-zero"))
}

fn default_percentile() -> Percent {
    Percent(95.0)
}

fn default_seed() -> u64 {
    20_260_101
}

/// Reads the seed of a random stream: a whole number from 0 to 2⁶⁴ − 1.
fn seed<'de, D: Deserializer<'de>>(deserializer: D) -> Result<u64, D::Error> {
    deserializer.deserialize_any(WholeVisitor(
        "a seed: a whole number from 0 to 18446744073709551615, such as 20260101",
        |v| {
            u64::try_from(v).map_err(|_| {
                format!("{v} is not a seed; expected a whole number from 0 to 18446744073709551615")
            })
        },
    ))
}

/// What random tables parallel analysis compares against.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Deserialize, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum RandomData {
    /// Each column of the scaled data shuffled on its own: same values, no correlation.
    #[default]
    PermutedColumns,
    /// Independent normal values with each column's standard deviation.
    Normal,
}

/// `[components.cross_validation]`: PRESS over held-out cells.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawCrossValidation {
    #[serde(default = "default_folds")]
    pub folds: Folds,
    #[serde(default)]
    pub folds_by: FoldsBy,
    #[serde(default)]
    pub choose: CvChoice,
}

impl Default for RawCrossValidation {
    fn default() -> Self {
        RawCrossValidation {
            folds: default_folds(),
            folds_by: FoldsBy::default(),
            choose: CvChoice::default(),
        }
    }
}

fn default_folds() -> Folds {
    Folds(7)
}

/// The number of cross-validation folds: at least 2 (one fold would hold out
/// every row at once and fit the model to nothing).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(transparent)]
pub struct Folds(pub usize);

impl<'de> Deserialize<'de> for Folds {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        deserializer.deserialize_any(WholeVisitor("a whole number of folds from 2 up, such as 7", |v| {
            usize::try_from(v)
                .ok()
                .filter(|&f| f >= 2)
                .map(Folds)
                .ok_or_else(|| {
                    format!(
                        "folds = {v} cannot cross-validate: each fold is held out while the others fit the model, so at least 2 are needed (such as 7)"
                    )
                })
        }))
    }
}

/// How rows are dealt into cross-validation folds.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Deserialize, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum FoldsBy {
    /// Row i goes to fold i mod folds, so each fold spans the whole table.
    #[default]
    Interleaved,
    /// Consecutive blocks of rows.
    Contiguous,
}

/// Which count of components cross-validation picks.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Deserialize, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum CvChoice {
    /// The fewest components whose PRESS is within one standard error of the minimum.
    #[default]
    OneStandardError,
    /// The count with the smallest PRESS.
    Minimum,
}

/// `[diagnostics]`: control limits for T² and SPE.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawDiagnostics {
    #[serde(default)]
    pub confidence: Confidences,
    #[serde(default)]
    pub spe_limit: SpeLimit,
    /// At most this many flagged rows get their contributions written, the most
    /// unusual first, so a large table cannot produce a huge file.
    #[serde(default = "default_contribution_rows")]
    pub contributions_max_rows: Count,
}

fn default_contribution_rows() -> Count {
    Count(NonZeroUsize::new(1000).expect("non-zero"))
}

impl Default for RawDiagnostics {
    fn default() -> Self {
        RawDiagnostics {
            confidence: Confidences::default(),
            spe_limit: SpeLimit::default(),
            contributions_max_rows: default_contribution_rows(),
        }
    }
}

/// The formula for the SPE limit.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Deserialize, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum SpeLimit {
    /// Jackson & Mudholkar (1979), the normal approximation.
    #[default]
    JacksonMudholkar,
    /// Box (1954), the scaled χ² approximation.
    Box,
}

/// One or more confidence levels, each strictly between 0 and 1.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Confidences(pub Vec<f64>);

impl Default for Confidences {
    fn default() -> Self {
        Confidences(vec![0.95])
    }
}

fn check_confidence(v: f64) -> Result<f64, String> {
    if v > 0.0 && v < 1.0 {
        Ok(v)
    } else {
        Err(format!(
            "{v} is not a confidence level; expected a number between 0 and 1, such as 0.95"
        ))
    }
}

impl<'de> Deserialize<'de> for Confidences {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        struct V;
        impl<'de> serde::de::Visitor<'de> for V {
            type Value = Confidences;
            fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
                f.write_str("a confidence level such as 0.95, or a list such as [0.95, 0.99]")
            }
            fn visit_f64<E: serde::de::Error>(self, v: f64) -> Result<Confidences, E> {
                check_confidence(v)
                    .map(|v| Confidences(vec![v]))
                    .map_err(E::custom)
            }
            fn visit_i64<E: serde::de::Error>(self, v: i64) -> Result<Confidences, E> {
                self.visit_f64(v as f64)
            }
            fn visit_seq<A: serde::de::SeqAccess<'de>>(
                self,
                mut seq: A,
            ) -> Result<Confidences, A::Error> {
                use serde::de::Error;
                let mut levels = Vec::new();
                while let Some(v) = seq.next_element::<f64>()? {
                    levels.push(check_confidence(v).map_err(A::Error::custom)?);
                }
                if levels.is_empty() {
                    return Err(A::Error::custom("the list of confidence levels is empty"));
                }
                let mut sorted = levels.clone();
                sorted.sort_by(f64::total_cmp);
                sorted.dedup();
                if sorted != levels {
                    return Err(A::Error::custom(
                        "list confidence levels once each, lowest first, e.g. [0.95, 0.99]",
                    ));
                }
                Ok(Confidences(levels))
            }
        }
        deserializer.deserialize_any(V)
    }
}

/// A percentage strictly between 0 and 100.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Percent(pub f64);

impl<'de> Deserialize<'de> for Percent {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        deserializer.deserialize_any(NumberVisitor(
            "a percentile between 0 and 100, such as 95",
            |v| {
                (v > 0.0 && v < 100.0)
                    .then_some(Percent(v))
                    .ok_or_else(|| format!("{v} is not a percentile between 0 and 100"))
            },
        ))
    }
}

/// The rule that chooses the number of kept components.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Keep {
    /// A fixed count.
    Count(NonZeroUsize),
    /// The smallest count whose cumulative share of variance reaches the share.
    Variance(Share),
    /// Components whose eigenvalue exceeds the mean eigenvalue (Kaiser 1960).
    Kaiser,
    /// Components that explain more than the broken-stick expectation
    /// (Frontier 1976; Jackson 1993).
    BrokenStick,
    /// Components whose eigenvalue exceeds a percentile of those of random tables
    /// of the same shape (Horn 1965).
    ParallelAnalysis,
    /// The count with the best cross-validated prediction of held-out cells
    /// (Bro, Kjeldahl, Smilde & Kiers 2008).
    CrossValidation,
}

/// The number of kept components when the recipe does not say.
pub const DEFAULT_KEEP: usize = 2;
/// The largest number of computed components when the recipe does not say.
pub const DEFAULT_COMPUTE: usize = 10;

const KEEP_EXPECTED: &str = "a component count such as 3, { variance = 0.9 }, \"kaiser\", \"broken-stick\", \"parallel-analysis\" or \"cross-validation\"";

impl<'de> Deserialize<'de> for Keep {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        deserializer.deserialize_any(KeepVisitor)
    }
}

struct KeepVisitor;

impl<'de> serde::de::Visitor<'de> for KeepVisitor {
    type Value = Keep;

    fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
        f.write_str(KEEP_EXPECTED)
    }

    fn visit_i64<E: serde::de::Error>(self, v: i64) -> Result<Keep, E> {
        usize::try_from(v)
            .ok()
            .and_then(NonZeroUsize::new)
            .map(Keep::Count)
            .ok_or_else(|| {
                E::custom(format!(
                    "keep = {v} is not a positive count; expected {KEEP_EXPECTED}"
                ))
            })
    }

    fn visit_str<E: serde::de::Error>(self, v: &str) -> Result<Keep, E> {
        match v {
            "kaiser" => Ok(Keep::Kaiser),
            "broken-stick" => Ok(Keep::BrokenStick),
            "parallel-analysis" => Ok(Keep::ParallelAnalysis),
            "cross-validation" => Ok(Keep::CrossValidation),
            _ => Err(E::custom(format!(
                "unknown rule `{v}` for keep; expected {KEEP_EXPECTED}"
            ))),
        }
    }

    fn visit_map<A: serde::de::MapAccess<'de>>(self, mut map: A) -> Result<Keep, A::Error> {
        use serde::de::Error;
        let mut share = None;
        while let Some(key) = map.next_key::<String>()? {
            match key.as_str() {
                "variance" => {
                    let s = map.next_value::<Share>()?;
                    if s.0 <= 0.0 {
                        return Err(A::Error::custom(format!(
                            "keep = {{ variance = {} }} would keep no component; expected a share above 0 and at most 1, such as {{ variance = 0.9 }}",
                            s.0
                        )));
                    }
                    share = Some(s)
                }
                other => {
                    return Err(A::Error::custom(format!(
                        "unknown key `{other}` in keep; expected {KEEP_EXPECTED}"
                    )));
                }
            }
        }
        share.map(Keep::Variance).ok_or_else(|| {
            A::Error::custom(format!(
                "keep table needs `variance`; expected {KEEP_EXPECTED}"
            ))
        })
    }
}

/// `[output]`: where the results folder goes.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawOutput {
    pub folder: Spanned<String>,
}

/// A share between 0 and 1 inclusive.
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd, Serialize)]
#[serde(into = "f64")]
pub struct Share(pub f64);

impl From<Share> for f64 {
    fn from(s: Share) -> f64 {
        s.0
    }
}

impl<'de> Deserialize<'de> for Share {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        deserializer.deserialize_any(NumberVisitor("a number from 0 to 1", |v| {
            (0.0..=1.0)
                .contains(&v)
                .then_some(Share(v))
                .ok_or_else(|| format!("{v} is not a share; expected a number from 0 to 1"))
        }))
    }
}

/// A whole number (the recipe format).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Whole(pub i64);

impl<'de> Deserialize<'de> for Whole {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        deserializer.deserialize_any(WholeVisitor("a whole number such as 1", |v| {
            i64::try_from(v)
                .map(Whole)
                .map_err(|_| format!("{v} is not a whole number such as 1"))
        }))
    }
}

/// A positive whole number (a count of components).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct Count(pub NonZeroUsize);

impl<'de> Deserialize<'de> for Count {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        deserializer.deserialize_any(WholeVisitor("a positive whole number such as 10", |v| {
            usize::try_from(v)
                .ok()
                .and_then(NonZeroUsize::new)
                .map(Count)
                .ok_or_else(|| {
                    format!("{v} is not a positive whole number; expected a count such as 10")
                })
        }))
    }
}

/// Reads a TOML number (integer or float) and checks it, so that a wrong type is
/// reported in the recipe's words ("expected a number from 0 to 1") rather than
/// as a Rust type.
struct NumberVisitor<T>(&'static str, fn(f64) -> Result<T, String>);

impl<'de, T> serde::de::Visitor<'de> for NumberVisitor<T> {
    type Value = T;

    fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
        f.write_str(self.0)
    }

    fn visit_i64<E: serde::de::Error>(self, v: i64) -> Result<T, E> {
        (self.1)(v as f64).map_err(E::custom)
    }

    fn visit_u64<E: serde::de::Error>(self, v: u64) -> Result<T, E> {
        (self.1)(v as f64).map_err(E::custom)
    }

    fn visit_f64<E: serde::de::Error>(self, v: f64) -> Result<T, E> {
        (self.1)(v).map_err(E::custom)
    }
}

/// Reads a TOML integer and checks it. A float is refused even when it is
/// whole (`1e3`, `10.0`): a count is written as an integer, and accepting a
/// float would hide a value that was meant as a share or a typo of one.
struct WholeVisitor<T>(&'static str, fn(i128) -> Result<T, String>);

impl<'de, T> serde::de::Visitor<'de> for WholeVisitor<T> {
    type Value = T;

    fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
        f.write_str(self.0)
    }

    fn visit_i64<E: serde::de::Error>(self, v: i64) -> Result<T, E> {
        (self.1)(i128::from(v)).map_err(E::custom)
    }

    fn visit_u64<E: serde::de::Error>(self, v: u64) -> Result<T, E> {
        (self.1)(i128::from(v)).map_err(E::custom)
    }

    fn visit_f64<E: serde::de::Error>(self, v: f64) -> Result<T, E> {
        let expected = self.0;
        Err(E::custom(if v.fract() == 0.0 && v.abs() < 1e15 {
            format!(
                "{v:?} is written as a decimal number (with a point or an exponent) and is not {expected}: write it as {}",
                v as i64
            )
        } else {
            format!("{v} is not {expected}; write a count without a decimal point or exponent")
        }))
    }
}

/// A field delimiter: a single ASCII character.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(try_from = "String")]
pub struct Delimiter(pub u8);

impl TryFrom<String> for Delimiter {
    type Error = String;
    fn try_from(v: String) -> Result<Self, String> {
        match v.as_bytes() {
            [b] if b.is_ascii() && *b != b'"' && *b != b'\n' && *b != b'\r' => Ok(Delimiter(*b)),
            _ => Err(format!(
                "delimiter `{v}` is not one ASCII character; expected e.g. \",\", \";\", \"\\t\" or \"|\""
            )),
        }
    }
}

/// A SHA-256 digest written as 64 hexadecimal digits.
#[derive(Debug, Clone, PartialEq, Eq, Deserialize)]
#[serde(try_from = "String")]
pub struct Sha256Hex(pub String);

impl TryFrom<String> for Sha256Hex {
    type Error = String;
    fn try_from(v: String) -> Result<Self, String> {
        if v.len() == 64 && v.bytes().all(|b| b.is_ascii_hexdigit()) {
            Ok(Sha256Hex(v.to_ascii_lowercase()))
        } else {
            Err(format!(
                "`{v}` is not a SHA-256 digest; expected 64 hexadecimal digits"
            ))
        }
    }
}
