//! The resolved recipe: every setting the run used, defaults included, in a
//! canonical JSON form. Its hash identifies the analysis, so a change of a default
//! in a later version of sextant shows up as a changed recipe.

use super::LoadedRecipe;
use super::plan::InputPlan;
use super::raw::{DEFAULT_COMPUTE, DEFAULT_KEEP, DecompositionMethod, Keep};
use serde_json::{Value, json};
use toml::Spanned;

fn names(list: &[Spanned<String>]) -> Vec<String> {
    list.iter().map(|s| s.get_ref().clone()).collect()
}

fn keep_value(keep: Option<Keep>) -> Value {
    match keep {
        None => json!(DEFAULT_KEEP),
        Some(Keep::Count(k)) => json!(k.get()),
        Some(Keep::Variance(s)) => json!({ "variance": s.0 }),
        Some(Keep::Kaiser) => json!("kaiser"),
        Some(Keep::BrokenStick) => json!("broken-stick"),
        Some(Keep::ParallelAnalysis) => json!("parallel-analysis"),
        Some(Keep::CrossValidation) => json!("cross-validation"),
    }
}

/// The recipe with every default filled in.
pub fn resolved_recipe(recipe: &LoadedRecipe, input: &InputPlan) -> Value {
    let raw = &recipe.raw;
    let features = match &raw.input.features {
        Some(list) => json!(names(list)),
        None => json!("every numeric column that is not the id, a group or excluded"),
    };
    let iterative = raw.missing.iterative();
    let mut resolved = json!({
        "format": 1,
        "title": raw.title,
        "notes": raw.notes,
        "input": {
            "file": raw.input.file.get_ref(),
            "sha256": raw.input.sha256.as_ref().map(|s| s.get_ref().0.clone()),
            "id": input.id,
            "groups": input.groups,
            "features": features,
            "exclude": names(&raw.input.exclude),
            "missing": input.options.missing_tokens,
            "delimiter": (input.options.delimiter as char).to_string(),
        },
        "missing": {
            "method": raw.missing.method,
            "max_feature_missing": raw.missing.max_feature_missing.0,
            "iterative_pca": {
                "components": super::plan::imputation_components(recipe),
                "variant": iterative.variant,
                "tolerance": iterative.tolerance,
                "max_iterations": iterative.max_iterations,
                "start": iterative.start,
                "allow_unconverged": iterative.allow_unconverged,
            },
            "knn": raw.missing.knn(),
        },
        "transform": {
            "log10": names(&raw.transform.log10),
            "ln": names(&raw.transform.ln),
            "sqrt": names(&raw.transform.sqrt),
        },
        "scaling": {
            "method": raw.scaling.method,
            "constant_features": raw.scaling.constant_policy(),
        },
        "components": components_value(recipe),
        "diagnostics": {
            "confidence": raw.diagnostics.confidence,
            "spe_limit": raw.diagnostics.spe_limit,
            "contributions_max_rows": raw.diagnostics.contributions_max_rows,
        },
        "plot": plots_value(recipe, input),
        "output": { "folder": raw.output.folder.get_ref() },
    });
    let written = resolved["input"].as_object_mut().expect("an object");
    written.extend(number_marks(input));
    resolved
}

/// The decimal mark, thousands separator and missing codes of single columns,
/// written only when the recipe departs from the defaults, so that the digest
/// of a recipe that does not use them stays what it was.
fn number_marks(input: &InputPlan) -> Vec<(String, Value)> {
    let options = &input.options;
    let mut keys = Vec::new();
    if options.decimal != b'.' {
        keys.push((
            "decimal".into(),
            json!((options.decimal as char).to_string()),
        ));
    }
    if let Some(t) = options.thousands {
        keys.push(("thousands".into(), json!((t as char).to_string())));
    }
    if !options.missing_per_column.is_empty() {
        let codes: serde_json::Map<String, Value> = options
            .missing_per_column
            .iter()
            .map(|(name, codes)| (name.clone(), json!(codes)))
            .collect();
        keys.push(("missing_per_column".into(), Value::Object(codes)));
    }
    keys
}

/// `[components]` with every default written. The randomized method's settings
/// appear only when that method is chosen, since the recipe refuses them
/// otherwise and a resolved recipe must read back as a recipe.
fn components_value(recipe: &LoadedRecipe) -> Value {
    let c = &recipe.raw.components;
    let method = c
        .method
        .as_ref()
        .map_or(DecompositionMethod::Exact, |m| *m.get_ref());
    let mut v = json!({
        "keep": keep_value(c.keep.as_ref().map(|k| *k.get_ref())),
        "compute": c.compute.as_ref().map_or(DEFAULT_COMPUTE, |n| n.get_ref().0.get()),
        "method": method,
        "parallel_analysis": c.parallel(),
        "cross_validation": c.cross_validation(),
    });
    if method == DecompositionMethod::Randomized {
        let settings = c
            .randomized
            .as_ref()
            .map(|s| s.get_ref().clone())
            .unwrap_or_default();
        v.as_object_mut()
            .expect("an object")
            .insert("randomized".into(), json!(settings));
    }
    v
}

/// The plots with every default written, using only the keys each kind takes.
fn plots_value(recipe: &LoadedRecipe, input: &InputPlan) -> Value {
    use super::raw::PlotKind::*;
    let plans = super::plots::plot_plans(recipe, &input.groups).unwrap_or_default();
    let list: Vec<Value> = plans
        .iter()
        .map(|p| {
            let mut v = json!({ "kind": p.kind, "file": p.file, "title": p.title });
            let m = v.as_object_mut().expect("an object");
            match p.kind {
                Loadings if p.y == 0 => {
                    m.insert("component".into(), json!(p.x));
                }
                Scores | Biplot | CorrelationCircle | Loadings => {
                    m.insert("x".into(), json!(p.x));
                    m.insert("y".into(), json!(p.y));
                }
                Scree | OutlierMap => {}
            }
            if matches!(p.kind, Scores | Biplot) {
                m.insert("color".into(), json!(p.color));
            }
            if p.kind == Scores {
                m.insert("ellipse".into(), json!(p.ellipse));
            }
            if matches!(p.kind, Scores | Biplot | OutlierMap) {
                m.insert("labels".into(), json!(p.labels));
                m.insert("max_labels".into(), json!(p.max_labels));
                m.insert("density_above".into(), json!(p.density_above));
            }
            v
        })
        .collect();
    Value::Array(list)
}

/// Turns a resolved recipe (as stored in a manifest) back into recipe text that
/// describes the same analysis: nulls, the default feature rule and the
/// settings that do not apply under the recipe's choices are left out (the
/// manifest records them all; a recipe refuses the ones without effect).
pub fn recipe_text(resolved: &Value) -> Result<String, String> {
    let mut value = resolved.clone();
    super::applies::drop_inapplicable(&mut value);
    if let Some(input) = value.get_mut("input").and_then(Value::as_object_mut)
        && input.get("features").is_some_and(Value::is_string)
    {
        input.remove("features");
    }
    let toml_value = to_toml(&value).ok_or("the resolved recipe is not a table")?;
    toml::to_string(&toml_value).map_err(|e| e.to_string())
}

fn to_toml(value: &Value) -> Option<toml::Value> {
    Some(match value {
        Value::Null => return None,
        Value::Bool(b) => toml::Value::Boolean(*b),
        Value::Number(n) => match n.as_i64() {
            Some(i) => toml::Value::Integer(i),
            None => toml::Value::Float(n.as_f64()?),
        },
        Value::String(s) => toml::Value::String(s.clone()),
        Value::Array(items) => toml::Value::Array(items.iter().filter_map(to_toml).collect()),
        Value::Object(map) => toml::Value::Table(
            map.iter()
                .filter_map(|(k, v)| Some((k.clone(), to_toml(v)?)))
                .collect(),
        ),
    })
}
