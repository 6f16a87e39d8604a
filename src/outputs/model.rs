//! model.json: everything `sextant apply` needs to score new rows exactly as the
//! analysed rows were scored: features in order, their transforms, how missing
//! cells are filled, centre and scale, loadings, eigenvalues, the number of kept
//! components, the T² and SPE limits for new rows, and the sign rule.
//!
//! A model.json is read back by [`parse`], which checks every shape and value
//! `apply` relies on ([`Model::check`]) and names the offending field as a path
//! (`loadings[3]`, `fill.model.centre`), so a model that was edited (or written
//! by something else) is refused instead of scoring garbage or failing midway.

use crate::analysis::{Analysis, Prepared, Preprocessed};
use crate::recipe::plan::Transform;
use crate::recipe::raw::{ScalingMethod, SpeLimit};
use crate::stages::impute::ImputationModel;
use crate::stages::missing::FillModel;
use serde::{Deserialize, Serialize};

/// The model file's own format version.
pub const MODEL_FORMAT: u32 = 1;

/// The sign rule every model is written with.
pub const SIGN_RULE: &str = "the largest-magnitude loading of each component is positive; magnitudes within 1e-9 relative are ties, won by the first feature";

/// How far a loading of a unit-length component may pass 1 in size (rounding).
const LOADING_SLACK: f64 = 1e-6;

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
    pub scaling: ScalingMethod,
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
    pub spe_limit: SpeLimit,
    pub sign_rule: String,
}

/// One feature: its transform, how it is centred and scaled, and the range of
/// its analysed values (after the transform), for spotting new values in
/// another unit.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct ModelFeature {
    pub name: String,
    pub transform: Option<Transform>,
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
            // More neighbours than rows fill exactly as all the rows do; the
            // model says what is used, so that it checks as a model should.
            neighbours: plan
                .knn
                .neighbours
                .0
                .get()
                .min(reference.first().map_or(1, Vec::len)),
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
                transform: t,
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
        scaling: plan.scaling,
        features,
        fill,
        rows: pre.scaled.n_rows(),
        kept: k,
        eigenvalues: d.eigenvalues[..k].to_vec(),
        loadings: (0..names.len())
            .map(|j| (0..k).map(|a| d.loadings.get(j, a)).collect())
            .collect(),
        limits: analysis
            .diagnostics
            .limits
            .iter()
            .map(|l| ModelLimits {
                confidence: l.confidence,
                t2_new_rows: l.t2_new_rows,
                spe: l.spe,
            })
            .collect(),
        spe_limit: analysis.diagnostics.spe_method,
        sign_rule: SIGN_RULE.into(),
    }
}

/// What is wrong with a model file: the field, as a path, and the problem.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ModelProblem {
    pub field: String,
    pub problem: String,
}

fn problem(field: impl Into<String>, problem: impl Into<String>) -> ModelProblem {
    ModelProblem {
        field: field.into(),
        problem: problem.into(),
    }
}

/// Reads a model.json and checks it ([`Model::check`]).
pub fn parse(bytes: &[u8]) -> Result<Model, ModelProblem> {
    let mut reader = serde_json::Deserializer::from_slice(bytes);
    let model: Model = serde_path_to_error::deserialize(&mut reader).map_err(|e| {
        let field = e.path().to_string();
        let field = if field == "." {
            "model.json".to_string()
        } else {
            field
        };
        problem(field, format!("cannot be read ({})", e.into_inner()))
    })?;
    reader
        .end()
        .map_err(|e| problem("model.json", format!("has text after the model ({e})")))?;
    model.check()?;
    Ok(model)
}

/// Checks that every value is finite (`what` says where).
fn all_finite(field: &str, values: &[f64]) -> Result<(), ModelProblem> {
    match values.iter().position(|v| !v.is_finite()) {
        Some(i) => Err(problem(format!("{field}[{i}]"), "is not a finite number")),
        None => Ok(()),
    }
}

/// Checks the length of a list.
fn length(field: &str, found: usize, want: usize, of: &str) -> Result<(), ModelProblem> {
    if found == want {
        Ok(())
    } else {
        Err(problem(
            field,
            format!("has {found} entries; expected {want} ({of})"),
        ))
    }
}

/// Checks a loadings table: `rows` rows of `cols` finite entries, each at
/// most 1 in size (the loadings of unit-length components).
fn loadings_table(
    field: &str,
    table: &[Vec<f64>],
    rows: usize,
    cols: usize,
    of: &str,
) -> Result<(), ModelProblem> {
    length(field, table.len(), rows, "one per feature")?;
    for (j, row) in table.iter().enumerate() {
        let at = format!("{field}[{j}]");
        length(&at, row.len(), cols, of)?;
        all_finite(&at, row)?;
        if let Some(a) = row.iter().position(|v| v.abs() > 1.0 + LOADING_SLACK) {
            return Err(problem(
                format!("{at}[{a}]"),
                "is larger than 1 in size, which a loading of a unit-length component cannot be",
            ));
        }
    }
    Ok(())
}

impl Model {
    /// Checks what `apply` relies on: the format, every length against the
    /// number of features p and of kept components k, finite values, positive
    /// and sorted eigenvalues, positive scales, known names.
    pub fn check(&self) -> Result<(), ModelProblem> {
        if self.model_format != MODEL_FORMAT {
            return Err(problem(
                "model_format",
                format!(
                    "is {}; this version of sextant reads model format {MODEL_FORMAT}",
                    self.model_format
                ),
            ));
        }
        let p = self.features.len();
        if p == 0 {
            return Err(problem(
                "features",
                "is empty; a model has at least one feature",
            ));
        }
        self.check_features()?;
        self.check_roles()?;
        let k = self.kept;
        if k == 0 || k > p {
            return Err(problem(
                "kept",
                format!("is {k}; it must be at least 1 and at most the number of features, {p}"),
            ));
        }
        if self.rows < 2 || self.rows <= k {
            return Err(problem(
                "rows",
                format!(
                    "is {}; an analysis of {} had at least 2 rows and more than {k}",
                    self.rows,
                    crate::text::count(k, "component", "components")
                ),
            ));
        }
        length(
            "eigenvalues",
            self.eigenvalues.len(),
            k,
            "one per kept component",
        )?;
        all_finite("eigenvalues", &self.eigenvalues)?;
        if let Some(i) = self.eigenvalues.iter().position(|&v| v <= 0.0) {
            return Err(problem(format!("eigenvalues[{i}]"), "is not positive"));
        }
        if let Some(i) = self.eigenvalues.windows(2).position(|w| w[1] > w[0]) {
            return Err(problem(
                format!("eigenvalues[{}]", i + 1),
                "is larger than the one before; eigenvalues are sorted largest first",
            ));
        }
        loadings_table("loadings", &self.loadings, p, k, "one per kept component")?;
        self.check_limits()?;
        known("sign_rule", &self.sign_rule, &[SIGN_RULE])?;
        self.check_fill()
    }

    fn check_features(&self) -> Result<(), ModelProblem> {
        let scaling = self.scaling;
        let mut seen = std::collections::BTreeSet::new();
        for (j, f) in self.features.iter().enumerate() {
            let at = |key: &str| format!("features[{j}].{key}");
            if f.name.is_empty() {
                return Err(problem(at("name"), "is empty"));
            }
            if !seen.insert(f.name.as_str()) {
                return Err(problem(at("name"), format!("`{}` appears twice", f.name)));
            }
            for (key, v) in [
                ("centre", f.centre),
                ("scale", f.scale),
                ("min", f.min),
                ("max", f.max),
            ] {
                if !v.is_finite() {
                    return Err(problem(at(key), "is not a finite number"));
                }
            }
            if f.min > f.max {
                return Err(problem(at("min"), "is larger than max"));
            }
            if f.scale <= 0.0 {
                return Err(problem(at("scale"), "is not positive"));
            }
            if !scaling.centers() {
                if f.centre != 0.0 || f.scale != 1.0 {
                    return Err(problem(
                        at("centre"),
                        format!(
                            "and scale must be 0 and 1 with scaling \"{}\"",
                            scaling.name()
                        ),
                    ));
                }
                continue;
            }
            if !scaling.divides() && f.scale != 1.0 {
                return Err(problem(
                    at("scale"),
                    format!("must be 1 with scaling \"{}\"", scaling.name()),
                ));
            }
            // The centre is the mean of the analysed values, so it lies in
            // their range (up to rounding).
            let slack = 1e-9 * f.min.abs().max(f.max.abs()).max(f.max - f.min);
            if f.centre < f.min - slack || f.centre > f.max + slack {
                return Err(problem(
                    at("centre"),
                    format!(
                        "is {}, outside the analysed range [{}, {}] it is the mean of",
                        f.centre, f.min, f.max
                    ),
                ));
            }
        }
        Ok(())
    }

    /// The id and group columns are read as text, so none may be a feature.
    fn check_roles(&self) -> Result<(), ModelProblem> {
        let is_feature = |n: &str| self.features.iter().any(|f| f.name == n);
        if let Some(id) = &self.id
            && (id.is_empty() || is_feature(id) || self.groups.contains(id))
        {
            return Err(problem(
                "id",
                format!("`{id}` is empty, a feature or a group"),
            ));
        }
        for (i, g) in self.groups.iter().enumerate() {
            if g.is_empty() || is_feature(g) || self.groups[..i].contains(g) {
                return Err(problem(
                    format!("groups[{i}]"),
                    format!("`{g}` is empty, a feature or named twice"),
                ));
            }
        }
        Ok(())
    }

    fn check_limits(&self) -> Result<(), ModelProblem> {
        for (i, l) in self.limits.iter().enumerate() {
            let at = |key: &str| format!("limits[{i}].{key}");
            // JSON holds no NaN, so the confidence is a number.
            if l.confidence <= 0.0 || l.confidence >= 1.0 {
                return Err(problem(at("confidence"), "is not strictly between 0 and 1"));
            }
            for (key, v) in [("t2_new_rows", l.t2_new_rows), ("spe", l.spe)] {
                if v.is_some_and(|v| !(v.is_finite() && v > 0.0)) {
                    return Err(problem(at(key), "is not a positive finite number or null"));
                }
            }
        }
        Ok(())
    }

    fn check_fill(&self) -> Result<(), ModelProblem> {
        let p = self.features.len();
        match &self.fill {
            Fill::DropRows => Ok(()),
            Fill::Constant { values } => {
                length("fill.values", values.len(), p, "one per feature")?;
                all_finite("fill.values", values)
            }
            Fill::IterativePca { model } => {
                length(
                    "fill.model.centre",
                    model.centre.len(),
                    p,
                    "one per feature",
                )?;
                all_finite("fill.model.centre", &model.centre)?;
                length("fill.model.scale", model.scale.len(), p, "one per feature")?;
                all_finite("fill.model.scale", &model.scale)?;
                if let Some(j) = model.scale.iter().position(|&v| v <= 0.0) {
                    return Err(problem(format!("fill.model.scale[{j}]"), "is not positive"));
                }
                let s = model.loadings.first().map_or(0, Vec::len);
                if s == 0 || s >= p {
                    return Err(problem(
                        "fill.model.loadings",
                        format!(
                            "has {}; an imputation model has at least 1 and fewer than the number of features, {p}",
                            crate::text::count(s, "component", "components")
                        ),
                    ));
                }
                loadings_table(
                    "fill.model.loadings",
                    &model.loadings,
                    p,
                    s,
                    "as many as the first feature's",
                )
            }
            Fill::Knn {
                neighbours,
                reference,
            } => {
                length("fill.reference", reference.len(), p, "one per feature")?;
                let n = reference.first().map_or(0, Vec::len);
                for (j, column) in reference.iter().enumerate() {
                    let at = format!("fill.reference[{j}]");
                    length(&at, column.len(), n, "as many rows as the first feature's")?;
                    if let Some(r) = column
                        .iter()
                        .position(|v| v.is_some_and(|v| !v.is_finite()))
                    {
                        return Err(problem(
                            format!("{at}[{r}]"),
                            "is not a finite number or null",
                        ));
                    }
                }
                if *neighbours == 0 || *neighbours > n {
                    return Err(problem(
                        "fill.neighbours",
                        format!(
                            "is {neighbours}; it must be at least 1 and at most the number of reference rows, {n}"
                        ),
                    ));
                }
                Ok(())
            }
        }
    }
}

/// Checks that `value` is one of `choices`, and returns it.
fn known<'a>(field: &str, value: &'a str, choices: &[&str]) -> Result<&'a str, ModelProblem> {
    if choices.contains(&value) {
        Ok(value)
    } else {
        Err(problem(
            field,
            format!(
                "is `{value}`; expected one of: {}",
                choices
                    .iter()
                    .map(|c| format!("`{c}`"))
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
        ))
    }
}

/// The model as pretty JSON text.
pub fn to_json(model: &Model) -> Vec<u8> {
    let mut text = serde_json::to_string_pretty(model).expect("a model serialises");
    text.push('\n');
    text.into_bytes()
}
