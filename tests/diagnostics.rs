//! Per-row diagnostics and the data-driven rules for the number of components:
//! T² and SPE against a general-purpose library, their exact identities, the
//! control limits' use, parallel analysis against published Monte Carlo values,
//! cross-validation on data of known rank, and a planted outlier.

use sextant::analysis::{Analysis, Preprocessed};
use sextant::linalg::Matrix;
use sextant::recipe::raw::{CvChoice, FoldsBy, RandomData, RawCrossValidation, RawParallel};
use sextant::run::{analyse, prepare, preprocess};
use sextant::stages::crossval::cross_validate;
use sextant::stages::diagnose::contributions;
use sextant::stages::parallel::parallel_analysis;
use std::fs;
use std::path::{Path, PathBuf};

fn data(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/data")
        .join(name)
}

/// Runs a recipe body (everything but [output]) on a table, in memory.
fn analysis(table: &Path, body: &str) -> (Preprocessed, Analysis) {
    let dir = tempfile::tempdir().unwrap();
    let recipe = dir.path().join("r.toml");
    fs::write(
        &recipe,
        format!(
            "format = 1\n[input]\nfile = {:?}\n{body}\n[output]\nfolder = \"out\"\n",
            table.display().to_string()
        ),
    )
    .unwrap();
    let prepared = prepare(&recipe).unwrap_or_else(|e| panic!("{e}"));
    let mut pre = preprocess(&prepared).unwrap_or_else(|e| panic!("{e}"));
    let a = analyse(&prepared, &pre).unwrap_or_else(|e| panic!("{e}"));
    sextant::run::hold_scaled_rows(&prepared, &mut pre).unwrap();
    (pre, a)
}

fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs().max(f64::MIN_POSITIVE)
}

// Expected values from numpy 2.4.6 on tests/data/wine.csv:
//   Z = (X - X.mean(0)) / X.std(0, ddof=1)
//   w, V = np.linalg.eigh(np.cov(Z, rowvar=False)); o = np.argsort(w)[::-1]; w, V = w[o], V[:, o]
//   T = Z @ V[:, :3]; t2 = (T**2 / w[:3]).sum(1)
//   E = Z - T @ V[:, :3].T; spe = (E**2).sum(1)
//   rows 0, 1, 58, 177 and the maxima (rows 121 and 95):
const WINE_T2_SPE: [(usize, f64, f64); 4] = [
    (0, 3.1732056152894854, 2.875223583421092),
    (1, 3.899640388690402, 2.3419000290550227),
    (58, 3.3327535505538264, 1.8932074279142452),
    (177, 5.935795602465284, 2.0768858648169384),
];

#[test]
fn wine_t2_and_spe_match_numpy() {
    let (_, a) = analysis(
        &data("wine.csv"),
        "exclude = [\"class\"]\n[components]\nkeep = 3",
    );
    let (t2s, spes) = (a.t2(), a.spe());
    for (i, t2, spe) in WINE_T2_SPE {
        assert!(rel(t2s[i], t2) < 1e-10, "row {i}: T² {} vs {t2}", t2s[i]);
        assert!(
            rel(spes[i], spe) < 1e-9,
            "row {i}: SPE {} vs {spe}",
            spes[i]
        );
    }
    let argmax = |v: &[f64]| (0..v.len()).fold(0, |m, i| if v[i] > v[m] { i } else { m });
    assert_eq!(argmax(&t2s), 121);
    assert!(rel(t2s[121], 20.05106090787208) < 1e-10);
    assert_eq!(argmax(&spes), 95);
    assert!(rel(spes[95], 24.533280454156106) < 1e-9);
}

#[test]
fn wine_limits_match_the_published_forms() {
    // Library values (scipy 1.17.1) for n = 178, k = 3, as in the project's shared
    // reference: T² Beta form 7.708397 / 11.078957, F form 8.105052 / 11.886423;
    // SPE Jackson–Mudholkar 8.8102331 / 11.9311670 and Box 8.6914429 / 11.3890007.
    let (_, a) = analysis(
        &data("wine.csv"),
        "exclude = [\"class\"]\n[components]\nkeep = 3\n[diagnostics]\nconfidence = [0.95, 0.99]",
    );
    let l = &a.diagnostics.limits;
    assert!(rel(l[0].t2.unwrap(), 7.708397) < 1e-6 && rel(l[1].t2.unwrap(), 11.078957) < 1e-6);
    assert!(
        rel(l[0].t2_new_rows.unwrap(), 8.105052) < 1e-6
            && rel(l[1].t2_new_rows.unwrap(), 11.886423) < 1e-6
    );
    assert!(rel(l[0].spe.unwrap(), 8.8102331) < 1e-7 && rel(l[1].spe.unwrap(), 11.9311670) < 1e-7);
    let (_, b) = analysis(
        &data("wine.csv"),
        "exclude = [\"class\"]\n[components]\nkeep = 3\n[diagnostics]\nconfidence = [0.95, 0.99]\nspe_limit = \"box\"",
    );
    let l = &b.diagnostics.limits;
    assert!(rel(l[0].spe.unwrap(), 8.6914429) < 1e-7 && rel(l[1].spe.unwrap(), 11.3890007) < 1e-7);
    // Flags follow the limits.
    let flagged = a
        .t2()
        .iter()
        .filter(|&&v| v > a.diagnostics.limits[0].t2.unwrap())
        .count();
    assert_eq!(flagged, a.diagnostics.limits[0].t2_flagged);
}

#[test]
fn exact_identities_hold_on_every_reference_dataset() {
    for (file, body, k) in [
        (
            "iris.csv",
            "groups = [\"class\"]\n[components]\nkeep = 2",
            2usize,
        ),
        (
            "wine.csv",
            "groups = [\"class\"]\n[components]\nkeep = 3",
            3,
        ),
        (
            "breast_cancer_wdbc.csv",
            "groups = [\"class\"]\n[components]\nkeep = 6",
            6,
        ),
        (
            "nist_pca_example.csv",
            "[scaling]\nmethod = \"center\"\n[components]\nkeep = 1",
            1,
        ),
    ] {
        let (pre, a) = analysis(&data(file), body);
        let n = pre.scaled.n_rows() as f64;
        let t2: f64 = a.t2().iter().sum();
        assert!(
            rel(t2, k as f64 * (n - 1.0)) < 1e-10,
            "{file}: Σ T² = {t2}, k(n − 1) = {}",
            k as f64 * (n - 1.0)
        );
        let spe: f64 = a.spe().iter().sum();
        let rest: f64 = a.decomposition.eigenvalues[k..].iter().sum::<f64>() * (n - 1.0);
        assert!(
            rel(spe, rest) < 1e-9,
            "{file}: Σ SPE = {spe}, (n − 1) Σ λ = {rest}"
        );
        // Contributions add up to each row's T² and SPE.
        let d = &a.decomposition;
        for i in [0, pre.scaled.n_rows() - 1] {
            let c = contributions(
                pre.scaled.data().row(i),
                &d.loadings,
                a.kept_scores().row(i),
                &d.eigenvalues,
            );
            let (ct2, cspe): (f64, f64) = c.iter().fold((0.0, 0.0), |s, x| (s.0 + x.0, s.1 + x.1));
            assert!(
                (ct2 - a.t2()[i]).abs() < 1e-9 * a.t2()[i].max(1.0),
                "{file} row {i}"
            );
            assert!(
                (cspe - a.spe()[i]).abs() < 1e-9 * a.spe()[i].max(1.0),
                "{file} row {i}"
            );
        }
    }
}

#[test]
fn keeping_every_component_leaves_no_spe_limit_and_no_nan() {
    let (_, a) = analysis(
        &data("iris.csv"),
        "exclude = [\"class\"]\n[components]\nkeep = 4",
    );
    let d = &a.diagnostics;
    let (_, spes) = (a.t2(), a.spe());
    assert!(d.limits[0].spe.is_none());
    assert!(
        d.notes.iter().any(|n| n.contains("no SPE limit")),
        "{:?}",
        d.notes
    );
    assert!(spes.iter().all(|v| v.is_finite() && *v < 1e-20));
}

fn standardized(file: &str) -> Matrix {
    let (pre, _) = analysis(&data(file), "exclude = [\"class\"]\n[components]\nkeep = 1");
    pre.scaled.data().clone()
}

/// The standard error of an estimated percentile q from m sorted draws: √(q(1 − q)/m) / f(x_q),
/// with the density estimated from the neighbouring percentiles.
fn percentile_se(sorted: &[f64], q: f64) -> f64 {
    use sextant::stages::parallel::percentile;
    let m = sorted.len() as f64;
    let width = percentile(sorted, 100.0 * (q + 0.01)) - percentile(sorted, 100.0 * (q - 0.01));
    (q * (1.0 - q) / m).sqrt() * width / 0.02
}

#[test]
fn parallel_analysis_matches_published_monte_carlo_thresholds() {
    // Reference: mean and 95th-percentile eigenvalues of correlation matrices of
    // N(0, 1) data, n = 178, p = 13, 5,000 replicates (library Monte Carlo, numpy
    // 2.4; project shared reference): mean λ₁ 1.4749 (SE 0.0009), p95 λ₁ 1.5903,
    // mean λ₁₃ 0.5989 (SE 0.00058), p95 λ₁₃ 0.6634. Another random stream differs
    // by sampling error only, so we allow 4 standard errors of the difference.
    let z = standardized("wine.csv");
    let settings = RawParallel {
        replicates: sextant::recipe::raw::Count(std::num::NonZeroUsize::new(5000).unwrap()),
        random_data: RandomData::Normal,
        ..RawParallel::default()
    };
    let pa = parallel_analysis(&z, true, &settings).unwrap();
    for (a, mean, se_mean) in [
        (0, 1.4748768341421303, 0.0009170247326282628),
        (12, 0.5989441585494402, 0.0005771897002235953),
    ] {
        let diff = (pa.means[a] - mean).abs();
        assert!(
            diff < 4.0 * 2f64.sqrt() * se_mean,
            "mean λ{}: {} vs {mean}",
            a + 1,
            pa.means[a]
        );
    }
    // The percentile's standard error comes from the spread of single-replicate
    // eigenvalues (other seeds, so independent of the run above).
    for (a, p95) in [(0, 1.5903383560512494), (12, 0.6633835957240934)] {
        let mut draws: Vec<f64> = (0..5000u64)
            .map(|r| {
                let one = RawParallel {
                    replicates: sextant::recipe::raw::Count(
                        std::num::NonZeroUsize::new(1).unwrap(),
                    ),
                    seed: 1_000_000 + r,
                    random_data: RandomData::Normal,
                    ..RawParallel::default()
                };
                parallel_analysis(&z, true, &one).unwrap().means[a]
            })
            .collect();
        draws.sort_by(f64::total_cmp);
        let se = percentile_se(&draws, 0.95);
        let diff = (pa.thresholds[a] - p95).abs();
        assert!(
            diff < 4.0 * 2f64.sqrt() * se,
            "p95 λ{}: {} vs {p95} (SE {se})",
            a + 1,
            pa.thresholds[a]
        );
    }
}

#[test]
fn parallel_analysis_is_the_same_on_one_thread_and_seed_matters_but_not_k() {
    let z = standardized("wine.csv");
    let settings = RawParallel::default();
    let many = parallel_analysis(&z, true, &settings).unwrap();
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .unwrap();
    let one = pool.install(|| parallel_analysis(&z, true, &settings).unwrap());
    assert_eq!(many.thresholds, one.thresholds);
    let other = parallel_analysis(
        &z,
        true,
        &RawParallel {
            seed: 7,
            ..RawParallel::default()
        },
    )
    .unwrap();
    assert_ne!(many.thresholds, other.thresholds);

    let k = |seed: u64| {
        let (_, a) = analysis(
            &data("wine.csv"),
            &format!(
                "exclude = [\"class\"]\n[components]\nkeep = \"parallel-analysis\"\n[components.parallel_analysis]\nseed = {seed}"
            ),
        );
        a.selection.kept
    };
    let ks: Vec<usize> = [1, 2, 3, 20260101].into_iter().map(k).collect();
    // Wine's λ₃ = 1.45 and λ₄ = 0.92 sit well clear of the random thresholds
    // (about 1.33 and 1.24), so every seed keeps 3.
    assert_eq!(ks, vec![3, 3, 3, 3]);
}

/// A table with a known number of components: `rank` latent factors with
/// decreasing strength, plus independent noise.
fn low_rank(n: usize, p: usize, rank: usize, noise: f64, seed: u64) -> Matrix {
    let mut s = sextant::linalg::random::Stream::new(seed, 0);
    let mut normal = || s.normal_pair().0;
    let scores: Vec<Vec<f64>> = (0..n)
        .map(|_| (0..rank).map(|_| normal()).collect())
        .collect();
    let weights: Vec<Vec<f64>> = (0..rank)
        .map(|_| (0..p).map(|_| normal()).collect())
        .collect();
    let mut m = Matrix::zeros(n, p);
    for i in 0..n {
        for j in 0..p {
            let signal: f64 = (0..rank)
                .map(|a| scores[i][a] * weights[a][j] * (3.0 - a as f64 * 0.5))
                .sum();
            m.set(i, j, signal + noise * normal());
        }
    }
    // Centre the columns, as the scaling stage would.
    for j in 0..p {
        let mean = m.column(j).iter().sum::<f64>() / n as f64;
        for i in 0..n {
            m.set(i, j, m.get(i, j) - mean);
        }
    }
    m
}

#[test]
fn cross_validation_recovers_the_number_of_components() {
    for (n, p, rank, seed) in [
        (200, 10, 2, 1),
        (150, 20, 3, 2),
        (60, 8, 1, 3),
        (300, 30, 4, 4),
        (40, 60, 3, 5),
    ] {
        let z = low_rank(n, p, rank, 0.5, seed);
        for choose in [CvChoice::Minimum, CvChoice::OneStandardError] {
            for folds_by in [FoldsBy::Interleaved, FoldsBy::Contiguous] {
                let settings = RawCrossValidation {
                    choose,
                    folds_by,
                    ..RawCrossValidation::default()
                };
                let cv = cross_validate(&z, true, 8.min(p - 1), &settings).unwrap();
                assert_eq!(
                    cv.chosen, rank,
                    "{n}×{p} rank {rank} ({choose:?}, {folds_by:?}): PRESS {:?}",
                    cv.press
                );
            }
        }
    }
}

#[test]
fn a_planted_outlier_is_flagged_by_spe_with_its_feature_on_top() {
    // Wine with one cell of row 40 moved by 8 standard deviations of its feature.
    let text = fs::read_to_string(data("wine.csv")).unwrap();
    let mut lines: Vec<String> = text.lines().map(String::from).collect();
    let header: Vec<&str> = lines[0].split(',').collect();
    let feature = header.iter().position(|h| *h == "ash").unwrap();
    let mut cells: Vec<String> = lines[41].split(',').map(String::from).collect();
    let ash: f64 = cells[feature].parse().unwrap();
    cells[feature] = format!("{}", ash + 8.0 * 0.2743); // sd of ash is about 0.274
    lines[41] = cells.join(",");
    let dir = tempfile::tempdir().unwrap();
    let table = dir.path().join("wine-planted.csv");
    fs::write(&table, lines.join("\n") + "\n").unwrap();

    let (pre, a) = analysis(&table, "exclude = [\"class\"]\n[components]\nkeep = 3");
    let d = &a.diagnostics;
    let (t2s, spes) = (a.t2(), a.spe());
    assert!(
        spes[40] > d.limits[0].spe.unwrap(),
        "SPE {} limit {:?}",
        spes[40],
        d.limits[0].spe
    );
    assert!(d.flagged_at_any(t2s[40], spes[40]));
    assert!(d.most_unusual(d.flagged).contains(&40));
    let dec = &a.decomposition;
    let c = contributions(
        pre.scaled.data().row(40),
        &dec.loadings,
        a.kept_scores().row(40),
        &dec.eigenvalues,
    );
    let top = (0..c.len()).fold(0, |m, j| if c[j].1 > c[m].1 { j } else { m });
    assert_eq!(pre.scaled.names[top], "ash");
}
