//! Invariants of the decomposition on random tables (property tests): whatever
//! the data, loadings are orthonormal, eigenvalues descend and sum to the total
//! variance, score variances equal the eigenvalues, and the route through the
//! n × n matrix (for wide tables) gives the same answer as the p × p route.

use proptest::prelude::*;
use sextant::linalg::Matrix;
use sextant::recipe::raw::{ConstantPolicy, ScalingMethod};
use sextant::stages::decompose::{Route, decompose, scores};
use sextant::stages::scale::scale;
use sextant::stages::{Feature, FeatureData};

fn scaled(rows: usize, cols: usize, values: &[f64], method: ScalingMethod) -> Matrix {
    let features = (0..cols)
        .map(|j| Feature {
            name: format!("f{j}"),
            values: (0..rows).map(|i| values[i * cols + j]).collect(),
            transform: None,
        })
        .collect();
    let data = FeatureData {
        features,
        rows: (0..rows).collect(),
        lines: (0..rows as u64).collect(),
        source: "generated".into(),
    };
    scale(data, method, ConstantPolicy::Error)
        .unwrap()
        .0
        .matrix
        .expect("scaled in memory")
}

/// A random table with some correlation between columns (a low-rank part plus noise).
fn table() -> impl Strategy<Value = (usize, usize, Vec<f64>)> {
    (3usize..25, 2usize..12)
        .prop_flat_map(|(n, p)| {
            (
                Just(n),
                Just(p),
                prop::collection::vec(-10.0f64..10.0, n * p + 2 * n + 2 * p),
            )
        })
        .prop_map(|(n, p, raw)| {
            let (noise, rest) = raw.split_at(n * p);
            let (a, b) = rest.split_at(2 * n);
            let values = (0..n * p)
                .map(|idx| {
                    let (i, j) = (idx / p, idx % p);
                    a[2 * i] * b[2 * j] + a[2 * i + 1] * b[2 * j + 1] + 0.3 * noise[idx]
                })
                .collect();
            (n, p, values)
        })
}

fn close(a: f64, b: f64, tol: f64) -> bool {
    (a - b).abs() <= tol * a.abs().max(b.abs()).max(1.0)
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]

    #[test]
    fn decomposition_invariants((n, p, values) in table()) {
        let z = scaled(n, p, &values, ScalingMethod::Center);
        let d = decompose(&z, true, None).unwrap();
        // Descending, non-negative, summing to the total variance.
        for w in d.eigenvalues.windows(2) {
            prop_assert!(w[0] >= w[1]);
        }
        let sum: f64 = d.eigenvalues.iter().sum();
        prop_assert!(close(sum, d.total_variance, 1e-10), "sum {} total {}", sum, d.total_variance);
        prop_assert!(d.rank <= (n - 1).min(p));
        // Orthonormal loadings.
        let r = d.rank;
        for a in 0..r {
            for b in 0..r {
                let dot: f64 = (0..p).map(|i| d.loadings.get(i, a) * d.loadings.get(i, b)).sum();
                let want = if a == b { 1.0 } else { 0.0 };
                prop_assert!((dot - want).abs() < 1e-9, "VᵀV[{},{}] = {}", a, b, dot);
            }
        }
        // Score variances (n − 1) equal the eigenvalues; scores have mean 0.
        let t = scores(&z, &d.loadings, r);
        for a in 0..r {
            let col = t.column(a);
            let mean: f64 = col.iter().sum::<f64>() / n as f64;
            let var: f64 = col.iter().map(|v| v * v).sum::<f64>() / (n - 1) as f64;
            prop_assert!(mean.abs() < 1e-9 * d.total_variance.sqrt().max(1.0));
            prop_assert!(close(var, d.eigenvalues[a], 1e-9), "var {} eig {}", var, d.eigenvalues[a]);
        }
        // Sign rule: the first loading of (near-)largest magnitude is positive.
        for a in 0..r {
            let largest = (0..p).map(|i| d.loadings.get(i, a).abs()).fold(0.0, f64::max);
            let lead = (0..p).find(|&i| d.loadings.get(i, a).abs() >= largest * (1.0 - 1e-9)).unwrap();
            prop_assert!(d.loadings.get(lead, a) > 0.0);
        }
    }

    #[test]
    fn both_routes_agree((n, p, values) in table()) {
        let z = scaled(n, p, &values, ScalingMethod::UnitVariance);
        let tall = decompose(&z, true, Some(Route::Features)).unwrap();
        let wide = decompose(&z, true, Some(Route::Samples)).unwrap();
        prop_assert_eq!(tall.rank, wide.rank);
        let top = tall.eigenvalues[0];
        for (a, b) in tall.eigenvalues.iter().zip(&wide.eigenvalues) {
            prop_assert!((a - b).abs() <= 1e-9 * top, "{} vs {}", a, b);
        }
        // Compare loadings of well-separated components only: a near-tie makes the
        // vectors themselves ill-defined, whichever route computes them.
        for a in 0..tall.rank {
            let gap_prev = if a == 0 { f64::INFINITY } else { tall.eigenvalues[a - 1] - tall.eigenvalues[a] };
            let gap_next = if a + 1 < tall.eigenvalues.len() { tall.eigenvalues[a] - tall.eigenvalues[a + 1] } else { f64::INFINITY };
            if gap_prev.min(gap_next) < 1e-3 * top {
                continue;
            }
            for i in 0..p {
                let (x, y) = (tall.loadings.get(i, a), wide.loadings.get(i, a));
                prop_assert!((x - y).abs() < 1e-6, "component {} feature {}: {} vs {}", a, i, x, y);
            }
        }
    }
}
