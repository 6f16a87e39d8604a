//! The recipe sections that prepare the data: `[missing]`, `[transform]` and
//! `[scaling]`.

use super::values::{Count, NumberVisitor, Share};
use serde::{Deserialize, Deserializer, Serialize};
use std::num::NonZeroUsize;
use toml::Spanned;

/// `[missing]`: what to do with empty cells.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawMissing {
    #[serde(default)]
    pub method: MissingMethod,
    #[serde(default = "default_max_feature_missing")]
    pub max_feature_missing: Share,
    /// Only with `method = "iterative-pca"` (see `super::applies`).
    pub iterative_pca: Option<Spanned<RawIterative>>,
    /// Only with `method = "knn"` (see `super::applies`).
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
    /// Stop when ‖F(x) − x‖₂ / ‖F(x)‖₂ over the filled cells falls below this.
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
    Tolerance(1e-12)
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

/// A tolerance from [`Tolerance::SMALLEST`] up to (not including) 1.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Tolerance(pub f64);

impl Tolerance {
    /// A relative change below this is rounding (a few units in the last place
    /// of a double): a smaller tolerance could never be met.
    pub const SMALLEST: f64 = 1e-15;
}

impl<'de> Deserialize<'de> for Tolerance {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        deserializer.deserialize_any(NumberVisitor(
            "a small positive number such as 1e-12",
            |v| {
                (Tolerance::SMALLEST..1.0)
                    .contains(&v)
                    .then_some(Tolerance(v))
                    .ok_or_else(|| {
                        format!(
                            "{} is not a tolerance; expected a number from 1e-15 (below it, rounding would never let the fill stop) up to 1",
                            crate::text::number(v)
                        )
                    })
            },
        ))
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
    /// Only with a dividing method (see `super::applies`).
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
