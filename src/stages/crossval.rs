//! Cross-validation of the number of components by the prediction of held-out
//! cells, after Bro, Kjeldahl, Smilde & Kiers (2008), "Cross-validation of
//! component models: a critical look at current methods", Anal. Bioanal. Chem.
//! 390:1241–1251 (the element-wise, "eigenvector" scheme).
//!
//! Naive row-wise cross-validation projects a held-out row on the training
//! loadings and compares it with its own reconstruction, so each cell helps
//! predict itself and the error keeps falling as components are added. Here cell
//! j of a held-out row is predicted from the row's other cells only: the scores
//! are fitted by least squares to the other cells with the training loadings P,
//! and x̂ⱼ = pⱼᵀt̂. Because P has orthonormal columns this has a closed form: the
//! prediction error is eⱼ / (1 − ‖pⱼ‖²), where e is the ordinary residual of the
//! row after k components and pⱼ row j of P.
//!
//! Rows are dealt into folds deterministically; each fold's training rows are
//! re-centred on their own mean (the scaling of the whole table is kept).
//! PRESS(k) sums the squared errors over all folds; its standard error is
//! √F · sd of the per-fold sums.

use crate::error::AnalysisError;
use crate::linalg::Matrix;
use crate::recipe::raw::{CvChoice, FoldsBy, RawCrossValidation};
use crate::stages::decompose::decompose_keeping;
use serde::Serialize;

/// PRESS for each count of components and the count chosen.
#[derive(Debug, Clone, Serialize)]
pub struct CvEvidence {
    pub folds: usize,
    pub folds_by: FoldsBy,
    pub choose: CvChoice,
    /// PRESS(k) for k = 0, 1, …, the largest count tested.
    pub press: Vec<f64>,
    /// Its standard error for each k.
    pub standard_error: Vec<f64>,
    pub chosen: usize,
}

/// Denominators 1 − ‖pⱼ‖² below this are treated as this: the cell is then
/// almost entirely determined by itself, and its prediction error is huge.
const SMALLEST_DENOMINATOR: f64 = 1e-12;

/// Runs the cross-validation for k = 0..=max_k (limited to what every fold supports).
pub fn cross_validate(
    z: &Matrix,
    centred: bool,
    max_k: usize,
    settings: &RawCrossValidation,
) -> Result<CvEvidence, AnalysisError> {
    let (n, p) = (z.rows, z.cols);
    let folds = settings.folds.0.min(n);
    if folds < 2 || n < 3 {
        return Err(AnalysisError::CrossValidation {
            reason: format!("it needs at least 2 folds and 3 rows; the table has {n} rows"),
        });
    }
    let fold_of = |i: usize| match settings.folds_by {
        FoldsBy::Interleaved => i % folds,
        FoldsBy::Contiguous => i * folds / n,
    };
    // Beyond p − 1 components every cell is explained by the others' loadings alone.
    let mut max_k = max_k.min(p - 1);
    let mut per_fold: Vec<Vec<f64>> = Vec::with_capacity(folds);
    for f in 0..folds {
        let train: Vec<usize> = (0..n).filter(|&i| fold_of(i) != f).collect();
        let test: Vec<usize> = (0..n).filter(|&i| fold_of(i) == f).collect();
        let mean: Vec<f64> = (0..p)
            .map(|j| {
                if centred {
                    train.iter().map(|&i| z.get(i, j)).sum::<f64>() / train.len() as f64
                } else {
                    0.0
                }
            })
            .collect();
        let mut x = Matrix::zeros(train.len(), p);
        for (r, &i) in train.iter().enumerate() {
            for j in 0..p {
                x.set(r, j, z.get(i, j) - mean[j]);
            }
        }
        let d = decompose_keeping(&x, centred, None, max_k)?;
        max_k = max_k.min(d.rank);
        per_fold.push(fold_press(z, &test, &mean, &d.loadings, max_k.min(d.rank)));
    }
    let press: Vec<f64> = (0..=max_k)
        .map(|k| per_fold.iter().map(|f| f[k]).sum())
        .collect();
    let standard_error: Vec<f64> = (0..=max_k)
        .map(|k| {
            let m = press[k] / folds as f64;
            let var = per_fold
                .iter()
                .map(|f| (f[k] - m) * (f[k] - m))
                .sum::<f64>()
                / (folds - 1) as f64;
            (folds as f64).sqrt() * var.sqrt()
        })
        .collect();
    if max_k == 0 {
        return Err(AnalysisError::CrossValidation {
            reason: "no fold supports even one component".into(),
        });
    }
    let best = (1..=max_k).fold(1, |b, k| if press[k] < press[b] { k } else { b });
    let chosen = match settings.choose {
        CvChoice::Minimum => best,
        CvChoice::OneStandardError => {
            let limit = press[best] + standard_error[best];
            (1..=best).find(|&k| press[k] <= limit).unwrap_or(best)
        }
    };
    Ok(CvEvidence {
        folds,
        folds_by: settings.folds_by,
        choose: settings.choose,
        press,
        standard_error,
        chosen,
    })
}

/// PRESS(k), k = 0..=max_k, of the held-out rows of one fold.
fn fold_press(
    z: &Matrix,
    test: &[usize],
    mean: &[f64],
    loadings: &Matrix,
    max_k: usize,
) -> Vec<f64> {
    let p = z.cols;
    let mut press = vec![0.0; max_k + 1];
    for &i in test {
        let x: Vec<f64> = (0..p).map(|j| z.get(i, j) - mean[j]).collect();
        let t: Vec<f64> = (0..max_k)
            .map(|a| (0..p).map(|j| loadings.get(j, a) * x[j]).sum())
            .collect();
        let mut residual = x.clone();
        let mut leverage = vec![0.0; p];
        press[0] += x.iter().map(|v| v * v).sum::<f64>();
        for a in 0..max_k {
            let mut sum = 0.0;
            for j in 0..p {
                let pj = loadings.get(j, a);
                residual[j] -= pj * t[a];
                leverage[j] += pj * pj;
                let error = residual[j] / (1.0 - leverage[j]).max(SMALLEST_DENOMINATOR);
                sum += error * error;
            }
            press[a + 1] += sum;
        }
    }
    press
}
