//! The recipe sections of the analysis: `[components]` (with its randomized,
//! parallel-analysis and cross-validation tables) and `[diagnostics]`.

use super::values::{Count, NumberVisitor, Share, WholeVisitor, check_confidence};
use serde::{Deserialize, Deserializer, Serialize};
use std::num::NonZeroUsize;
use toml::Spanned;

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
    /// Only with `keep = "parallel-analysis"` (see `super::applies`).
    pub parallel_analysis: Option<Spanned<RawParallel>>,
    /// Only with `keep = "cross-validation"` (see `super::applies`).
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
    /// Every eigenvalue and loading from the singular values of the scaled
    /// data (a QR in fixed row blocks, then the triangular factor's singular
    /// values): the smallest eigenvalues keep their digits.
    Qr,
    /// Only the leading components, from a seeded random sketch of the data
    /// (Halko, Martinsson & Tropp 2011); for wide or large tables.
    Randomized,
}

impl DecompositionMethod {
    pub fn name(self) -> &'static str {
        match self {
            DecompositionMethod::Exact => "exact",
            DecompositionMethod::Randomized => "randomized",
            DecompositionMethod::Qr => "qr",
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
