//! Per-sample diagnostics: Hotelling's T² over the kept components, the squared
//! prediction error (SPE, Q) after them, control limits, flags and the usual
//! contributions of each feature for flagged samples.
//!
//! - T²ᵢ = Σₐ tᵢₐ² / λₐ over the k kept components (λ with divisor n − 1);
//!   Σᵢ T²ᵢ = k(n − 1) exactly.
//! - SPEᵢ = Σⱼ eᵢⱼ², e = z − t Pᵀ the residual after k components;
//!   Σᵢ SPEᵢ = (n − 1) Σ_{j>k} λⱼ.
//! - Limits: T² of the calibration rows by the Beta form of Tracy, Young & Mason
//!   (1992); T² of new rows by the F form (NIST/SEMATECH e-Handbook §6.5.4.3.4),
//!   recorded for scoring new batches; SPE by Jackson & Mudholkar (1979) or Box
//!   (1954). See [`crate::stats::limits`].
//! - Contributions (Westerhuis, Gurden & Smilde 2000, "Generalized contribution
//!   plots in multivariate statistical process monitoring", Chemometrics and
//!   Intelligent Laboratory Systems 51:95–114): to T², cᵢⱼ = Σₐ (tᵢₐ/λₐ) pⱼₐ zᵢⱼ,
//!   which sum to T²ᵢ; to SPE, eᵢⱼ², which sum to SPEᵢ. Both are in scaled units.

use crate::linalg::Matrix;
use crate::recipe::raw::SpeLimit;
use crate::stats::limits::{ResidualMoments, t2_limit_new_observation, t2_limit_phase1};
use serde::Serialize;

/// The limits at one confidence level; `None` where a limit is not defined for
/// this data, with the reason in [`Diagnostics::notes`].
#[derive(Debug, Clone, Serialize)]
pub struct Limits {
    pub confidence: f64,
    /// For the calibration rows (Beta form); used for the flags here.
    pub t2: Option<f64>,
    /// For new rows scored against this model (F form).
    pub t2_new_rows: Option<f64>,
    pub spe: Option<f64>,
    pub t2_flagged: usize,
    pub spe_flagged: usize,
}

impl Limits {
    /// Limits at `confidence` with no row counted yet ([`Diagnostics::count`]
    /// counts the flags).
    pub fn uncounted(
        confidence: f64,
        t2: Option<f64>,
        t2_new_rows: Option<f64>,
        spe: Option<f64>,
    ) -> Limits {
        Limits {
            confidence,
            t2,
            t2_new_rows,
            spe,
            t2_flagged: 0,
            spe_flagged: 0,
        }
    }
}

/// The limits, and what the outputs need to know of all the rows beyond each
/// row's own T² and SPE (which travel with its scores): how many rows each
/// limit flags, and the most unusual flagged rows. It is filled a run of rows
/// at a time ([`Diagnostics::count`]), so it never holds a value per row.
#[derive(Debug, Clone)]
pub struct Diagnostics {
    pub limits: Vec<Limits>,
    pub spe_method: SpeLimit,
    pub moments: Option<ResidualMoments>,
    /// Why a limit is missing, or how far to trust it, in plain words.
    pub notes: Vec<String>,
    /// Rows flagged at any level.
    pub flagged: usize,
    /// The most unusual flagged rows, at most `keep` of them: after
    /// [`Diagnostics::finish`], most unusual first (ties to the lower row).
    unusual: Vec<Unusual>,
    keep: usize,
}

/// A flagged row among the most unusual.
#[derive(Debug, Clone, Copy)]
struct Unusual {
    /// The row's index among the analysed rows.
    row: usize,
    severity: f64,
}

impl Diagnostics {
    /// Whether a row with these T² and SPE exceeds the T² or the SPE limit at
    /// level `level`.
    pub fn flags(&self, t2: f64, spe: f64, level: usize) -> (bool, bool) {
        let l = &self.limits[level];
        (l.t2.is_some_and(|u| t2 > u), l.spe.is_some_and(|u| spe > u))
    }

    /// Whether a row is flagged at any level (the lowest confidence flags the most).
    pub fn flagged_at_any(&self, t2: f64, spe: f64) -> bool {
        (0..self.limits.len()).any(|l| {
            let (a, b) = self.flags(t2, spe, l);
            a || b
        })
    }

    /// How far a row lies beyond the first level's limits: the larger of
    /// T²/limit and SPE/limit (0 where neither limit is defined).
    pub fn severity(&self, t2: f64, spe: f64) -> f64 {
        let Some(l) = self.limits.first() else {
            return 0.0;
        };
        let t2 = l.t2.map_or(0.0, |u| t2 / u);
        let spe = l.spe.map_or(0.0, |u| spe / u);
        t2.max(spe)
    }

    /// Counts the next rows (`first` is the index of the first of them among
    /// the analysed rows): the flags of every limit, and the most unusual.
    pub fn count(&mut self, first: usize, t2: &[f64], spe: &[f64]) {
        for (i, (&a, &b)) in t2.iter().zip(spe).enumerate() {
            self.count_row(first + i, a, b);
        }
    }

    /// Counts one row (`row` its index among the analysed rows); rows must be
    /// counted in order.
    pub fn count_row(&mut self, row: usize, t2: f64, spe: f64) {
        for l in &mut self.limits {
            l.t2_flagged += usize::from(l.t2.is_some_and(|u| t2 > u));
            l.spe_flagged += usize::from(l.spe.is_some_and(|u| spe > u));
        }
        if self.flagged_at_any(t2, spe) {
            self.flagged += 1;
            self.unusual.push(Unusual {
                row,
                severity: self.severity(t2, spe),
            });
            if self.unusual.len() >= 2 * self.keep.max(1024) {
                self.trim();
            }
        }
    }

    /// The most unusual first, ties to the lower row; only `keep` stay. The
    /// order is total, so trimming as rows come gives the same list as
    /// sorting all flagged rows at the end.
    fn trim(&mut self) {
        self.unusual
            .sort_by(|x, y| y.severity.total_cmp(&x.severity).then(x.row.cmp(&y.row)));
        self.unusual.truncate(self.keep);
    }

    /// Ends the counting.
    pub fn finish(&mut self) {
        self.trim();
    }

    /// Adds the counts of `other`, the same limits counted over other rows
    /// (each row by its index among all the analysed rows). The order of the
    /// most unusual rows is total, so the list is the one counting every row
    /// in one run gives.
    pub fn merge(&mut self, other: &Diagnostics) {
        for (l, o) in self.limits.iter_mut().zip(&other.limits) {
            l.t2_flagged += o.t2_flagged;
            l.spe_flagged += o.spe_flagged;
        }
        self.flagged += other.flagged;
        self.unusual.extend_from_slice(&other.unusual);
        self.trim();
    }

    /// The flagged rows (their index among the analysed rows), most unusual
    /// first (ties to the lower row), at most `max`; `max` may not pass the
    /// number kept.
    pub fn most_unusual(&self, max: usize) -> Vec<usize> {
        assert!(
            max <= self.keep,
            "at most {} unusual rows are kept",
            self.keep
        );
        self.unusual.iter().take(max).map(|u| u.row).collect()
    }
}

/// The moments of the residual eigenvalues after `kept` components, which the
/// SPE limits take, as both engines compute them. After the randomized method
/// (`randomized`: its report and the scaled data it decomposed) θ₁ and θ₂ come
/// from the residual after the kept components, not from the known
/// eigenvalues alone (the plan allows only Box's limit there).
pub fn residual_moments(
    decomposition: &crate::stages::decompose::Decomposition,
    kept: usize,
    randomized: Option<(
        &crate::stages::decompose::randomized::RandomizedReport,
        &Matrix,
    )>,
) -> Result<ResidualMoments, crate::stats::limits::LimitError> {
    match randomized {
        Some((report, z)) => match report.residual_sums(z, decomposition, kept) {
            Some((theta1, theta2)) => ResidualMoments::from_first_two(theta1, theta2),
            None => Err(crate::stats::limits::LimitError::NoResidualEigenvalues),
        },
        None => {
            ResidualMoments::from_eigenvalues(&decomposition.eigenvalues[kept..decomposition.rank])
        }
    }
}

/// Diagnostics of rows whose T² and SPE are all at hand (the most unusual
/// `keep` rows listed).
pub fn diagnose_all(mut limits: Diagnostics, t2: &[f64], spe: &[f64]) -> Diagnostics {
    limits.count(0, t2, spe);
    limits.finish();
    limits
}

/// T² and SPE of each row, in one fixed order of summation (shared by the
/// analysis, by scoring new rows and by the passes engine, so all of them give
/// the same bits). Rows are independent, so any run of rows may be passed.
pub fn row_statistics(
    z: &Matrix,
    loadings: &Matrix,
    scores: &Matrix,
    eigenvalues: &[f64],
) -> (Vec<f64>, Vec<f64>) {
    let rows = RowStatistics::new(loadings, scores.cols, eigenvalues);
    let mut fitted = vec![0.0; z.cols];
    (0..z.rows)
        .map(|i| rows.of_row(z.row(i), scores.row(i), &mut fitted))
        .unzip()
}

/// What T² and SPE of a row need from the model, arranged for one row at a
/// time (so that a pass can compute them chunk by chunk into its own buffers).
pub struct RowStatistics<'a> {
    /// The kept loadings component by component, so that the fitted values of
    /// all features grow together; each one still sums its k terms in
    /// component order from the same start as [`residual`].
    by_component: Vec<Vec<f64>>,
    eigenvalues: &'a [f64],
}

impl<'a> RowStatistics<'a> {
    /// For the first `k` components of `loadings` (p × ≥ k).
    pub fn new(loadings: &Matrix, k: usize, eigenvalues: &'a [f64]) -> RowStatistics<'a> {
        let by_component = (0..k)
            .map(|a| (0..loadings.rows).map(|j| loadings.get(j, a)).collect())
            .collect();
        RowStatistics {
            by_component,
            eigenvalues,
        }
    }

    /// (T², SPE) of one row: `z` its scaled values, `t` its k kept scores;
    /// `fitted` is scratch space of the row's length.
    pub fn of_row(&self, z: &[f64], t: &[f64], fitted: &mut [f64]) -> (f64, f64) {
        let t2: f64 = t
            .iter()
            .zip(self.eigenvalues)
            .map(|(ta, l)| ta * ta / l)
            .sum();
        fitted.fill(crate::linalg::SUM_START);
        for (ta, la) in t.iter().zip(&self.by_component) {
            for (f, l) in fitted.iter_mut().zip(la) {
                *f += ta * l;
            }
        }
        let spe = z.iter().zip(fitted.iter()).fold(0.0, |sum, (zj, f)| {
            let e = zj - f;
            sum + e * e
        });
        (t2, spe)
    }
}

/// The residual e = z − t Pᵀ of one cell: `zj` the scaled value of feature `j`,
/// `t` the row's kept scores.
fn residual(zj: f64, t: &[f64], loadings: &Matrix, j: usize) -> f64 {
    let fitted: f64 = t
        .iter()
        .enumerate()
        .map(|(a, ta)| ta * loadings.get(j, a))
        .sum();
    zj - fitted
}

/// The note on uncentred data (`scaling.method = "none"`).
pub const UNCENTRED_NOTE: &str = "the data are not centred (scaling.method = \"none\"): the T² and SPE limits assume centred data, with scores of mean zero and eigenvalues that are variances, so here they are rough guides, not calibrated limits";

/// The limits at each confidence level for `n` rows and `k` kept components,
/// with nothing counted yet; up to `keep` of the most unusual rows will be
/// listed. `centred` says whether the scaling centred the data; without it
/// the limits are computed but a note says they are not calibrated.
pub fn limits(
    n: usize,
    k: usize,
    moments: Result<ResidualMoments, crate::stats::limits::LimitError>,
    (confidences, centred): (&[f64], bool),
    spe_method: SpeLimit,
    keep: usize,
) -> Diagnostics {
    let mut notes = Vec::new();
    if !centred {
        notes.push(UNCENTRED_NOTE.to_string());
    }
    let moments = match moments {
        Ok(m) => Some(m),
        Err(e) => {
            notes.push(format!(
                "no SPE limit: {e}; the SPE_above columns of scores.csv are left empty"
            ));
            None
        }
    };
    let mut limits = Vec::new();
    for &c in confidences {
        let mut note = |what: &str, e: crate::stats::limits::LimitError| {
            let line =
                format!("no {what} limit at {c}: {e}; its columns in scores.csv are left empty");
            if !notes.contains(&line) {
                notes.push(line);
            }
        };
        let t2_limit = t2_limit_phase1(n, k, c).map_err(|e| note("T²", e)).ok();
        let t2_new = t2_limit_new_observation(n, k, c)
            .map_err(|e| note("new-row T²", e))
            .ok();
        let spe_limit = moments.and_then(|m| {
            let r = match spe_method {
                SpeLimit::JacksonMudholkar => m.jackson_mudholkar(c),
                SpeLimit::Box => m.box_limit(c),
            };
            r.map_err(|e| note("SPE", e)).ok()
        });
        limits.push(Limits::uncounted(c, t2_limit, t2_new, spe_limit));
    }
    with_limits(limits, spe_method, moments, notes, keep)
}

/// Diagnostics with these limits and nothing counted yet.
pub fn with_limits(
    limits: Vec<Limits>,
    spe_method: SpeLimit,
    moments: Option<ResidualMoments>,
    notes: Vec<String>,
    keep: usize,
) -> Diagnostics {
    Diagnostics {
        limits,
        spe_method,
        moments,
        notes,
        flagged: 0,
        unusual: Vec::new(),
        keep,
    }
}

/// The contributions of each feature to a row's T² and SPE; `z` is the row's
/// scaled values and `scores` its kept scores.
pub fn contributions(
    z: &[f64],
    loadings: &Matrix,
    scores: &[f64],
    eigenvalues: &[f64],
) -> Vec<(f64, f64)> {
    let k = scores.len();
    (0..z.len())
        .map(|j| {
            let t2: f64 = (0..k)
                .map(|a| scores[a] / eigenvalues[a] * loadings.get(j, a))
                .sum::<f64>()
                * z[j];
            let e = residual(z[j], scores, loadings, j);
            (t2, e * e)
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Rows with many ties in severity: T² and SPE on a coarse grid.
    fn rows(n: usize) -> (Vec<f64>, Vec<f64>) {
        let mut state: u64 = 12345;
        let mut next = || {
            state = state
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            (state >> 40) % 16
        };
        (0..n)
            .map(|_| (next() as f64, next() as f64 * 0.25))
            .unzip()
    }

    fn limit(confidence: f64, t2: Option<f64>, spe: Option<f64>) -> Limits {
        Limits::uncounted(confidence, t2, t2, spe)
    }

    /// Two parts counted apart and merged in order list and count what one
    /// count of every row does (a partitioned input merges its parts so).
    #[test]
    fn merged_parts_count_what_one_run_counts() {
        let (t2, spe) = rows(9_000);
        let limits = vec![limit(0.99, Some(12.0), Some(3.0))];
        let make = || with_limits(limits.clone(), SpeLimit::default(), None, Vec::new(), 50);
        let mut whole = make();
        whole.count(0, &t2, &spe);
        whole.finish();
        let (mut a, mut b) = (make(), make());
        a.count(0, &t2[..4_000], &spe[..4_000]);
        b.count(4_000, &t2[4_000..], &spe[4_000..]);
        a.merge(&b);
        a.finish();
        assert!(whole.flagged > 50);
        assert_eq!(a.flagged, whole.flagged);
        assert_eq!(a.limits[0].t2_flagged, whole.limits[0].t2_flagged);
        assert_eq!(a.limits[0].spe_flagged, whole.limits[0].spe_flagged);
        assert_eq!(a.most_unusual(50), whole.most_unusual(50));
    }

    #[test]
    fn counting_in_runs_lists_what_a_full_sort_lists() {
        let (t2, spe) = rows(20_000);
        // Two levels: the second flags rows the first does not.
        let limits = vec![
            limit(0.99, Some(12.0), Some(3.0)),
            limit(0.95, Some(9.0), None),
        ];
        for keep in [1, 7, 1000, 5000] {
            let mut d = with_limits(limits.clone(), SpeLimit::default(), None, Vec::new(), keep);
            // In runs of uneven length, as chunks come.
            let mut first = 0;
            for run in [1, 999, 4096, 3, 20_000] {
                let last = t2.len().min(first + run);
                d.count(first, &t2[first..last], &spe[first..last]);
                first = last;
            }
            d.finish();
            // The reference: every row flagged at some level, sorted at once.
            let first_level = |i: usize| (t2[i] / 12.0).max(spe[i] / 3.0);
            let mut all: Vec<usize> = (0..t2.len())
                .filter(|&i| t2[i] > 12.0 || spe[i] > 3.0 || t2[i] > 9.0)
                .collect();
            assert!(
                all.len() > 2 * 1024,
                "enough rows to trim the list while counting"
            );
            assert_eq!(d.flagged, all.len());
            all.sort_by(|&a, &b| first_level(b).total_cmp(&first_level(a)).then(a.cmp(&b)));
            all.truncate(keep);
            assert_eq!(d.most_unusual(keep), all, "keep {keep}");
            // The counts of each limit.
            assert_eq!(
                d.limits[0].t2_flagged,
                t2.iter().filter(|&&v| v > 12.0).count()
            );
            assert_eq!(
                d.limits[0].spe_flagged,
                spe.iter().filter(|&&v| v > 3.0).count()
            );
            assert_eq!(
                d.limits[1].t2_flagged,
                t2.iter().filter(|&&v| v > 9.0).count()
            );
            assert_eq!(d.limits[1].spe_flagged, 0);
        }
    }
}
