//! model.json: everything `sextant apply` needs to score new rows exactly as the
//! analysed rows were scored: features in order, their transforms, how missing
//! cells are filled, centre and scale, loadings, eigenvalues, the number of kept
//! components, the T² and SPE limits for new rows, and the sign rule.

use crate::run::{Analysis, Prepared, Preprocessed};
use crate::stages::impute::ImputationModel;
use crate::stages::missing::FillModel;
use serde::{Deserialize, Serialize};

/// The model file's own format version.
pub const MODEL_FORMAT: u32 = 1;

/// A saved model.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Model {
    pub model_format: u32,
    pub tool_version: String,
    /// What made it: the resolved recipe's SHA-256 and the input table's SHA-256.
    pub resolved_recipe_sha256: String,
    pub input_sha256: String,
    pub id: Option<String>,
    pub groups: Vec<String>,
    pub scaling: String,
    pub features: Vec<ModelFeature>,
    pub fill: Fill,
    /// Rows of the analysed table (the n of the limits).
    pub rows: usize,
    pub kept: usize,
    /// Eigenvalues of the kept components (divisor n − 1).
    pub eigenvalues: Vec<f64>,
    /// `loadings[feature][component]` for the kept components.
    pub loadings: Vec<Vec<f64>>,
    pub limits: Vec<ModelLimits>,
    pub spe_limit: String,
    pub sign_rule: String,
}

/// One feature: its transform, how it is centred and scaled, and the range of
/// its analysed values (after the transform), for spotting new values in
/// another unit.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct ModelFeature {
    pub name: String,
    pub transform: Option<String>,
    pub centre: f64,
    pub scale: f64,
    pub min: f64,
    pub max: f64,
}

/// How missing cells of new rows are filled.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(tag = "method", rename_all = "kebab-case")]
pub enum Fill {
    /// Rows with a missing cell cannot be scored.
    DropRows,
    /// One value per feature (on the transformed scale).
    Constant { values: Vec<f64> },
    /// Projection on the iterative PCA imputation model.
    IterativePca { model: ImputationModel },
    /// Mean of the nearest analysed rows; `reference[feature][row]`, null where missing.
    Knn {
        neighbours: usize,
        reference: Vec<Vec<Option<f64>>>,
    },
}

/// Limits at one confidence level for new rows.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct ModelLimits {
    pub confidence: f64,
    /// T² limit for new rows (F form); null where not defined.
    pub t2_new_rows: Option<f64>,
    pub spe: Option<f64>,
}

/// Builds the model of a finished analysis.
pub fn build(
    prepared: &Prepared,
    pre: &Preprocessed,
    analysis: &Analysis,
    resolved_sha: &str,
) -> Model {
    let plan = &prepared.plan;
    let names = &pre.scaled.names;
    // The fill model covers the features kept by the missing stage; keep the
    // entries of the features that reached the analysis.
    let fill_names: Vec<&String> = pre
        .missing
        .features
        .iter()
        .filter(|f| f.dropped.is_none())
        .map(|f| &f.feature)
        .collect();
    let pick: Vec<usize> = names
        .iter()
        .map(|n| {
            fill_names
                .iter()
                .position(|f| *f == n)
                .expect("a kept feature")
        })
        .collect();
    let fill = match &pre.fill_model {
        FillModel::DropRows => Fill::DropRows,
        FillModel::Constant(values) => Fill::Constant {
            values: pick.iter().map(|&i| values[i]).collect(),
        },
        FillModel::Iterative(m) => Fill::IterativePca {
            model: ImputationModel {
                centre: pick.iter().map(|&i| m.centre[i]).collect(),
                scale: pick.iter().map(|&i| m.scale[i]).collect(),
                loadings: pick.iter().map(|&i| m.loadings[i].clone()).collect(),
            },
        },
        FillModel::Knn { reference } => Fill::Knn {
            neighbours: plan.knn.neighbours.0.get(),
            reference: pick
                .iter()
                .map(|&i| {
                    reference[i]
                        .iter()
                        .map(|v| (!v.is_nan()).then_some(*v))
                        .collect()
                })
                .collect(),
        },
    };
    let d = &analysis.decomposition;
    let k = analysis.selection.kept;
    let features = names
        .iter()
        .map(|name| {
            let s = pre
                .scaling
                .features
                .iter()
                .find(|s| &s.feature == name)
                .expect("a scaled feature");
            let t = plan
                .features
                .iter()
                .position(|f| f == name)
                .and_then(|i| plan.transforms[i]);
            ModelFeature {
                name: name.clone(),
                transform: t.map(|t| t.name().to_string()),
                centre: s.centre,
                scale: s.scale,
                min: s.min,
                max: s.max,
            }
        })
        .collect();
    Model {
        model_format: MODEL_FORMAT,
        tool_version: env!("CARGO_PKG_VERSION").to_string(),
        resolved_recipe_sha256: resolved_sha.to_string(),
        input_sha256: prepared.input.sha256.clone(),
        id: plan.input.id.clone(),
        groups: plan.input.groups.clone(),
        scaling: plan.scaling.name().to_string(),
        features,
        fill,
        rows: pre.scaled.n_rows(),
        kept: k,
        eigenvalues: d.eigenvalues[..k].to_vec(),
        loadings: (0..names.len()).map(|j| (0..k).map(|a| d.loadings.get(j, a)).collect()).collect(),
        limits: analysis
            .diagnostics
            .limits
            .iter()
            .map(|l| ModelLimits { confidence: l.confidence, t2_new_rows: l.t2_new_rows, spe: l.spe })
            .collect(),
        spe_limit: match analysis.diagnostics.spe_method {
            crate::recipe::raw::SpeLimit::JacksonMudholkar => "jackson-mudholkar".into(),
            crate::recipe::raw::SpeLimit::Box => "box".into(),
        },
        sign_rule: "the largest-magnitude loading of each component is positive; magnitudes within 1e-9 relative are ties, won by the first feature".into(),
    }
}

/// The model as pretty JSON text.
pub fn to_json(model: &Model) -> Vec<u8> {
    let mut text = serde_json::to_string_pretty(model).expect("a model serialises");
    text.push('\n');
    text.into_bytes()
}
