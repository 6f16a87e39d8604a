//! The normal, χ², beta and F distributions: CDF, survival function (upper tail)
//! and quantile, all in double precision and deterministic.
//!
//! Conventions: `*_cdf(x)` is P(X ≤ x), `*_sf(x)` is P(X > x) computed directly (no
//! `1 − cdf` cancellation in the upper tail), and `*_quantile(p)` is the x with
//! P(X ≤ x) = p. A quantile at p > ½ is found by matching the upper tail
//! 1 − p, which is exact in floating point for p ≥ ½, so p = 1 − 1e-12 is handled
//! with its full accuracy. p = 0 and p = 1 give the ends of the support (±∞ for
//! the normal distribution, 0 and +∞ for χ² and F, 0 and 1 for beta).
//!
//! Degrees of freedom and beta shapes may be any real number in (0, 1e10].

use super::solve::increasing_root;
use super::special::{beta_lambda, beta_pq, gamma_pq, ln_gamma_unchecked};
use super::{StatsError, check_number, check_parameter, check_probability};
use std::f64::consts::{FRAC_1_SQRT_2, FRAC_2_SQRT_PI};

/// The part of 1/√2 that `FRAC_1_SQRT_2` misses: 1/√2 = FRAC_1_SQRT_2 + this
/// (to about 1e-33; computed with mpmath at 200 bits).
const FRAC_1_SQRT_2_LOW: f64 = -4.833_646_656_726_457e-17;

/// Standard normal CDF Φ(x). Any x that is not NaN; Φ(−∞) = 0, Φ(∞) = 1.
///
/// Φ(x) = ½ erfc(−x/√2) with `libm::erfc` (Sun/FreeBSD `s_erf.c`). Rounding
/// −x/√2 to a double would cost x²·ε relative accuracy in the far lower tail
/// (1.6e-13 at x = −38), so the rounding error δ is recovered exactly with a fused
/// multiply-add and a two-part 1/√2 and corrected to first order:
/// erfc(z + δ) ≈ erfc(z) − δ·(2/√π)·e^(−z²).
pub fn normal_cdf(x: f64) -> Result<f64, StatsError> {
    let x = check_number("x", x)?;
    Ok(phi(x))
}

/// Standard normal upper tail 1 − Φ(x) = Φ(−x), exact by symmetry.
pub fn normal_sf(x: f64) -> Result<f64, StatsError> {
    let x = check_number("x", x)?;
    Ok(phi(-x))
}

fn phi(x: f64) -> f64 {
    if x.is_infinite() {
        return if x > 0.0 { 1.0 } else { 0.0 };
    }
    let z = -x * FRAC_1_SQRT_2;
    let delta = libm::fma(-x, FRAC_1_SQRT_2, -z) + (-x) * FRAC_1_SQRT_2_LOW;
    let erfc = libm::erfc(z);
    0.5 * (erfc - delta * FRAC_2_SQRT_PI * libm::exp(-z * z))
}

/// Standard normal quantile Φ⁻¹(p) for p in [0, 1].
///
/// Wichura (1988), "Algorithm AS 241: The percentage points of the normal
/// distribution", *Applied Statistics* 37:477–484, function PPND16 (rational
/// approximations of degree 7, relative accuracy about 1e-16), with coefficients as
/// printed there. For p > ½ the algorithm works with 1 − p, exact for such p.
pub fn normal_quantile(p: f64) -> Result<f64, StatsError> {
    let p = check_probability("p", p)?;
    Ok(if p == 0.0 {
        f64::NEG_INFINITY
    } else if p == 1.0 {
        f64::INFINITY
    } else {
        as241(p)
    })
}

/// PPND16 of Wichura (1988) for 0 < p < 1.
#[allow(clippy::excessive_precision)] // coefficients as published (20 digits)
fn as241(p: f64) -> f64 {
    const A: [f64; 8] = [
        3.3871328727963666080e0,
        1.3314166789178437745e2,
        1.9715909503065514427e3,
        1.3731693765509461125e4,
        4.5921953931549871457e4,
        6.7265770927008700853e4,
        3.3430575583588128105e4,
        2.5090809287301226727e3,
    ];
    const B: [f64; 8] = [
        1.0,
        4.2313330701600911252e1,
        6.8718700749205790830e2,
        5.3941960214247511077e3,
        2.1213794301586595867e4,
        3.9307895800092710610e4,
        2.8729085735721942674e4,
        5.2264952788528545610e3,
    ];
    const C: [f64; 8] = [
        1.42343711074968357734e0,
        4.63033784615654529590e0,
        5.76949722146069140550e0,
        3.64784832476320460504e0,
        1.27045825245236838258e0,
        2.41780725177450611770e-1,
        2.27238449892691845833e-2,
        7.74545014278341407640e-4,
    ];
    const D: [f64; 8] = [
        1.0,
        2.05319162663775882187e0,
        1.67638483018380384940e0,
        6.89767334985100004550e-1,
        1.48103976427480074590e-1,
        1.51986665636164571966e-2,
        5.47593808499534494600e-4,
        1.05075007164441684324e-9,
    ];
    const E: [f64; 8] = [
        6.65790464350110377720e0,
        5.46378491116411436990e0,
        1.78482653991729133580e0,
        2.96560571828504891230e-1,
        2.65321895265761230930e-2,
        1.24266094738807843860e-3,
        2.71155556874348757815e-5,
        2.01033439929228813265e-7,
    ];
    const F: [f64; 8] = [
        1.0,
        5.99832206555887937690e-1,
        1.36929880922735805310e-1,
        1.48753612908506148525e-2,
        7.86869131145613259100e-4,
        1.84631831751005468180e-5,
        1.42151175831644588870e-7,
        2.04426310338993978564e-15,
    ];
    fn poly(c: &[f64; 8], x: f64) -> f64 {
        let mut s = c[7];
        for k in (0..7).rev() {
            s = s * x + c[k];
        }
        s
    }
    let q = p - 0.5;
    if q.abs() <= 0.425 {
        let r = 0.180625 - q * q;
        return q * poly(&A, r) / poly(&B, r);
    }
    let tail = if q < 0.0 { p } else { 1.0 - p };
    let r = libm::sqrt(-libm::log(tail));
    let value = if r <= 5.0 {
        let r = r - 1.6;
        poly(&C, r) / poly(&D, r)
    } else {
        let r = r - 5.0;
        poly(&E, r) / poly(&F, r)
    };
    if q < 0.0 { -value } else { value }
}

/// χ² CDF P(X ≤ x) with `df` degrees of freedom: P(df/2, x/2), the regularized
/// incomplete gamma function ([`super::gamma_p`]). x ≤ 0 gives 0.
pub fn chi2_cdf(x: f64, df: f64) -> Result<f64, StatsError> {
    let df = check_parameter("df", df)?;
    let x = check_number("x", x)?;
    Ok(gamma_pq(0.5 * df, 0.5 * x).0)
}

/// χ² upper tail P(X > x) = Q(df/2, x/2), computed directly.
pub fn chi2_sf(x: f64, df: f64) -> Result<f64, StatsError> {
    let df = check_parameter("df", df)?;
    let x = check_number("x", x)?;
    Ok(gamma_pq(0.5 * df, 0.5 * x).1)
}

/// χ² quantile: the x with P(X ≤ x) = p, for p in [0, 1] and df in (0, 1e10].
///
/// Starting points: Wilson & Hilferty (1931), *PNAS* 17:684–688,
/// x ≈ ν(1 − 2/(9ν) + z√(2/(9ν)))³, and, for the lower tail, the leading term of
/// the series, P(a, t) ≈ tᵃ/Γ(a + 1). They are refined by safeguarded Newton
/// steps on ln(P(x)/p) (or on the upper tail when p > ½) to full precision; see
/// the `solve` module.
pub fn chi2_quantile(p: f64, df: f64) -> Result<f64, StatsError> {
    let p = check_probability("p", p)?;
    let df = check_parameter("df", df)?;
    if p == 0.0 {
        return Ok(0.0);
    }
    if p == 1.0 {
        return Ok(f64::INFINITY);
    }
    let a = 0.5 * df;
    let q = 1.0 - p;
    let lower = p <= q;
    let eval = |x: f64| {
        let (pp, qq, prefactor) = gamma_pq(a, 0.5 * x);
        log_tail_gap(lower, pp, qq, p, q, prefactor / x)
    };
    let z = as241(p);
    let c = 2.0 / (9.0 * df);
    let base = 1.0 - c + z * libm::sqrt(c);
    let wilson_hilferty = df * base * base * base;
    let series = if lower {
        2.0 * libm::exp((libm::log(p) + ln_gamma_unchecked(a + 1.0)) / a)
    } else {
        f64::NAN
    };
    Ok(increasing_root(
        eval,
        0.0,
        f64::NEG_INFINITY,
        f64::INFINITY,
        f64::INFINITY,
        &[wilson_hilferty, series],
    ))
}

/// The function whose root is a quantile, in log space: ln(F(x)/p) when the lower
/// tail is matched (p ≤ ½), ln((1 − p)/S(x)) otherwise, with its derivative
/// density/tail. Both are increasing in x. Newton steps on the logarithm converge
/// in a few steps even 300 decades into a tail, where Newton on F(x) − p itself
/// would crawl by one e-fold per step. The ratio is formed before the logarithm:
/// ln F − ln p would resolve F/p only to ulp(690) ≈ 1e-13 at p = 1e-300.
fn log_tail_gap(lower: bool, cdf: f64, sf: f64, p: f64, q: f64, density: f64) -> (f64, f64) {
    if lower {
        (libm::log(cdf / p), density / cdf)
    } else {
        (libm::log(q / sf), density / sf)
    }
}

/// Beta CDF Iₓ(a, b) (regularized incomplete beta, [`super::beta_inc`]); x ≤ 0
/// gives 0, x ≥ 1 gives 1.
pub fn beta_cdf(x: f64, a: f64, b: f64) -> Result<f64, StatsError> {
    let (a, b, x) = check_beta(x, a, b)?;
    Ok(beta_at(x, a, b).0)
}

/// Beta upper tail 1 − Iₓ(a, b) = I₁₋ₓ(b, a), computed directly.
pub fn beta_sf(x: f64, a: f64, b: f64) -> Result<f64, StatsError> {
    let (a, b, x) = check_beta(x, a, b)?;
    Ok(beta_at(x, a, b).1)
}

fn check_beta(x: f64, a: f64, b: f64) -> Result<(f64, f64, f64), StatsError> {
    Ok((
        check_parameter("a", a)?,
        check_parameter("b", b)?,
        check_number("x", x)?,
    ))
}

fn beta_at(x: f64, a: f64, b: f64) -> (f64, f64) {
    if x <= 0.0 {
        (0.0, 1.0)
    } else if x >= 1.0 {
        (1.0, 0.0)
    } else {
        let y = 1.0 - x;
        let (w, w1, _) = beta_pq(a, b, x, y, beta_lambda(a, b, x, y));
        (w, w1)
    }
}

/// Beta quantile: the x with Iₓ(a, b) = p, for p in [0, 1] and a, b in (0, 1e10].
///
/// The root is first placed on one side of ½; a root above ½ is found as
/// y = 1 − x from I_y(b, a) = 1 − p, so that x close to 1 (and F quantiles built
/// from it) keep their digits. Starting points: the leading term Iₜ(a, b) ≈
/// tᵃ/(a·B(a, b)) and a normal approximation with the beta mean and variance;
/// refined by safeguarded Newton steps to full precision.
pub fn beta_quantile(p: f64, a: f64, b: f64) -> Result<f64, StatsError> {
    let p = check_probability("p", p)?;
    let a = check_parameter("a", a)?;
    let b = check_parameter("b", b)?;
    Ok(beta_quantile_pair(p, a, b).0)
}

/// (x, 1 − x) with Iₓ(a, b) = p, each accurate to a few ulps.
fn beta_quantile_pair(p: f64, a: f64, b: f64) -> (f64, f64) {
    if p == 0.0 {
        return (0.0, 1.0);
    }
    if p == 1.0 {
        return (1.0, 0.0);
    }
    let q = 1.0 - p;
    let (w, w1, _) = beta_pq(a, b, 0.5, 0.5, 0.5 * (a - b));
    let at_or_below_half = if p <= q { p <= w } else { q >= w1 };
    if at_or_below_half {
        let t = beta_root_below_half(a, b, p, q);
        (t, 1.0 - t)
    } else {
        let t = beta_root_below_half(b, a, q, p);
        (1.0 - t, t)
    }
}

/// The t in (0, ½] with Iₜ(a, b) = p (q = 1 − p), given that one exists.
fn beta_root_below_half(a: f64, b: f64, p: f64, q: f64) -> f64 {
    let lower = p <= q;
    let eval = |t: f64| {
        let y = 1.0 - t;
        let (w, w1, prefactor) = beta_pq(a, b, t, y, beta_lambda(a, b, t, y));
        log_tail_gap(lower, w, w1, p, q, prefactor / (t * y))
    };
    let (g_half, _) = eval(0.5);
    if g_half <= 0.0 {
        return 0.5;
    }
    let leading_term = if lower {
        let ln_beta = ln_gamma_unchecked(a) + ln_gamma_unchecked(b) - ln_gamma_unchecked(a + b);
        libm::exp((libm::log(p) + libm::log(a) + ln_beta) / a)
    } else {
        f64::NAN
    };
    let s = a + b;
    // p or q may be 1 after rounding; take z from the smaller, exact one.
    let z = if lower { as241(p) } else { -as241(q) };
    let normal = a / s + z * libm::sqrt(a * b / (s * s * (s + 1.0)));
    increasing_root(
        eval,
        0.0,
        f64::NEG_INFINITY,
        0.5,
        g_half,
        &[leading_term, normal],
    )
}

/// F CDF P(X ≤ x) with d1 and d2 degrees of freedom: I_u(d1/2, d2/2) with
/// u = d1·x/(d1·x + d2) (Abramowitz & Stegun 1964, eq. 26.6.2). x ≤ 0 gives 0.
pub fn f_cdf(x: f64, d1: f64, d2: f64) -> Result<f64, StatsError> {
    let (d1, d2, x) = check_f(x, d1, d2)?;
    Ok(f_at(x, d1, d2).0)
}

/// F upper tail P(X > x), computed directly (no 1 − cdf).
pub fn f_sf(x: f64, d1: f64, d2: f64) -> Result<f64, StatsError> {
    let (d1, d2, x) = check_f(x, d1, d2)?;
    Ok(f_at(x, d1, d2).1)
}

fn check_f(x: f64, d1: f64, d2: f64) -> Result<(f64, f64, f64), StatsError> {
    Ok((
        check_parameter("d1", d1)?,
        check_parameter("d2", d2)?,
        check_number("x", x)?,
    ))
}

fn f_at(x: f64, d1: f64, d2: f64) -> (f64, f64) {
    if x <= 0.0 {
        return (0.0, 1.0);
    }
    if x.is_infinite() {
        return (1.0, 0.0);
    }
    // u = d1x/(d1x + d2) and 1 − u = d2/(d1x + d2), each formed without
    // subtraction, and λ = d1/2 − (d1 + d2)u/2 = d1(1 − x)/(2(1 + t)) with
    // t = d1x/d2 (or d2((1 − x)/x)/(2(1 + r)) with r = 1/t). This λ is exact to a
    // few ulps even where u lies within rounding of the mean (F(10⁶, 10⁶) near
    // x = 1), where forming it from u would cost about 1e-12 relative accuracy.
    let (u, v, lambda) = if d1 * x <= d2 {
        let t = d1 * x / d2;
        (
            t / (1.0 + t),
            1.0 / (1.0 + t),
            d1 * (1.0 - x) / (2.0 * (1.0 + t)),
        )
    } else {
        let r = d2 / d1 / x;
        (
            1.0 / (1.0 + r),
            r / (1.0 + r),
            d2 * ((1.0 - x) / x) / (2.0 * (1.0 + r)),
        )
    };
    let (w, w1, _) = beta_pq(0.5 * d1, 0.5 * d2, u, v, lambda);
    (w, w1)
}

/// F quantile: the x with P(X ≤ x) = p, for p in [0, 1] and d1, d2 in (0, 1e10].
///
/// Through the beta relation (Abramowitz & Stegun 1964, eq. 26.6.2): with u the
/// [`beta_quantile`] at p of Beta(d1/2, d2/2), x = (d2/d1)·u/(1 − u), where both u
/// and 1 − u come accurately from the beta solver (so the large quantiles at p
/// near 1 do not lose digits to 1 − u).
pub fn f_quantile(p: f64, d1: f64, d2: f64) -> Result<f64, StatsError> {
    let p = check_probability("p", p)?;
    let d1 = check_parameter("d1", d1)?;
    let d2 = check_parameter("d2", d2)?;
    let (u, v) = beta_quantile_pair(p, 0.5 * d1, 0.5 * d2);
    let ratio = u / v;
    let scale = d2 / d1;
    Ok(if ratio == 0.0 || ratio.is_infinite() {
        ratio
    } else if scale.is_finite() && scale > 0.0 {
        ratio * scale
    } else {
        // Extreme d2/d1 (beyond the double range): combine in logarithms.
        libm::exp(libm::log(ratio) + libm::log(d2) - libm::log(d1))
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rel(a: f64, b: f64) -> f64 {
        if a == b { 0.0 } else { ((a - b) / b).abs() }
    }

    #[test]
    fn normal_quantile_printed_values() {
        // z values printed in every normal table (to 4 decimals): 1.6449, 1.9600, 2.5758.
        for (p, printed) in [(0.95, "1.6449"), (0.975, "1.9600"), (0.995, "2.5758")] {
            assert_eq!(format!("{:.4}", normal_quantile(p).unwrap()), printed);
            assert_eq!(
                format!("{:.4}", -normal_quantile(1.0 - p).unwrap()),
                printed
            );
        }
        assert_eq!(normal_quantile(0.5).unwrap(), 0.0);
        assert_eq!(normal_quantile(0.0).unwrap(), f64::NEG_INFINITY);
        assert_eq!(normal_quantile(1.0).unwrap(), f64::INFINITY);
    }

    #[test]
    fn normal_cdf_symmetry_and_known_values() {
        assert_eq!(normal_cdf(0.0).unwrap(), 0.5);
        for x in [0.3, 1.0, 2.5, 6.0] {
            let sum = normal_cdf(x).unwrap() + normal_cdf(-x).unwrap();
            assert!((sum - 1.0).abs() <= 2.0 * f64::EPSILON, "x = {x}");
            assert_eq!(normal_sf(x).unwrap(), normal_cdf(-x).unwrap());
        }
        // Φ(−1) = ½ erfc(1/√2) = 0.15865525393145705 (mpmath, 50 digits).
        assert!(rel(normal_cdf(-1.0).unwrap(), 0.158_655_253_931_457_05) < 1e-15);
        assert_eq!(normal_cdf(f64::NEG_INFINITY).unwrap(), 0.0);
        assert_eq!(normal_cdf(f64::INFINITY).unwrap(), 1.0);
    }

    #[test]
    fn chi2_closed_forms() {
        // df = 2 is the exponential with mean 2: P(X ≤ x) = 1 − e^(−x/2), quantile −2 ln(1 − p).
        for p in [1e-10, 0.01, 0.5, 0.9, 1.0 - 1e-9] {
            let x = chi2_quantile(p, 2.0).unwrap();
            let expected = -2.0 * libm::log1p(-p);
            assert!(rel(x, expected) < 1e-14, "p = {p}: {x} vs {expected}");
        }
        // df = 1: χ² = Z², quantile Φ⁻¹((1 + p)/2)².
        let z = normal_quantile(0.975).unwrap();
        assert!(rel(chi2_quantile(0.95, 1.0).unwrap(), z * z) < 1e-14);
        assert_eq!(chi2_cdf(-1.0, 3.0).unwrap(), 0.0);
        assert_eq!(chi2_sf(f64::INFINITY, 3.0).unwrap(), 0.0);
    }

    #[test]
    fn beta_closed_forms() {
        // Beta(a, 1): quantile p^(1/a); Beta(1, b): 1 − (1 − p)^(1/b).
        for p in [1e-12, 0.2, 0.5, 0.8, 1.0 - 1e-12] {
            let x = beta_quantile(p, 3.5, 1.0).unwrap();
            assert!(rel(x, libm::pow(p, 1.0 / 3.5)) < 1e-14, "p = {p}");
            let x = beta_quantile(p, 1.0, 0.25).unwrap();
            let expected = -libm::expm1(libm::log1p(-p) / 0.25);
            assert!(rel(x, expected) < 1e-13, "p = {p}: {x} vs {expected}");
        }
        assert_eq!(beta_cdf(-0.5, 2.0, 2.0).unwrap(), 0.0);
        assert_eq!(beta_cdf(1.5, 2.0, 2.0).unwrap(), 1.0);
        assert_eq!(beta_quantile(0.5, 3.0, 3.0).unwrap(), 0.5);
    }

    #[test]
    fn f_closed_forms() {
        // F(2, 2): P(X ≤ x) = x/(1 + x), quantile p/(1 − p); F(1, d) = t² with d df.
        for p in [1e-9, 0.3, 0.95, 0.99, 1.0 - 1e-12] {
            let x = f_quantile(p, 2.0, 2.0).unwrap();
            assert!(rel(x, p / (1.0 - p)) < 1e-14, "p = {p}: {x}");
        }
        assert_eq!(f_cdf(0.0, 3.0, 4.0).unwrap(), 0.0);
        assert_eq!(f_cdf(f64::INFINITY, 3.0, 4.0).unwrap(), 1.0);
        assert_eq!(f_quantile(1.0, 3.0, 4.0).unwrap(), f64::INFINITY);
        assert_eq!(f_quantile(0.0, 3.0, 4.0).unwrap(), 0.0);
    }

    #[test]
    fn bad_arguments_are_errors() {
        assert!(matches!(
            normal_quantile(1.5),
            Err(StatsError::Probability { name: "p", .. })
        ));
        assert!(matches!(
            normal_quantile(f64::NAN),
            Err(StatsError::Probability { .. })
        ));
        assert!(matches!(
            normal_cdf(f64::NAN),
            Err(StatsError::NotANumber { name: "x" })
        ));
        assert!(matches!(
            chi2_quantile(0.5, 0.0),
            Err(StatsError::Parameter { name: "df", .. })
        ));
        assert!(matches!(
            chi2_cdf(1.0, f64::NAN),
            Err(StatsError::Parameter { name: "df", .. })
        ));
        assert!(matches!(
            chi2_cdf(1.0, 2e10),
            Err(StatsError::Parameter { name: "df", .. })
        ));
        assert!(matches!(
            beta_quantile(-0.1, 1.0, 1.0),
            Err(StatsError::Probability { .. })
        ));
        assert!(matches!(
            beta_sf(0.5, 1.0, f64::INFINITY),
            Err(StatsError::Parameter { name: "b", .. })
        ));
        assert!(matches!(
            f_quantile(0.5, -1.0, 1.0),
            Err(StatsError::Parameter { name: "d1", .. })
        ));
        assert!(matches!(
            f_cdf(f64::NAN, 1.0, 1.0),
            Err(StatsError::NotANumber { name: "x" })
        ));
    }
}
