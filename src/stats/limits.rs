//! Control limits for Hotelling's T² and the squared prediction error (SPE, Q).
//!
//! Each limit is a pure function of the calibration size, the number of kept
//! components, the residual eigenvalues and a `confidence`. **Convention:**
//! `confidence` is the probability below the limit, so `confidence = 0.95` means
//! α = 0.05 and gives the 95 % quantile (the upper 5 % point). It must lie strictly
//! between 0 and 1.
//!
//! Eigenvalues are those of the covariance (or correlation) matrix with divisor
//! n − 1, the same scale as the T² and SPE statistics they bound.

use super::StatsError;
use super::distributions::{beta_quantile, chi2_quantile, f_quantile, normal_quantile};

/// An input outside a limit formula's domain.
#[derive(Debug, Clone, Copy, PartialEq, thiserror::Error)]
pub enum LimitError {
    #[error(
        "confidence must lie strictly between 0 and 1 (0.95 gives the 95 % limit), got {value}"
    )]
    Confidence { value: f64 },
    #[error("a T² limit needs at least one kept component, got k = 0")]
    NoComponents,
    #[error(
        "the {form} T² limit with k = {k} components needs at least {needed} calibration rows, got n = {n}"
    )]
    TooFewRows {
        form: &'static str,
        n: usize,
        k: usize,
        needed: usize,
    },
    #[error(
        "an SPE limit needs at least one residual eigenvalue, got none (every component is kept)"
    )]
    NoResidualEigenvalues,
    #[error(
        "residual eigenvalue number {position} is {value}; every residual eigenvalue must be positive and finite (leave out the zero eigenvalues beyond the rank)"
    )]
    Eigenvalue { position: usize, value: f64 },
    #[error(
        "the residual eigenvalues are out of range for double precision: θ₃ = Σλ³ = {theta3} (rescale the data)"
    )]
    OutOfRange { theta3: f64 },
    #[error(
        "the Jackson–Mudholkar SPE limit needs h₀ > 0, got h₀ = {h0} (the residual eigenvalues are very unequal; use the Box approximation)"
    )]
    NonPositiveH0 { h0: f64 },
    #[error(
        "the Jackson–Mudholkar SPE limit is undefined at confidence {confidence}: its bracketed term is {base}, not positive (use a higher confidence or the Box approximation)"
    )]
    NonPositiveBase { confidence: f64, base: f64 },
    /// Not expected after the checks above; kept so no failure can pass silently.
    #[error(transparent)]
    Distribution(#[from] StatsError),
}

fn check_confidence(confidence: f64) -> Result<f64, LimitError> {
    if confidence > 0.0 && confidence < 1.0 {
        Ok(confidence)
    } else {
        Err(LimitError::Confidence { value: confidence })
    }
}

/// Upper control limit for T² of the calibration rows themselves (Phase I), for
/// n rows, k kept components (1 ≤ k, n ≥ k + 2).
///
/// Tracy, Young & Mason (1992), "Multivariate control charts for individual
/// observations", *Journal of Quality Technology* 24:88–95: with T² computed from
/// the same rows as the mean and covariance, n·T²/(n − 1)² ~ Beta(k/2, (n − k − 1)/2),
/// so UCL = (n − 1)²/n · Beta₁₋α(k/2, (n − k − 1)/2).
pub fn t2_limit_phase1(n: usize, k: usize, confidence: f64) -> Result<f64, LimitError> {
    let confidence = check_confidence(confidence)?;
    if k == 0 {
        return Err(LimitError::NoComponents);
    }
    if n < k + 2 {
        return Err(LimitError::TooFewRows {
            form: "Phase I (calibration rows)",
            n,
            k,
            needed: k + 2,
        });
    }
    let (n, k) = (n as f64, k as f64);
    let quantile = beta_quantile(confidence, 0.5 * k, 0.5 * (n - k - 1.0))?;
    Ok((n - 1.0) * (n - 1.0) / n * quantile)
}

/// Upper control limit for T² of a new observation, independent of the n
/// calibration rows, for k kept components (1 ≤ k < n).
///
/// NIST/SEMATECH e-Handbook of Statistical Methods, §6.5.4.3.4 (Hotelling T² for
/// future observations): UCL = k(n + 1)(n − 1)/(n² − nk) · F₁₋α(k, n − k).
pub fn t2_limit_new_observation(n: usize, k: usize, confidence: f64) -> Result<f64, LimitError> {
    let confidence = check_confidence(confidence)?;
    if k == 0 {
        return Err(LimitError::NoComponents);
    }
    if n < k + 1 {
        return Err(LimitError::TooFewRows {
            form: "new-observation",
            n,
            k,
            needed: k + 1,
        });
    }
    let (n, k) = (n as f64, k as f64);
    let quantile = f_quantile(confidence, k, n - k)?;
    Ok(k * (n + 1.0) * (n - 1.0) / (n * (n - k)) * quantile)
}

/// Power sums of the residual eigenvalues λⱼ (j > k) and the Jackson–Mudholkar
/// exponent, for reports.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct ResidualMoments {
    /// θ₁ = Σ λⱼ
    pub theta1: f64,
    /// θ₂ = Σ λⱼ²
    pub theta2: f64,
    /// θ₃ = Σ λⱼ³
    pub theta3: f64,
    /// h₀ = 1 − 2θ₁θ₃/(3θ₂²); at most 1/3 (since θ₁θ₃ ≥ θ₂²), and not positive
    /// when one large residual eigenvalue sits on a long tail of small ones (for
    /// one eigenvalue L and small ones summing to S, once S ≳ L/2).
    pub h0: f64,
}

impl ResidualMoments {
    /// θ₁, θ₂, θ₃ and h₀ from the residual eigenvalues (those of the dropped
    /// components, any order; summed in slice order). Every value must be positive
    /// and finite; pass only eigenvalues above the rank cut-off. The formulas are
    /// evaluated through ratios such as θ₂/θ₁, so any eigenvalues whose cubes
    /// are normal doubles (about 1e-102 to 1e102) work.
    /// θ₁ and θ₂ known without the residual eigenvalues themselves (the
    /// randomized method): θ₃ and h₀ are unknown (NaN), so only Box's limit,
    /// which needs θ₁ and θ₂ alone, may be asked of the result.
    pub fn from_first_two(theta1: f64, theta2: f64) -> Result<Self, LimitError> {
        if !(theta1 > 0.0 && theta1.is_finite() && theta2 > 0.0 && theta2.is_finite()) {
            return Err(LimitError::NoResidualEigenvalues);
        }
        Ok(ResidualMoments {
            theta1,
            theta2,
            theta3: f64::NAN,
            h0: f64::NAN,
        })
    }

    pub fn from_eigenvalues(residual_eigenvalues: &[f64]) -> Result<Self, LimitError> {
        if residual_eigenvalues.is_empty() {
            return Err(LimitError::NoResidualEigenvalues);
        }
        let (mut theta1, mut theta2, mut theta3) = (0.0, 0.0, 0.0);
        for (i, &l) in residual_eigenvalues.iter().enumerate() {
            if !(l > 0.0 && l.is_finite()) {
                return Err(LimitError::Eigenvalue {
                    position: i + 1,
                    value: l,
                });
            }
            theta1 += l;
            theta2 += l * l;
            theta3 += l * l * l;
        }
        if !(theta3.is_finite() && theta3 >= f64::MIN_POSITIVE) {
            return Err(LimitError::OutOfRange { theta3 });
        }
        // 1 − 2θ₁θ₃/(3θ₂²), as ratios so that θ₂² cannot overflow or underflow.
        let h0 = 1.0 - 2.0 / 3.0 * (theta1 / theta2) * (theta3 / theta2);
        Ok(ResidualMoments {
            theta1,
            theta2,
            theta3,
            h0,
        })
    }

    /// Box's scale g = θ₂/θ₁.
    pub fn box_g(&self) -> f64 {
        self.theta2 / self.theta1
    }

    /// Box's degrees of freedom h = θ₁²/θ₂ (at least 1).
    pub fn box_h(&self) -> f64 {
        self.theta1 * (self.theta1 / self.theta2)
    }

    /// The Jackson–Mudholkar SPE limit for these moments; see
    /// [`spe_limit_jackson_mudholkar`].
    pub fn jackson_mudholkar(&self, confidence: f64) -> Result<f64, LimitError> {
        let confidence = check_confidence(confidence)?;
        let Self {
            theta1, theta2, h0, ..
        } = *self;
        if h0 <= 0.0 {
            return Err(LimitError::NonPositiveH0 { h0 });
        }
        let z = normal_quantile(confidence)?;
        // z√(2θ₂h₀²)/θ₁ + 1 + θ₂h₀(h₀ − 1)/θ₁², in an order that cannot overflow.
        let base = z * h0 * libm::sqrt(2.0 * theta2) / theta1
            + 1.0
            + (theta2 / theta1) * h0 * (h0 - 1.0) / theta1;
        if base <= 0.0 {
            return Err(LimitError::NonPositiveBase { confidence, base });
        }
        Ok(theta1 * libm::pow(base, 1.0 / h0))
    }

    /// The Box scaled-χ² SPE limit for these moments; see [`spe_limit_box`].
    pub fn box_limit(&self, confidence: f64) -> Result<f64, LimitError> {
        let confidence = check_confidence(confidence)?;
        Ok(self.box_g() * chi2_quantile(confidence, self.box_h())?)
    }
}

/// SPE (Q) limit of Jackson & Mudholkar (1979), "Control procedures for residuals
/// associated with principal component analysis", *Technometrics* 21:341–349:
///
/// Q_α = θ₁ [ z_α √(2θ₂h₀²)/θ₁ + 1 + θ₂h₀(h₀ − 1)/θ₁² ]^(1/h₀),
///
/// with θᵢ = Σ_{j>k} λⱼⁱ, h₀ = 1 − 2θ₁θ₃/(3θ₂²) and z_α the upper α point of the
/// standard normal (`normal_quantile(confidence)`). Needs h₀ > 0 and a positive
/// bracketed term; otherwise an error suggests [`spe_limit_box`].
pub fn spe_limit_jackson_mudholkar(
    residual_eigenvalues: &[f64],
    confidence: f64,
) -> Result<f64, LimitError> {
    check_confidence(confidence)?;
    ResidualMoments::from_eigenvalues(residual_eigenvalues)?.jackson_mudholkar(confidence)
}

/// SPE (Q) limit from Box's scaled χ² approximation: Box (1954), "Some theorems on
/// quadratic forms applied in the study of analysis of variance problems, I",
/// *Annals of Mathematical Statistics* 25:290–302 (a weighted sum of χ² variables
/// matched in mean and variance by g·χ²(h)): Q_α = g·χ²₁₋α(h), g = θ₂/θ₁,
/// h = θ₁²/θ₂ (real-valued degrees of freedom).
pub fn spe_limit_box(residual_eigenvalues: &[f64], confidence: f64) -> Result<f64, LimitError> {
    check_confidence(confidence)?;
    ResidualMoments::from_eigenvalues(residual_eigenvalues)?.box_limit(confidence)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rel(a: f64, b: f64) -> f64 {
        ((a - b) / b).abs()
    }

    #[test]
    fn equal_eigenvalues_give_h0_one_third_and_exact_box() {
        // m equal eigenvalues λ: Q = λ·χ²(m) exactly, Box reproduces it (g = λ, h = m),
        // and h₀ = 1 − 2/3 = 1/3.
        let residual = [2.5; 4];
        let m = ResidualMoments::from_eigenvalues(&residual).unwrap();
        assert!((m.h0 - 1.0 / 3.0).abs() < 1e-15);
        assert!(rel(m.box_g(), 2.5) < 1e-15 && rel(m.box_h(), 4.0) < 1e-15);
        // χ²₀.₉₅(4) = 9.4877 (printed χ² tables).
        let q = spe_limit_box(&residual, 0.95).unwrap();
        assert_eq!(format!("{:.4}", q / 2.5), "9.4877");
        // Jackson–Mudholkar is close to, but not equal to, the exact value.
        let jm = spe_limit_jackson_mudholkar(&residual, 0.95).unwrap();
        assert!(rel(jm, q) < 0.01, "{jm} vs {q}");
    }

    #[test]
    fn phase1_limit_is_below_new_observation_limit() {
        for (n, k) in [(10, 1), (30, 4), (500, 10)] {
            let p1 = t2_limit_phase1(n, k, 0.99).unwrap();
            let p2 = t2_limit_new_observation(n, k, 0.99).unwrap();
            assert!(p1 < p2, "n = {n}, k = {k}");
            // Phase I T² is bounded by (n − 1)²/n.
            let bound = ((n - 1) * (n - 1)) as f64 / n as f64;
            assert!(p1 < bound);
        }
    }

    #[test]
    fn domain_errors() {
        for c in [0.0, 1.0, -0.5, 1.5, f64::NAN] {
            assert!(matches!(
                t2_limit_phase1(20, 2, c),
                Err(LimitError::Confidence { .. })
            ));
            assert!(matches!(
                spe_limit_box(&[1.0], c),
                Err(LimitError::Confidence { .. })
            ));
        }
        assert_eq!(t2_limit_phase1(20, 0, 0.95), Err(LimitError::NoComponents));
        assert!(matches!(
            t2_limit_phase1(4, 3, 0.95),
            Err(LimitError::TooFewRows { needed: 5, .. })
        ));
        assert!(t2_limit_phase1(5, 3, 0.95).is_ok());
        assert!(matches!(
            t2_limit_new_observation(3, 3, 0.95),
            Err(LimitError::TooFewRows { needed: 4, .. })
        ));
        assert!(t2_limit_new_observation(4, 3, 0.95).is_ok());
        assert_eq!(
            ResidualMoments::from_eigenvalues(&[]),
            Err(LimitError::NoResidualEigenvalues)
        );
        assert!(matches!(
            ResidualMoments::from_eigenvalues(&[1.0, 0.0]),
            Err(LimitError::Eigenvalue { position: 2, .. })
        ));
        for out_of_range in [1e200, 1e-110] {
            assert!(matches!(
                ResidualMoments::from_eigenvalues(&[out_of_range]),
                Err(LimitError::OutOfRange { .. })
            ));
        }
    }

    #[test]
    fn limits_scale_with_the_eigenvalues() {
        // Q is in the units of the eigenvalues: scaling all λ by c scales both
        // limits by c, also where θ₂² alone would overflow or underflow.
        let residual = [0.9, 0.5, 0.31, 0.2, 0.05];
        let jm = spe_limit_jackson_mudholkar(&residual, 0.99).unwrap();
        let bx = spe_limit_box(&residual, 0.99).unwrap();
        for c in [1e-90, 1e-30, 1e30, 1e90] {
            let scaled: Vec<f64> = residual.iter().map(|l| l * c).collect();
            let m = ResidualMoments::from_eigenvalues(&scaled).unwrap();
            assert!(
                rel(m.jackson_mudholkar(0.99).unwrap(), jm * c) < 1e-13,
                "c = {c}"
            );
            assert!(rel(m.box_limit(0.99).unwrap(), bx * c) < 1e-13, "c = {c}");
        }
    }

    #[test]
    fn very_unequal_eigenvalues_have_no_jackson_mudholkar_limit() {
        // One eigenvalue 1 and 100 of 0.01: θ₁ = 2, θ₂ = 1.01, θ₃ ≈ 1.0001,
        // h₀ = 1 − 2·2·1.0001/(3·1.0201) < 0.
        let mut residual = vec![1.0];
        residual.extend(std::iter::repeat_n(0.01, 100));
        let err = spe_limit_jackson_mudholkar(&residual, 0.95).unwrap_err();
        assert!(matches!(err, LimitError::NonPositiveH0 { h0 } if h0 < 0.0));
        assert!(spe_limit_box(&residual, 0.95).unwrap().is_finite());
    }
}
