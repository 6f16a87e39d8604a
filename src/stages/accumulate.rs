//! What every statistic over rows has in common: it is fed values a chunk at a
//! time, can be combined with another of its kind, and is read at the end.
//!
//! Each statistic is defined once, in the stage that owns its rule
//! ([`super::missing::Observed`], [`super::missing::Filled`],
//! [`super::scale::Moments`], [`super::scale::Deviations`],
//! [`super::scale::Squares`]), and the analysis (`crate::stream::passes`) feeds
//! that one type chunk by chunk of row-major rows ([`PerFeature`]); a stage's
//! own tests may feed it a whole column. Each feature's sum still adds the rows in
//! row order (from [`crate::linalg::SUM_START`], or in two doubles for the
//! means: [`crate::linalg::sum::Sum`]), so how the rows arrive never
//! changes a bit. Merging floating-point sums is not associative: parts are
//! merged in the dataset's order (`self` holds the rows before `other`'s).

use rayon::prelude::*;

/// A statistic of one feature over rows.
pub trait Statistic: Clone + Send {
    /// What it reports when every row has been added.
    type Report;

    /// Adds the next row's value.
    fn add(&mut self, value: f64);

    /// Adds the rows of `other`, which come after this one's.
    fn merge(&mut self, other: &Self);

    /// What the rows added so far give.
    fn finish(&self) -> Self::Report;

    /// Adds the next rows' values, in order.
    fn push(&mut self, values: &[f64]) {
        for &v in values {
            self.add(v);
        }
    }
}

/// One statistic per feature, fed row-major chunks of rows.
#[derive(Debug, Clone)]
pub struct PerFeature<S> {
    pub features: Vec<S>,
}

impl<S: Statistic> PerFeature<S> {
    pub fn new(features: Vec<S>) -> PerFeature<S> {
        PerFeature { features }
    }

    /// Adds the rows of a chunk: `rows` holds whole rows of one value per
    /// feature, in the features' order.
    pub fn push(&mut self, rows: &[f64]) {
        let q = self.features.len().max(1);
        by_columns(&mut self.features, |from, part| {
            for row in rows.chunks_exact(q) {
                for (s, &v) in part.iter_mut().zip(&row[from..]) {
                    s.add(v);
                }
            }
        });
    }

    /// Adds the rows of `other`, which come after this one's.
    pub fn merge(&mut self, other: &PerFeature<S>) {
        for (s, o) in self.features.iter_mut().zip(&other.features) {
            s.merge(o);
        }
    }

    pub fn finish(&self) -> Vec<S::Report> {
        self.features.iter().map(Statistic::finish).collect()
    }
}

/// Runs `f` on runs of per-feature accumulators at the same time (with the index
/// of each run's first feature). Each feature's sums still take the rows in
/// order, so how the features are split never changes a bit.
pub fn by_columns<T: Send>(items: &mut [T], f: impl Fn(usize, &mut [T]) + Sync) {
    let step = items.len().div_ceil(rayon::current_num_threads()).max(1);
    items
        .par_chunks_mut(step)
        .enumerate()
        .for_each(|(i, part)| f(i * step, part));
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stages::scale::{Deviations, Moments};

    /// The same bits whether a column is pushed whole, row-major in chunks of
    /// any size, or in two parts merged in order where the sums allow it.
    #[test]
    fn chunks_and_columns_give_the_same_bits() {
        let a: Vec<f64> = (0..37).map(|i| (i as f64 * 0.37).sin() * 1e3).collect();
        let b: Vec<f64> = (0..37).map(|i| (i as f64 * 1.1).cos() / 7.0).collect();
        let rows: Vec<f64> = a.iter().zip(&b).flat_map(|(&x, &y)| [x, y]).collect();
        let mut whole = [Moments::new(), Moments::new()];
        whole[0].push(&a);
        whole[1].push(&b);
        for chunk in [1, 5, 37] {
            let mut fed = PerFeature::new(vec![Moments::new(); 2]);
            for part in rows.chunks(2 * chunk) {
                fed.push(part);
            }
            for (got, want) in fed.finish().iter().zip(&whole) {
                let want = want.finish();
                assert_eq!(got.mean.to_bits(), want.mean.to_bits());
                assert_eq!((got.min, got.max), (want.min, want.max));
            }
        }
        let mean = whole[0].finish().mean;
        let mut d = Deviations::about(mean);
        d.push(&a);
        let mut fed = PerFeature::new(vec![Deviations::about(mean)]);
        fed.push(&a);
        assert_eq!(fed.finish()[0].to_bits(), d.finish().to_bits());
        // Merged in order: counts and ranges are exact.
        let (mut first, mut second) = (Moments::new(), Moments::new());
        first.push(&a[..10]);
        second.push(&a[10..]);
        first.merge(&second);
        let (m, w) = (first.finish(), whole[0].finish());
        assert_eq!((m.count, m.min, m.max), (w.count, w.min, w.max));
        assert!((m.mean - w.mean).abs() <= 1e-12 * w.mean.abs().max(1.0));
    }
}
