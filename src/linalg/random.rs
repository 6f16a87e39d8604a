//! Seeded random numbers that are the same on every machine and thread count.
//!
//! The stream is ChaCha8 (`rand_chacha`, portable and value-stable); replicate r
//! uses stream r of the recipe's seed, so replicates can run on any thread in any
//! order. Integers in a range and normal variates are derived here rather than
//! through a distribution library, so that no library update or platform maths
//! routine can change a value.

use rand_chacha::ChaCha8Rng;
use rand_core::{Rng, SeedableRng};

/// A reproducible random stream.
pub struct Stream(ChaCha8Rng);

impl Stream {
    /// Stream number `stream` of `seed`.
    pub fn new(seed: u64, stream: u64) -> Stream {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        rng.set_stream(stream);
        Stream(rng)
    }

    /// A uniform integer in 0..n (n > 0), by rejection so every value is equally likely.
    pub fn below(&mut self, n: u64) -> u64 {
        let zone = u64::MAX - (u64::MAX % n);
        loop {
            let v = self.0.next_u64();
            if v < zone {
                return v % n;
            }
        }
    }

    /// A uniform value in (0, 1].
    fn open_unit(&mut self) -> f64 {
        ((self.0.next_u64() >> 11) + 1) as f64 / (1u64 << 53) as f64
    }

    /// Two independent standard normal values (Box & Muller 1958, "A note on the
    /// generation of random normal deviates", Ann. Math. Stat. 29:610–611), with
    /// `libm` for the logarithm and trigonometry.
    pub fn normal_pair(&mut self) -> (f64, f64) {
        let r = (-2.0 * libm::log(self.open_unit())).sqrt();
        let angle = 2.0 * std::f64::consts::PI * self.open_unit();
        (r * libm::cos(angle), r * libm::sin(angle))
    }

    /// Shuffles `values` in place (Fisher & Yates, as given by Durstenfeld 1964).
    pub fn shuffle<T>(&mut self, values: &mut [T]) {
        for i in (1..values.len()).rev() {
            let j = self.below(i as u64 + 1) as usize;
            values.swap(i, j);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn streams_are_reproducible_and_distinct() {
        let a: Vec<u64> = (0..5)
            .map({
                let mut s = Stream::new(7, 0);
                move |_| s.below(1000)
            })
            .collect();
        let b: Vec<u64> = (0..5)
            .map({
                let mut s = Stream::new(7, 0);
                move |_| s.below(1000)
            })
            .collect();
        let c: Vec<u64> = (0..5)
            .map({
                let mut s = Stream::new(7, 1);
                move |_| s.below(1000)
            })
            .collect();
        assert_eq!(a, b);
        assert_ne!(a, c);
    }

    #[test]
    fn normal_values_have_unit_variance() {
        let mut s = Stream::new(1, 0);
        let mut sum = 0.0;
        let mut sq = 0.0;
        let n = 20_000;
        for _ in 0..n / 2 {
            let (x, y) = s.normal_pair();
            sum += x + y;
            sq += x * x + y * y;
        }
        let mean = sum / n as f64;
        let var = sq / n as f64 - mean * mean;
        // Standard errors: 1/√n ≈ 0.007 for the mean, √(2/n) ≈ 0.01 for the variance.
        assert!(mean.abs() < 0.03, "{mean}");
        assert!((var - 1.0).abs() < 0.05, "{var}");
    }

    #[test]
    fn shuffle_is_a_permutation() {
        let mut v: Vec<u32> = (0..100).collect();
        Stream::new(3, 9).shuffle(&mut v);
        let mut sorted = v.clone();
        sorted.sort();
        assert_eq!(sorted, (0..100).collect::<Vec<_>>());
        assert_ne!(v, sorted);
    }
}
