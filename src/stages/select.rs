//! Choosing how many components to keep, and saying why.
//!
//! Rules: a fixed count; the smallest count reaching a cumulative share of
//! variance; Kaiser (1960): eigenvalues above the mean eigenvalue, which is 1 on a
//! correlation matrix; the broken stick (Frontier 1976; Jackson 1993, Ecology
//! 74:2204–2214): component k is kept while its share exceeds
//! bₖ = (1/p) Σ_{i=k..p} 1/i, the expected share of the k-th longest piece of a
//! stick broken at random into p pieces; parallel analysis (Horn 1965, see
//! [`super::parallel`]); cross-validation (Bro et al. 2008, see
//! [`super::crossval`]). Bartlett's test of equal remaining eigenvalues is
//! reported as evidence beside them.

use super::crossval::CvEvidence;
use super::parallel::ParallelEvidence;
use crate::recipe::plan::ComponentsPlan;
use crate::recipe::raw::{DEFAULT_COMPUTE, Keep};
use crate::text::{percent_figure, readable, trimmed};
use serde::Serialize;

/// Evidence computed from the data for the rules that need more than eigenvalues.
#[derive(Debug, Clone, Default)]
pub struct Evidence {
    pub parallel: Option<ParallelEvidence>,
    pub cross_validation: Option<CvEvidence>,
}

/// The chosen number of components and the evidence.
#[derive(Debug, Clone, Serialize)]
pub struct Selection {
    /// Components used downstream (scores).
    pub kept: usize,
    /// Components reported (variance table, loadings).
    pub computed: usize,
    pub rule: &'static str,
    pub reason: String,
    /// Changes made to the recipe's numbers because of the data, each explained.
    pub adjustments: Vec<String>,
    /// The broken-stick expected share for each of the p components.
    #[serde(skip)]
    pub broken_stick: Vec<f64>,
    /// The mean eigenvalue, Kaiser's threshold.
    pub mean_eigenvalue: f64,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub parallel_analysis: Option<ParallelEvidence>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub cross_validation: Option<CvEvidence>,
}

/// Why a recipe's fixed count cannot be honoured.
#[derive(Debug, Clone, PartialEq)]
pub struct KeepAboveRank {
    pub keep: usize,
    pub available: usize,
}

/// The choice of k once the eigenvalues are known, as both engines make it:
/// the recipe's rule over the p eigenvalues (p features), then the loadings of
/// every computed component made sure of: `more(count)` decomposes again when
/// the first decomposition computed fewer (`None` where it cannot, the
/// randomized method). A fixed count above the rank becomes `keep_error`'s error.
pub fn choose<E: From<crate::error::AnalysisError>>(
    decomposition: &mut super::decompose::Decomposition,
    p: usize,
    plan: &ComponentsPlan,
    evidence: Evidence,
    more: Option<
        impl FnOnce(usize) -> Result<super::decompose::Decomposition, crate::error::AnalysisError>,
    >,
    keep_error: impl FnOnce(KeepAboveRank) -> E,
) -> Result<Selection, E> {
    let d = &*decomposition;
    let selection = select_among(&d.eigenvalues, p, d.total_variance, d.rank, plan, evidence)
        .map_err(keep_error)?;
    if let Some(more) = more
        && selection.computed > decomposition.loadings.cols
    {
        *decomposition = more(selection.computed)?;
    }
    Ok(selection)
}

/// The broken-stick expectations b₁..b_p.
pub fn broken_stick(p: usize) -> Vec<f64> {
    (1..=p)
        .map(|k| (k..=p).map(|i| 1.0 / i as f64).sum::<f64>() / p as f64)
        .collect()
}

/// Applies the recipe's rule to the eigenvalues.
pub fn select(
    eigenvalues: &[f64],
    total: f64,
    rank: usize,
    plan: &ComponentsPlan,
    evidence: Evidence,
) -> Result<Selection, KeepAboveRank> {
    select_among(eigenvalues, eigenvalues.len(), total, rank, plan, evidence)
}

/// [`select`] when only the leading `eigenvalues` of `p` are known (the
/// randomized method). The broken stick and Kaiser's mean eigenvalue always
/// use p, the number of features, even when the rank is lower (a constant
/// combination of features, or fewer rows than features): the rules compare
/// each component with a share of all p dimensions, as their authors state
/// them, and the README and `explain` say so.
pub fn select_among(
    eigenvalues: &[f64],
    p: usize,
    total: f64,
    rank: usize,
    plan: &ComponentsPlan,
    evidence: Evidence,
) -> Result<Selection, KeepAboveRank> {
    let shares: Vec<f64> = eigenvalues.iter().map(|v| v / total).collect();
    let sticks = broken_stick(p);
    let mean_eigenvalue = total / p as f64;
    let mut adjustments = Vec::new();

    let (rule, mut kept, reason) = match plan.keep {
        Keep::Count(k) => {
            let k = k.get();
            let why = match plan.keep_written {
                Some(_) => format!("keep = {k} is set in the recipe"),
                None => format!("keep is not set, so the default of {k} components is used"),
            };
            if k > rank {
                return Err(KeepAboveRank {
                    keep: k,
                    available: rank,
                });
            }
            ("count", k, why)
        }
        Keep::Variance(share) => by_variance(&shares, share.0, rank),
        Keep::Kaiser => {
            let k = eigenvalues
                .iter()
                .take_while(|&&v| v > mean_eigenvalue)
                .count();
            let why = format!(
                "{} the mean eigenvalue {} (Kaiser 1960)",
                match k {
                    1 => "1 eigenvalue exceeds".to_string(),
                    _ => format!("{k} eigenvalues exceed"),
                },
                readable(mean_eigenvalue)
            );
            ("kaiser", k, why)
        }
        Keep::BrokenStick => {
            let k = shares
                .iter()
                .zip(&sticks)
                .take_while(|(s, b)| s > b)
                .count();
            let why = match (shares.get(k), sticks.get(k)) {
                (Some(s), Some(b)) if k == 0 => format!(
                    "not even component 1 explains more than the broken-stick expectation ({} % against {} %)",
                    percent_figure(*s),
                    percent_figure(*b)
                ),
                (Some(s), Some(b)) => format!(
                    "{} more than the broken-stick expectation; component {} explains {} % against {} %",
                    first_components(k, "explains", "each explain"),
                    k + 1,
                    percent_figure(*s),
                    percent_figure(*b)
                ),
                _ => format!(
                    "{} more than the broken-stick expectation",
                    all_of(k, "component", "explains", "explain")
                ),
            };
            ("broken-stick", k, why)
        }
        Keep::ParallelAnalysis => {
            let pa = evidence
                .parallel
                .as_ref()
                .expect("the orchestrator runs parallel analysis for this rule");
            let k = eigenvalues
                .iter()
                .zip(&pa.thresholds)
                .take_while(|(v, t)| v > t)
                .count();
            let why = match (eigenvalues.get(k), pa.thresholds.get(k)) {
                (Some(v), Some(t)) if k == 0 => format!(
                    "not even the first eigenvalue ({}) exceeds the {}th percentile of {} random tables ({}) (Horn 1965, seed {})",
                    readable(*v),
                    trimmed(pa.percentile, 4),
                    pa.replicates,
                    readable(*t),
                    pa.seed
                ),
                (Some(v), Some(t)) => format!(
                    "{} above the {}th percentile of {} random tables ({}); component {} has {} against {} (Horn 1965, seed {})",
                    first_components(k, "has an eigenvalue", "have eigenvalues"),
                    trimmed(pa.percentile, 4),
                    pa.replicates,
                    random_words(pa),
                    k + 1,
                    readable(*v),
                    readable(*t),
                    pa.seed
                ),
                _ => format!(
                    "{} the random tables' threshold",
                    all_of(k, "eigenvalue", "exceeds", "exceed")
                ),
            };
            ("parallel-analysis", k, why)
        }
        Keep::CrossValidation => {
            let cv = evidence
                .cross_validation
                .as_ref()
                .expect("the orchestrator runs cross-validation for this rule");
            let k = cv.chosen;
            let best =
                (1..cv.press.len()).fold(1, |b, j| if cv.press[j] < cv.press[b] { j } else { b });
            let why = match cv.choose {
                crate::recipe::raw::CvChoice::Minimum => format!(
                    "{} the smallest PRESS ({}) over {} folds (Bro et al. 2008)",
                    match k {
                        1 => "1 component gives".to_string(),
                        _ => format!("{k} components give"),
                    },
                    readable(cv.press[k]),
                    cv.folds
                ),
                crate::recipe::raw::CvChoice::OneStandardError => format!(
                    "{k} is the fewest {} with PRESS ({}) within one standard error of the smallest ({} at {best}, standard error {}), over {} folds (Bro et al. 2008)",
                    if k == 1 { "component" } else { "components" },
                    readable(cv.press[k]),
                    readable(cv.press[best]),
                    readable(cv.standard_error[best]),
                    cv.folds
                ),
            };
            ("cross-validation", k, why)
        }
    };
    if kept == 0 {
        adjustments.push(format!("the rule `{rule}` kept no component; one component is kept, the least that can be analysed"));
        kept = 1;
    }
    kept = kept.min(rank);

    // The default is treated exactly like a written 10, so that a recipe rebuilt
    // from a manifest (where every default is written) runs identically.
    let mut computed = plan.compute.unwrap_or(DEFAULT_COMPUTE);
    if computed > rank {
        adjustments.push(format!(
            "compute = {computed} was lowered to {rank}, the rank of the data"
        ));
        computed = rank;
    }
    if kept > computed {
        adjustments.push(format!(
            "compute was raised from {computed} to {kept} to report every kept component"
        ));
        computed = kept;
    }
    Ok(Selection {
        kept,
        computed,
        rule,
        reason,
        adjustments,
        broken_stick: sticks,
        mean_eigenvalue,
        parallel_analysis: evidence.parallel,
        cross_validation: evidence.cross_validation,
    })
}

/// Cumulative shares within this of the target count as reaching it, so that the
/// rounding of a sum (0.6 + 0.3 < 0.9 in binary) does not decide the count.
pub const SHARE_TOLERANCE: f64 = 1e-12;

fn by_variance(shares: &[f64], target: f64, rank: usize) -> (&'static str, usize, String) {
    let mut cumulative = 0.0;
    for (i, s) in shares.iter().enumerate().take(rank) {
        cumulative += s;
        if cumulative >= target - SHARE_TOLERANCE {
            let why = format!(
                "{} {} % of the variance, the fewest to reach {} %",
                match i {
                    0 => "the first component explains".to_string(),
                    _ => format!("the first {} components explain", i + 1),
                },
                percent_figure(cumulative),
                percent_figure(target)
            );
            return ("variance", i + 1, why);
        }
    }
    let why = format!(
        "no count of components reaches {} % (all {rank} explain {} %), so all are kept",
        percent_figure(target),
        percent_figure(cumulative)
    );
    ("variance", rank, why)
}

fn random_words(pa: &ParallelEvidence) -> &'static str {
    match pa.random_data {
        crate::recipe::raw::RandomData::PermutedColumns => "each column shuffled",
        crate::recipe::raw::RandomData::Normal => "normal values",
    }
}

/// Bartlett's test that the eigenvalues after the first `a` components are all
/// equal: χ² = ((n − 1) − (2p + 5)/6) (q ln(mean of the last q λ) − Σ ln λ) with
/// q = rank − a and df = (q + 2)(q − 1)/2 (Bartlett 1950, "Tests of significance in
/// factor analysis", Brit. J. Psych. Stat. Section 3:77–85; formula as commonly
/// given, not read in the paper). Returns (χ², df, p-value), or `None` when fewer
/// than two non-zero eigenvalues remain.
pub fn bartlett_rest(
    eigenvalues: &[f64],
    rank: usize,
    n: usize,
    a: usize,
) -> Option<(f64, f64, f64)> {
    let p = eigenvalues.len() as f64;
    let rest = eigenvalues.get(a..rank)?;
    let q = rest.len();
    if q < 2 {
        return None;
    }
    let mean = rest.iter().sum::<f64>() / q as f64;
    let logs: f64 = rest.iter().map(|&l| libm::log(l)).sum();
    let chi2 = ((n as f64 - 1.0) - (2.0 * p + 5.0) / 6.0) * (q as f64 * libm::log(mean) - logs);
    let df = ((q + 2) * (q - 1) / 2) as f64;
    let p_value = crate::stats::distributions::chi2_sf(chi2, df).ok()?;
    Some((chi2, df, p_value))
}

/// "component 1 explains" or "components 1 to k each explain": the subject of
/// a rule's reason, in the right number.
fn first_components(k: usize, one: &str, many: &str) -> String {
    if k == 1 {
        format!("component 1 {one}")
    } else {
        format!("components 1 to {k} {many}")
    }
}

/// "the only component explains" or "all k components explain".
fn all_of(k: usize, noun: &str, one: &str, many: &str) -> String {
    if k == 1 {
        format!("the only {noun} {one}")
    } else {
        format!("all {k} {noun}s {many}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::num::NonZeroUsize;

    fn plan(keep: Keep) -> ComponentsPlan {
        ComponentsPlan {
            keep,
            parallel_analysis: Default::default(),
            cross_validation: Default::default(),
            keep_written: None,
            compute: None,
        }
    }

    #[test]
    fn broken_stick_for_seven_parts() {
        // Published worked example, p = 7: 0.3704, 0.2276, 0.1561 (4 decimals).
        let b = broken_stick(7);
        assert_eq!(
            format!("{:.4} {:.4} {:.4}", b[0], b[1], b[2]),
            "0.3704 0.2276 0.1561"
        );
    }

    #[test]
    fn variance_rule_takes_the_fewest() {
        let s = select(
            &[6.0, 3.0, 1.0],
            10.0,
            3,
            &plan(Keep::Variance(crate::recipe::raw::Share(0.9))),
            Evidence::default(),
        )
        .unwrap();
        assert_eq!(s.kept, 2);
    }

    #[test]
    fn kaiser_counts_above_mean() {
        let s = select(
            &[2.0, 0.9, 0.1],
            3.0,
            3,
            &plan(Keep::Kaiser),
            Evidence::default(),
        )
        .unwrap();
        assert_eq!(s.kept, 1);
        assert_eq!(s.mean_eigenvalue, 1.0);
    }

    #[test]
    fn written_count_above_rank_is_refused() {
        let mut p = plan(Keep::Count(NonZeroUsize::new(4).unwrap()));
        p.keep_written = Some(crate::error::Position::locate("keep = 4", 7));
        assert_eq!(
            select(&[2.0, 1.0, 0.0, 0.0], 3.0, 2, &p, Evidence::default()).unwrap_err(),
            KeepAboveRank {
                keep: 4,
                available: 2
            }
        );
    }
}
