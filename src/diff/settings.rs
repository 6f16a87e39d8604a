//! The recipe settings that differ between two sides: one row per changed
//! setting, named by a path a reader can find in the recipe
//! (`plot[2].ellipse`, the second `[[plot]]`), and a table present on one side
//! only as one row that says it was added or removed.
//!
//! Both sides are compared as resolved recipes (every default written), after
//! removing the settings that have no effect under the recipe's own choices
//! (`recipe::applies::drop_inapplicable`, the list the recipe check reads): the
//! iterative-PCA options of a recipe that fills with the mean are resolved in
//! the manifest, but changing them changes nothing, so they are not a
//! difference. Switching the method to one that uses them shows them as an
//! added table, with the values now in effect.
//!
//! Values are the recipe's own, written in full (`text::number`): a setting is
//! not a measurement, and rounding could show two different tolerances as equal.

use crate::recipe::applies::drop_inapplicable;
use serde_json::Value;
use std::collections::BTreeSet;

/// One setting that differs.
#[derive(Debug, Clone, PartialEq)]
pub struct SettingChange {
    /// Where it is in the recipe: `scaling.method`, `plot[2].ellipse`; for a
    /// table that moved in a list, `plot[2→3].ellipse`.
    pub path: String,
    /// The value on each side, as text; `None` where that side has no such
    /// setting or table.
    pub before: Option<String>,
    pub after: Option<String>,
    /// Whether this setting only says where results are written, so it does
    /// not make the analyses differ.
    pub output_only: bool,
}

/// The settings in effect that differ between two resolved recipes.
pub fn changed_settings(a: &Value, b: &Value) -> Vec<SettingChange> {
    let (mut a, mut b) = (a.clone(), b.clone());
    drop_inapplicable(&mut a);
    drop_inapplicable(&mut b);
    let mut out = Vec::new();
    walk(String::new(), Some(&a), Some(&b), &mut out);
    out
}

fn join(prefix: &str, key: &str) -> String {
    if prefix.is_empty() {
        key.to_string()
    } else {
        format!("{prefix}.{key}")
    }
}

fn walk(path: String, a: Option<&Value>, b: Option<&Value>, out: &mut Vec<SettingChange>) {
    match (a, b) {
        (Some(Value::Object(x)), Some(Value::Object(y))) => {
            let keys: BTreeSet<&String> = x.keys().chain(y.keys()).collect();
            for k in keys {
                walk(join(&path, k), x.get(k), y.get(k), out);
            }
        }
        (Some(Value::Array(x)), Some(Value::Array(y))) if holds_tables(x) || holds_tables(y) => {
            tables(&path, x, y, out);
        }
        (Some(x), Some(y)) if x == y => {}
        (None, None) => {}
        _ => out.push(SettingChange {
            output_only: path == "output" || path.starts_with("output."),
            before: a.map(shown),
            after: b.map(shown),
            path,
        }),
    }
}

fn holds_tables(list: &[Value]) -> bool {
    list.iter().any(Value::is_object)
}

/// A list of tables (`[[plot]]`): tables equal on both sides are matched in
/// order (longest common subsequence), so adding one plot does not show every
/// later plot as changed; between matches, tables are compared field by field
/// in order and the surplus is added or removed.
fn tables(path: &str, x: &[Value], y: &[Value], out: &mut Vec<SettingChange>) {
    let pairs = common_subsequence(x, y);
    let (mut i, mut j) = (0, 0);
    for (mi, mj) in pairs.into_iter().chain([(x.len(), y.len())]) {
        let (gap_x, gap_y) = (mi - i, mj - j);
        for k in 0..gap_x.max(gap_y) {
            let (ia, ib) = (i + k, j + k);
            let at = match (k < gap_x, k < gap_y) {
                (true, true) if ia == ib => format!("{path}[{}]", ia + 1),
                (true, true) => format!("{path}[{}→{}]", ia + 1, ib + 1),
                (true, false) => format!("{path}[{}]", ia + 1),
                _ => format!("{path}[{}]", ib + 1),
            };
            let a = (k < gap_x).then(|| &x[ia]);
            let b = (k < gap_y).then(|| &y[ib]);
            walk(at, a, b, out);
        }
        (i, j) = (mi + 1, mj + 1);
    }
}

/// Index pairs of a longest common subsequence of equal elements, in order.
fn common_subsequence(x: &[Value], y: &[Value]) -> Vec<(usize, usize)> {
    let (n, m) = (x.len(), y.len());
    let mut len = vec![vec![0usize; m + 1]; n + 1];
    for i in (0..n).rev() {
        for j in (0..m).rev() {
            len[i][j] = if x[i] == y[j] {
                len[i + 1][j + 1] + 1
            } else {
                len[i + 1][j].max(len[i][j + 1])
            };
        }
    }
    let (mut i, mut j, mut pairs) = (0, 0, Vec::new());
    while i < n && j < m {
        if x[i] == y[j] {
            pairs.push((i, j));
            i += 1;
            j += 1;
        } else if len[i + 1][j] >= len[i][j + 1] {
            i += 1;
        } else {
            j += 1;
        }
    }
    pairs
}

/// A setting's value as a reader writes it: strings bare, lists comma
/// separated, `not set` for an absent optional value; a table by its kind.
fn shown(v: &Value) -> String {
    match v {
        Value::Null => "not set".into(),
        Value::Bool(b) => b.to_string(),
        Value::Number(n) => match n.as_i64() {
            Some(i) => i.to_string(),
            None => crate::text::number(n.as_f64().unwrap_or(f64::NAN)),
        },
        Value::String(s) if s.is_empty() => "\"\"".into(),
        Value::String(s) => s.clone(),
        Value::Array(items) if items.is_empty() => "none".into(),
        Value::Array(items) => items.iter().map(shown).collect::<Vec<_>>().join(", "),
        Value::Object(map) => match map.get("kind").and_then(Value::as_str) {
            Some(kind) => format!("table (kind {kind})"),
            None if map.len() <= 2 => map
                .iter()
                .map(|(k, v)| format!("{k} = {}", shown(v)))
                .collect::<Vec<_>>()
                .join(", "),
            None => "table".into(),
        },
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    fn paths(a: Value, b: Value) -> Vec<String> {
        changed_settings(&a, &b)
            .into_iter()
            .map(|c| {
                format!(
                    "{} {} → {}",
                    c.path,
                    c.before.unwrap_or_else(|| "·".into()),
                    c.after.unwrap_or_else(|| "·".into())
                )
            })
            .collect()
    }

    #[test]
    fn an_inserted_table_is_one_added_row_and_a_changed_field_one_row() {
        let scree = json!({"kind": "scree"});
        let scores = |e: f64| json!({"kind": "scores", "ellipse": e});
        let loadings = json!({"kind": "loadings"});
        assert_eq!(
            paths(
                json!({"plot": [scree.clone(), scores(0.95), loadings.clone()]}),
                json!({"plot": [scree.clone(), scores(0.99), loadings.clone()]})
            ),
            ["plot[2].ellipse 0.95 → 0.99"]
        );
        assert_eq!(
            paths(
                json!({"plot": [scree.clone(), loadings.clone()]}),
                json!({"plot": [scree.clone(), scores(0.9), loadings.clone()]})
            ),
            ["plot[2] · → table (kind scores)"]
        );
        assert_eq!(
            paths(
                json!({"plot": [scree, scores(0.9), loadings.clone()]}),
                json!({"plot": [loadings]})
            ),
            [
                "plot[1] table (kind scree) → ·",
                "plot[2] table (kind scores) → ·"
            ]
        );
    }

    #[test]
    fn settings_without_effect_are_not_differences() {
        let mean = |tolerance: f64| json!({"missing": {"method": "mean", "iterative_pca": {"tolerance": tolerance}}});
        assert!(paths(mean(1e-12), mean(1e-6)).is_empty());
        let iterative = |tolerance: f64| json!({"missing": {"method": "iterative-pca", "iterative_pca": {"tolerance": tolerance}}});
        assert_eq!(
            paths(iterative(1e-12), iterative(1e-6)),
            ["missing.iterative_pca.tolerance 1e-12 → 1e-6"]
        );
    }
}
