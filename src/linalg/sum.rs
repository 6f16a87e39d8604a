//! A sum carried in two doubles, so that a mean is correct to within one
//! rounding however large the values' common offset.
//!
//! A plain running sum of n values near 1e8 loses the low bits of each value
//! at every addition; its mean can be several units in the last place off,
//! and centring then moves every value by that error (2e-8 relative of a
//! spread near 1 at an offset of 1e8). Here each addition keeps its rounding
//! error exactly (Knuth's two-sum, Knuth 1997, TAOCP vol. 2, §4.2.2, Theorem B)
//! and the errors are added in a second double (the "cascaded" sum of Ogita,
//! Rump & Oishi 2005, "Accurate sum and dot product", SIAM J. Sci. Comput.
//! 26(6):1955–1988, Algorithm 4.4 `Sum2`): the result is as accurate as if it
//! were summed in twice the precision and then rounded once. The mean divides
//! that two-double sum by n with the exact remainder of the division
//! (Dekker's product, Dekker 1971), so it too is within one rounding of the
//! exact mean of the values.
//!
//! Plain loops without branches or fused multiply-add: the same bits on every
//! CPU. Values are added in row order and parts merged in the dataset's order,
//! so how the rows arrive never changes a bit.

/// A running sum kept as `high + low`, `low` holding the rounding errors of
/// the additions so far.
#[derive(Debug, Clone, Copy)]
pub struct Sum {
    high: f64,
    low: f64,
}

impl Default for Sum {
    fn default() -> Self {
        Sum::new()
    }
}

impl Sum {
    /// Nothing added yet. Starts at [`super::SUM_START`] so that a sum of no
    /// values, or of zeros, has the sign `iter().sum()` gives.
    pub fn new() -> Sum {
        Sum {
            high: super::SUM_START,
            low: 0.0,
        }
    }

    /// Adds the next value.
    #[inline]
    pub fn add(&mut self, v: f64) {
        let (s, e) = two_sum(self.high, v);
        self.high = s;
        self.low += e;
    }

    /// Adds a sum of the values that come after this one's.
    pub fn merge(&mut self, other: &Sum) {
        let (s, e) = two_sum(self.high, other.high);
        self.high = s;
        self.low += e + other.low;
    }

    /// The sum, rounded once to a double. An overflowed sum stays infinite
    /// (its error term is then meaningless), and a sum of zeros keeps its sign.
    pub fn value(&self) -> f64 {
        if !self.high.is_finite() || self.low == 0.0 {
            self.high
        } else {
            self.high + self.low
        }
    }

    /// The sum divided by `count`: (high + low) / n with the remainder of
    /// high / n computed exactly, so the quotient is within one rounding of
    /// the exact one. `NaN` for no values, as 0 / 0.
    pub fn mean(&self, count: usize) -> f64 {
        let n = count as f64;
        let q = self.high / n;
        if !q.is_finite() || q == 0.0 {
            return self.value() / n;
        }
        // high − q·n exactly: q·n = p + e with both parts exact (Dekker), and
        // high − p is exact because p is within a rounding of high.
        let (p, e) = two_product(q, n);
        let remainder = (self.high - p) - e;
        q + (remainder + self.low) / n
    }
}

/// s + e = a + b exactly, s the rounded sum (Knuth's branch-free two-sum).
#[inline]
fn two_sum(a: f64, b: f64) -> (f64, f64) {
    let s = a + b;
    let bb = s - a;
    let e = (a - (s - bb)) + (b - bb);
    (s, e)
}

/// p + e = a · b exactly, p the rounded product (Dekker 1971, with
/// Veltkamp's split; exact unless the product overflows or underflows).
fn two_product(a: f64, b: f64) -> (f64, f64) {
    let p = a * b;
    let (ah, al) = split(a);
    let (bh, bl) = split(b);
    let e = ((ah * bh - p) + ah * bl + al * bh) + al * bl;
    (p, e)
}

/// a = high + low with each half of 26 bits or fewer.
fn split(a: f64) -> (f64, f64) {
    const FACTOR: f64 = 134_217_729.0; // 2^27 + 1
    let c = FACTOR * a;
    let high = c - (c - a);
    (high, a - high)
}

/// The mean of `values`, added in order (see [`Sum::mean`]).
pub fn mean(values: &[f64]) -> f64 {
    let mut s = Sum::new();
    for &v in values {
        s.add(v);
    }
    s.mean(values.len())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// 1e8 ± k·2⁻²⁰ is exactly representable (a unit in the last place of
    /// 1e8 is 2⁻²⁶); the first half adds the k's, the second subtracts them
    /// in another order, so the exact mean is 1e8: the two-double mean finds
    /// it exactly, where the plain running sum is 22 units in the last place
    /// off (the defect: large offsets moved every centred value).
    #[test]
    fn mean_at_an_offset_of_1e8_is_exact() {
        let half = 500;
        let ks: Vec<f64> = (1..=half)
            .map(|i| ((i * 7919) % 2_000_003) as f64 / (1u64 << 20) as f64)
            .collect();
        let values: Vec<f64> = (0..half)
            .map(|i| 1e8 + ks[i])
            .chain((0..half).map(|i| 1e8 - ks[(i * 7) % half]))
            .collect();
        let exact = 1e8;
        assert_eq!(mean(&values), exact);
        let plain = values.iter().sum::<f64>() / 1000.0;
        assert_ne!(plain, exact, "the plain sum is expected to lose bits here");
    }

    /// Cancellation: the plain sum of these values is 0, the exact one 2.
    #[test]
    fn errors_are_kept() {
        let mut s = Sum::new();
        for v in [1e16, 1.0, -1e16, 1.0] {
            s.add(v);
        }
        assert_eq!(s.value(), 2.0);
        assert_eq!(s.mean(4), 0.5);
    }

    /// Merged in order, parts give the exact sum too; no values give NaN and
    /// zeros keep the standard library's sign.
    #[test]
    fn merge_and_edges() {
        let (mut a, mut b) = (Sum::new(), Sum::new());
        a.add(1e16);
        a.add(1.0);
        b.add(-1e16);
        b.add(1.0);
        a.merge(&b);
        assert_eq!(a.value(), 2.0);
        assert!(Sum::new().mean(0).is_nan());
        let empty: f64 = std::iter::empty::<f64>().sum();
        assert_eq!(Sum::new().value().to_bits(), empty.to_bits());
        assert_eq!(mean(&[-0.0, -0.0]).to_bits(), (-0.0f64).to_bits());
        assert_eq!(mean(&[3.0, 3.0, 3.0]), 3.0);
        assert_eq!(mean(&[0.1, 0.2, 0.3]), 0.2);
    }

    /// Against a mean computed exactly in integers: values k · 2⁻²⁰ + 2²⁶
    /// summed exactly as integers, the true mean rounded once.
    #[test]
    fn within_one_rounding_of_the_exact_mean() {
        for n in [3usize, 7, 100, 1023] {
            let ks: Vec<i64> = (0..n as i64).map(|i| (i * 7919) % 104_729).collect();
            let values: Vec<f64> = ks
                .iter()
                .map(|&k| (1i64 << 26) as f64 + k as f64 / (1u64 << 20) as f64)
                .collect();
            let total: i128 = ks.iter().map(|&k| k as i128).sum();
            // The exact mean in units of 2⁻²⁰, plus the offset.
            let exact = (1i64 << 26) as f64 + (total as f64 / n as f64) / (1u64 << 20) as f64;
            let got = mean(&values);
            let ulp = f64::EPSILON * exact;
            assert!((got - exact).abs() <= ulp, "n = {n}: {got} vs {exact}");
        }
    }
}
