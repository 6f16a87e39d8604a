//! Root finding for quantiles: safeguarded Newton steps inside a bracket that
//! always shrinks, with bisection on the bit pattern of the doubles as fallback.
//!
//! Positive doubles are ordered like their bit patterns, so halving the distance
//! between the bit patterns of the bracket ends pins any root in [0, +∞] to one
//! ulp within 64 halvings, whatever its scale (1e-300 or 1e300). Newton steps do
//! the work near the root (the quantile functions solve g = ln(tail/p), whose
//! derivative is density/tail); a step is refused and replaced by a halving when it
//! would leave the bracket or when the previous Newton step did not at least halve
//! |g|. This is the safeguarded Newton–bisection hybrid of Press et al. (1992),
//! *Numerical Recipes in C*, 2nd ed., §9.4 (`rtsafe`), with the bisection done on
//! bit patterns. The number of evaluations is bounded, and it depends only on the
//! inputs.

/// At most this many evaluations of the function (each step is either a halving,
/// which happens at most 64 times, or a Newton step that halved |g|).
const MAX_EVALUATIONS: usize = 400;
/// A Newton step this small (relative) ends the search: the next one would be
/// below rounding, since convergence is quadratic.
const STEP_TOLERANCE: f64 = 4.0 * f64::EPSILON;

/// The midpoint of two non-negative doubles (or +∞) in bit-pattern order.
fn bit_midpoint(lo: f64, hi: f64) -> f64 {
    let (a, b) = (lo.to_bits(), hi.to_bits());
    f64::from_bits(a + (b - a) / 2)
}

/// Finds t with g(t) = 0 for an increasing g on [lo, hi], 0 ≤ lo < hi ≤ +∞,
/// given g(lo) < 0 < g(hi). `eval(t)` returns (g(t), g′(t)); `starts` are first
/// guesses, tried in order (those outside the open bracket are skipped), the one
/// with the smallest |g| becoming the first Newton point.
pub(crate) fn increasing_root(
    eval: impl Fn(f64) -> (f64, f64),
    mut lo: f64,
    mut g_lo: f64,
    mut hi: f64,
    mut g_hi: f64,
    starts: &[f64],
) -> f64 {
    debug_assert!(lo >= 0.0 && lo < hi && g_lo < 0.0 && g_hi > 0.0);
    let mut evaluations = 0;
    // Current point, its value and derivative.
    let mut best: Option<(f64, f64, f64)> = None;
    for &t in starts {
        if !(t > lo && t < hi) {
            continue;
        }
        let (g, dg) = eval(t);
        evaluations += 1;
        if g == 0.0 {
            return t;
        }
        if g < 0.0 {
            (lo, g_lo) = (t, g);
        } else {
            (hi, g_hi) = (t, g);
        }
        if best.is_none_or(|(_, gb, _)| g.abs() < gb.abs()) {
            best = Some((t, g, dg));
        }
    }
    let (mut t, mut g, mut dg) = match best {
        Some(b) => b,
        None => {
            let t = bit_midpoint(lo, hi);
            let (g, dg) = eval(t);
            evaluations += 1;
            if g == 0.0 {
                return t;
            }
            if g < 0.0 {
                (lo, g_lo) = (t, g);
            } else {
                (hi, g_hi) = (t, g);
            }
            (t, g, dg)
        }
    };
    // |g| before the last Newton step, or None if the last step was a halving.
    let mut before_newton: Option<f64> = None;
    while evaluations < MAX_EVALUATIONS {
        if hi.to_bits() - lo.to_bits() <= 1 {
            break;
        }
        let newton_ok = before_newton.is_none_or(|b| g.abs() <= 0.5 * b);
        let step = g / dg;
        let candidate = t - step;
        let next = if newton_ok && step.is_finite() && candidate > lo && candidate < hi {
            if step.abs() <= STEP_TOLERANCE * candidate.abs() {
                return candidate;
            }
            before_newton = Some(g.abs());
            candidate
        } else {
            before_newton = None;
            bit_midpoint(lo, hi)
        };
        t = next;
        (g, dg) = eval(t);
        evaluations += 1;
        if g == 0.0 {
            return t;
        }
        if g < 0.0 {
            (lo, g_lo) = (t, g);
        } else {
            (hi, g_hi) = (t, g);
        }
    }
    if -g_lo <= g_hi { lo } else { hi }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bit_midpoint_spans_scales() {
        let m = bit_midpoint(0.0, f64::INFINITY);
        assert!(m.is_finite() && m > 1.0 && m < 4.0);
        let m = bit_midpoint(1.0, 2.0);
        assert!(m > 1.0 && m < 2.0);
        assert_eq!(
            bit_midpoint(1.0, f64::from_bits(1.0f64.to_bits() + 2)),
            f64::from_bits(1.0f64.to_bits() + 1)
        );
    }

    #[test]
    fn finds_cube_root_of_two_to_the_last_bit() {
        // g(t) = t³ − 2 on [0, ∞); 2^(1/3) = 1.2599210498948732 (correctly rounded).
        let root = increasing_root(
            |t| (t * t * t - 2.0, 3.0 * t * t),
            0.0,
            -2.0,
            f64::INFINITY,
            f64::INFINITY,
            &[],
        );
        assert!((root - 1.259_921_049_894_873_2).abs() <= 2.3e-16, "{root}");
    }

    #[test]
    fn survives_a_useless_derivative() {
        // A derivative of zero (or infinite) must fall back to halving.
        let root = increasing_root(|t| (t - 1e-200, 0.0), 0.0, -1e-200, 1.0, 1.0, &[0.5]);
        assert_eq!(root, 1e-200);
        let root = increasing_root(|t| (t - 3.0, f64::INFINITY), 0.0, -3.0, 1e300, 1.0, &[]);
        assert_eq!(root, 3.0);
    }
}
