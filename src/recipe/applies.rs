//! Settings that only matter under another choice, and the one rule about them:
//! a setting written where it has no effect is an error pointing at it.
//!
//! A reviewer reading `[missing.knn] neighbours = 3` beside `method = "mean"`
//! would believe the analysis used three neighbours. So every setting that
//! depends on another key is listed once in [`CONDITIONAL`], and both the
//! recipe check ([`check_applicable`]) and the rebuilding of a recipe from a
//! manifest's resolved recipe ([`drop_inapplicable`]) read that list.

use super::LoadedRecipe;
use super::raw::{Keep, RawRecipe};
use crate::error::{RecipeError, RecipeProblem};
use std::ops::Range;

/// A setting that applies only when another key of the same section has one of
/// some values.
pub struct Conditional {
    /// The section (`missing`) and the setting in it (`knn`).
    pub section: &'static str,
    pub setting: &'static str,
    /// Whether the setting is a table (`[missing.knn]`) or a key.
    pub is_table: bool,
    /// The key of the same section it depends on, and the values (as the
    /// resolved recipe writes them) under which it applies.
    pub key: &'static str,
    pub applies: &'static [&'static str],
    /// Where the setting is written in the recipe, if it is.
    written: fn(&RawRecipe) -> Option<Range<usize>>,
    /// The key's value in effect, as TOML text, and whether it is the default.
    current: fn(&RawRecipe) -> (String, bool),
}

/// Every setting that depends on another choice.
pub const CONDITIONAL: &[Conditional] = &[
    Conditional {
        section: "missing",
        setting: "iterative_pca",
        is_table: true,
        key: "method",
        applies: &["iterative-pca"],
        written: |r| r.missing.iterative_pca.as_ref().map(|s| s.span()),
        current: |r| (quoted(r.missing.method.name()), false),
    },
    Conditional {
        section: "missing",
        setting: "knn",
        is_table: true,
        key: "method",
        applies: &["knn"],
        written: |r| r.missing.knn.as_ref().map(|s| s.span()),
        current: |r| (quoted(r.missing.method.name()), false),
    },
    Conditional {
        section: "scaling",
        setting: "constant_features",
        is_table: false,
        key: "method",
        applies: super::raw::ScalingMethod::DIVIDING,
        written: |r| r.scaling.constant_features.as_ref().map(|s| s.span()),
        current: |r| (quoted(r.scaling.method.name()), false),
    },
    Conditional {
        section: "components",
        setting: "parallel_analysis",
        is_table: true,
        key: "keep",
        applies: &["parallel-analysis"],
        written: |r| r.components.parallel_analysis.as_ref().map(|s| s.span()),
        current: keep_text,
    },
    Conditional {
        section: "components",
        setting: "cross_validation",
        is_table: true,
        key: "keep",
        applies: &["cross-validation"],
        written: |r| r.components.cross_validation.as_ref().map(|s| s.span()),
        current: keep_text,
    },
    Conditional {
        section: "components",
        setting: "randomized",
        is_table: true,
        key: "method",
        applies: &["randomized"],
        written: |r| r.components.randomized.as_ref().map(|s| s.span()),
        current: |r| {
            let method = r.components.method.as_ref().map(|m| *m.get_ref());
            (quoted(method.unwrap_or_default().name()), method.is_none())
        },
    },
];

fn quoted(name: &str) -> String {
    format!("\"{name}\"")
}

fn keep_text(r: &RawRecipe) -> (String, bool) {
    match r.components.keep.as_ref().map(|k| *k.get_ref()) {
        None => (super::raw::DEFAULT_KEEP.to_string(), true),
        Some(Keep::Count(k)) => (k.to_string(), false),
        Some(Keep::Variance(s)) => (format!("{{ variance = {} }}", s.0), false),
        Some(Keep::Kaiser) => (quoted("kaiser"), false),
        Some(Keep::BrokenStick) => (quoted("broken-stick"), false),
        Some(Keep::ParallelAnalysis) => (quoted("parallel-analysis"), false),
        Some(Keep::CrossValidation) => (quoted("cross-validation"), false),
    }
}

impl Conditional {
    /// The setting as a reader finds it: `[missing.knn]` or `scaling.constant_features`.
    fn name(&self) -> String {
        if self.is_table {
            format!("[{}.{}]", self.section, self.setting)
        } else {
            format!("{}.{}", self.section, self.setting)
        }
    }

    fn applies_to(&self, value: &str) -> bool {
        self.applies.contains(&value)
    }
}

/// Refuses a setting written where the choice it depends on makes it do nothing.
pub fn check_applicable(recipe: &LoadedRecipe) -> Result<(), RecipeError> {
    for c in CONDITIONAL {
        let Some(span) = (c.written)(&recipe.raw) else {
            continue;
        };
        let (value, default) = (c.current)(&recipe.raw);
        if c.applies_to(value.trim_matches('"')) {
            continue;
        }
        let choices: Vec<String> = c.applies.iter().map(|a| quoted(a)).collect();
        let needed = match choices.split_last() {
            Some((last, rest)) if !rest.is_empty() => format!("{} or {last}", rest.join(", ")),
            _ => choices.join(""),
        };
        return Err(recipe.error_at(
            span,
            RecipeProblem::SettingHasNoEffect {
                setting: c.name(),
                key: format!("{}.{}", c.section, c.key),
                value,
                default,
                needed,
                what: if c.is_table { "table" } else { "key" },
            },
        ));
    }
    Ok(())
}

/// Removes from a resolved recipe (as a manifest stores it, every default
/// written) the settings that do not apply, so it reads back as a recipe.
pub fn drop_inapplicable(resolved: &mut serde_json::Value) {
    for c in CONDITIONAL {
        let Some(section) = resolved
            .get_mut(c.section)
            .and_then(serde_json::Value::as_object_mut)
        else {
            continue;
        };
        let applies = section
            .get(c.key)
            .and_then(serde_json::Value::as_str)
            .is_some_and(|v| c.applies_to(v));
        if !applies {
            section.remove(c.setting);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::super::{parse, plan::input_plan, resolved};
    use std::path::Path;

    /// The resolved recipe of `text`, rebuilt as recipe text and read again.
    fn round_trip(text: &str) -> Result<String, String> {
        let recipe = parse(Path::new("r.toml"), text.to_string()).map_err(|e| e.to_string())?;
        let value = resolved::resolved_recipe(&recipe, &input_plan(&recipe));
        let rebuilt = resolved::recipe_text(&value)?;
        parse(Path::new("r.toml"), rebuilt.clone()).map_err(|e| format!("{e}\n{rebuilt}"))?;
        Ok(rebuilt)
    }

    const BASE: &str = "format = 1\n[input]\nfile = \"d.csv\"\n[output]\nfolder = \"out\"\n";

    #[test]
    fn a_resolved_recipe_reads_back_without_settings_that_do_not_apply() {
        // The manifest records every default; the rebuilt recipe must not
        // carry the ones the recipe itself would refuse.
        let plain = round_trip(BASE).unwrap();
        assert!(!plain.contains("knn"), "{plain}");
        assert!(!plain.contains("parallel_analysis"), "{plain}");
        assert!(plain.contains("constant_features"), "{plain}");
        let centred = round_trip(&format!("{BASE}[scaling]\nmethod = \"center\"\n")).unwrap();
        assert!(!centred.contains("constant_features"), "{centred}");
        let knn = round_trip(&format!(
            "{BASE}[missing]\nmethod = \"knn\"\n[missing.knn]\nneighbours = 3\n[components]\nkeep = \"parallel-analysis\"\n"
        ))
        .unwrap();
        assert!(knn.contains("neighbours = 3"), "{knn}");
        assert!(knn.contains("[components.parallel_analysis]"), "{knn}");
        assert!(!knn.contains("iterative_pca"), "{knn}");
    }
}
