//! The checked plan: a recipe whose names have been matched against the table.
//!
//! Only a [`Plan`] can run. Building one resolves every default, matches names and
//! glob patterns against the header, gives each column one role (id, group,
//! feature, or unused with a reason), and rejects what cannot work, pointing at the
//! recipe line that caused it.

use super::LoadedRecipe;
use super::raw::{
    ConstantPolicy, DEFAULT_KEEP, DEFAULT_MISSING_TOKENS, DecompositionMethod, Keep, MissingMethod,
    RawRandomized, ScalingMethod, SpeLimit,
};
use crate::error::{Error, InputError, Position, RecipeError, RecipeProblem};
use crate::paths::normalize;
use crate::table::{ColumnData, Header, ReadOptions, Table};
use serde::Serialize;
use std::num::NonZeroUsize;
use std::path::{Path, PathBuf};
use toml::Spanned;

/// A per-feature transform applied before scaling (read back from model.json
/// by its name).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Transform {
    Log10,
    Ln,
    Sqrt,
}

impl Transform {
    pub fn name(self) -> &'static str {
        match self {
            Transform::Log10 => "log10",
            Transform::Ln => "ln",
            Transform::Sqrt => "sqrt",
        }
    }
}

/// Where the table is and how to read it.
#[derive(Debug, Clone)]
pub struct InputPlan {
    /// The path to open (the recipe's folder joined with the written path).
    pub file: PathBuf,
    /// The path as written in the recipe, used in messages and the manifest.
    pub display: String,
    pub pin: Option<(String, Position)>,
    pub options: ReadOptions,
    pub id: Option<String>,
    pub groups: Vec<String>,
}

/// The number-of-components settings, with where they were written.
#[derive(Debug, Clone)]
pub struct ComponentsPlan {
    pub keep: Keep,
    pub parallel_analysis: super::raw::RawParallel,
    pub cross_validation: super::raw::RawCrossValidation,
    /// Where `keep` was written in the recipe, if it was.
    pub keep_written: Option<Position>,
    pub compute: Option<usize>,
}

/// How the eigenvalues and loadings are computed, with the settings of the method.
#[derive(Debug, Clone, PartialEq)]
pub enum MethodPlan {
    /// Every eigenvalue, and the loadings of the components used, from the full
    /// matrix ([`crate::stages::decompose::decompose_keeping`]).
    Exact,
    /// The leading components only, from a seeded sketch
    /// ([`crate::stages::decompose::decompose_randomized`]).
    Randomized(RawRandomized),
    /// Every eigenvalue and loading from a QR of the scaled data and the
    /// singular values of its triangular factor
    /// ([`crate::stages::decompose::decompose_qr`]).
    Qr,
}

impl MethodPlan {
    /// The recipe's name for the method, without its settings.
    pub fn kind(&self) -> DecompositionMethod {
        match self {
            MethodPlan::Exact => DecompositionMethod::Exact,
            MethodPlan::Qr => DecompositionMethod::Qr,
            MethodPlan::Randomized(_) => DecompositionMethod::Randomized,
        }
    }
}

/// Everything a run needs, checked.
#[derive(Debug, Clone)]
pub struct Plan {
    pub title: Option<String>,
    pub notes: Option<String>,
    pub input: InputPlan,
    /// The features, in table order.
    pub features: Vec<String>,
    /// Columns that are neither id, group nor feature, with the reason.
    pub unused: Vec<(String, String)>,
    pub missing_method: MissingMethod,
    pub max_feature_missing: f64,
    pub iterative_pca: super::raw::RawIterative,
    pub knn: super::raw::RawKnn,
    /// Components of the iterative PCA imputation model: its own setting, else
    /// the recipe's fixed `keep`, else 2.
    pub imputation_components: usize,
    /// One entry per feature.
    pub transforms: Vec<Option<Transform>>,
    pub scaling: ScalingMethod,
    pub constant_features: ConstantPolicy,
    pub components: ComponentsPlan,
    /// `components.method` and its settings.
    pub method: MethodPlan,
    pub diagnostics: super::raw::RawDiagnostics,
    pub plots: Vec<super::plots::PlotPlan>,
    /// The results folder as written in the recipe, and as a path to write.
    pub output_display: String,
    pub output: PathBuf,
}

/// Everything about reading the table that can be known before it is read.
pub fn input_plan(recipe: &LoadedRecipe) -> InputPlan {
    let input = &recipe.raw.input;
    let display = input.file.get_ref().clone();
    let file = crate::paths::tidy(&recipe.dir().join(&display));
    let delimiter = delimiter_of(input);
    let missing_tokens = input
        .missing
        .clone()
        .unwrap_or_else(|| {
            DEFAULT_MISSING_TOKENS
                .iter()
                .map(|s| s.to_string())
                .collect()
        })
        .into_iter()
        .map(|s| s.trim().to_string())
        .collect();
    let id = input.id.as_ref().map(|s| s.get_ref().clone());
    let groups: Vec<String> = input.groups.iter().map(|s| s.get_ref().clone()).collect();
    let mut text_columns: Vec<String> = id.iter().cloned().collect();
    text_columns.extend(groups.iter().cloned());
    InputPlan {
        file,
        display,
        pin: input.sha256.as_ref().map(|s| {
            (
                s.get_ref().0.clone(),
                Position::locate(&recipe.text, s.span().start),
            )
        }),
        options: ReadOptions {
            delimiter,
            decimal: input.decimal.as_ref().map_or(b'.', |d| d.get_ref().0),
            thousands: input.thousands.as_ref().map(|t| t.get_ref().0),
            missing_tokens,
            missing_per_column: input
                .missing_per_column
                .iter()
                .map(|(name, codes)| (name.get_ref().clone(), codes.clone()))
                .collect(),
            text_columns,
        },
        id,
        groups,
    }
}

/// The field delimiter: the recipe's, else a tab for a `.tsv` or `.tab` file
/// and a comma for any other.
fn delimiter_of(input: &super::raw::RawInput) -> u8 {
    input.delimiter.map(|d| d.0).unwrap_or_else(|| {
        let ext = Path::new(input.file.get_ref())
            .extension()
            .map(|e| e.to_string_lossy().to_ascii_lowercase());
        match ext.as_deref() {
            Some("tsv") | Some("tab") => b'\t',
            _ => b',',
        }
    })
}

/// Refuses a decimal mark or thousands separator that is also the delimiter
/// (every such number would be cut in two fields), or both marks alike.
pub fn check_number_marks(recipe: &LoadedRecipe) -> Result<(), RecipeError> {
    let input = &recipe.raw.input;
    let delimiter = delimiter_of(input);
    let fix = "set input.delimiter to the table's (files with decimal commas usually use \";\")";
    if let Some(d) = &input.decimal
        && d.get_ref().0 == delimiter
    {
        return Err(recipe.error_at(
            d.span(),
            RecipeProblem::MarkIsDelimiter {
                key: "decimal",
                mark: delimiter as char,
                example: "3,14",
                fix,
            },
        ));
    }
    if let Some(t) = &input.thousands {
        let mark = t.get_ref().0;
        if mark == delimiter {
            return Err(recipe.error_at(
                t.span(),
                RecipeProblem::MarkIsDelimiter {
                    key: "thousands",
                    mark: mark as char,
                    example: "1,234",
                    fix,
                },
            ));
        }
        if mark == input.decimal.as_ref().map_or(b'.', |d| d.get_ref().0) {
            return Err(recipe.error_at(
                t.span(),
                RecipeProblem::ThousandsIsDecimal { mark: mark as char },
            ));
        }
    }
    Ok(())
}

/// Checks the recipe's column names against the header, before the body is read,
/// so a misspelt name is reported before any data error.
pub fn check_names(recipe: &LoadedRecipe, header: &Header) -> Result<(), RecipeError> {
    let input = &recipe.raw.input;
    let table = input.file.get_ref();
    let named = input.id.iter().chain(&input.groups);
    for name in named
        .clone()
        .chain(input.features.iter().flatten())
        .chain(&input.exclude)
    {
        if name.get_ref().trim().is_empty() {
            return Err(recipe.error_at(
                name.span(),
                RecipeProblem::EmptyName {
                    key: "a column name in [input]",
                },
            ));
        }
    }
    for name in named.clone().chain(input.missing_per_column.keys()) {
        if !header.names.contains(name.get_ref()) {
            return Err(unknown_column(recipe, name, &header.names, table));
        }
    }
    if let Some(id) = &input.id
        && let Some(g) = input.groups.iter().find(|g| g.get_ref() == id.get_ref())
    {
        return Err(recipe.error_at(
            g.span(),
            RecipeProblem::TwoRoles {
                name: id.get_ref().clone(),
                first: "the id",
                second: "a group",
            },
        ));
    }
    for (i, g) in input.groups.iter().enumerate() {
        if input.groups[..i].iter().any(|e| e.get_ref() == g.get_ref()) {
            return Err(recipe.error_at(
                g.span(),
                RecipeProblem::TwoRoles {
                    name: g.get_ref().clone(),
                    first: "a group",
                    second: "a group again",
                },
            ));
        }
    }
    let patterns = input.features.iter().flatten().chain(&input.exclude);
    for pattern in patterns {
        if !header
            .names
            .iter()
            .any(|n| glob_match(pattern.get_ref(), n))
        {
            return Err(unknown_column(recipe, pattern, &header.names, table));
        }
    }
    Ok(())
}

/// Builds the plan once the table is read.
pub fn make_plan(recipe: &LoadedRecipe, input: InputPlan, table: &Table) -> Result<Plan, Error> {
    let raw = &recipe.raw;
    let (features, unused) = select_features(recipe, &input, table)?;
    if features.is_empty() {
        return Err(InputError::NoFeatures {
            path: table.display.clone(),
            why: no_feature_reason(table, input.options.delimiter),
        }
        .into());
    }
    let transforms = assign_transforms(recipe, &features)?;
    let (output, output_display) = output_folder(recipe, &input)?;
    let components = components_plan(recipe)?;
    let method = method_plan(recipe)?;
    let plots = super::plots::plot_plans(recipe, &input.groups)?;
    Ok(Plan {
        title: raw.title.clone(),
        notes: raw.notes.clone(),
        input,
        features,
        unused,
        missing_method: raw.missing.method,
        max_feature_missing: raw.missing.max_feature_missing.0,
        iterative_pca: raw.missing.iterative(),
        knn: raw.missing.knn(),
        imputation_components: imputation_components(recipe),
        transforms,
        scaling: raw.scaling.method,
        constant_features: raw.scaling.constant_policy(),
        components,
        method,
        diagnostics: raw.diagnostics.clone(),
        plots,
        output_display,
        output,
    })
}

/// Explains an empty feature list, spotting the common case of a wrong delimiter.
fn no_feature_reason(table: &Table, delimiter: u8) -> String {
    if let [only] = table.columns.as_slice() {
        let other = [b',', b';', b'\t', b'|']
            .into_iter()
            .find(|&d| d != delimiter && only.name.contains(d as char));
        if let Some(d) = other {
            return format!(
                " (the header is one column `{}`; the file may use {:?} as its delimiter: set input.delimiter)",
                only.name, d as char
            );
        }
    }
    " (no numeric column is left after the id, groups and exclusions)".into()
}

fn unknown_column(
    recipe: &LoadedRecipe,
    name: &Spanned<String>,
    header: &[String],
    table: &str,
) -> RecipeError {
    let wanted = name.get_ref();
    let suggestion = closest(wanted, header);
    let problem = if is_glob(wanted) {
        RecipeProblem::NoMatch {
            pattern: wanted.clone(),
            table: table.to_string(),
            suggestion,
        }
    } else {
        RecipeProblem::UnknownColumn {
            name: wanted.clone(),
            table: table.to_string(),
            suggestion,
        }
    };
    recipe.error_at(name.span(), problem)
}

/// The nearest header name, if it is near enough to be a likely typo.
fn closest(wanted: &str, names: &[String]) -> Option<String> {
    let lower = wanted.to_lowercase();
    if let Some(n) = names.iter().find(|n| n.to_lowercase() == lower) {
        return Some(n.clone());
    }
    let pattern = wanted.replace(['*', '?'], "");
    names
        .iter()
        .map(|n| {
            (
                strsim::damerau_levenshtein(&pattern.to_lowercase(), &n.to_lowercase()),
                n,
            )
        })
        // Up to a third of the name may differ (at least one edit), but never the
        // whole of what was written: `d` is one edit from `a`, yet no typo of it.
        .filter(|(d, n)| *d <= (n.chars().count() / 3).max(1) && *d < pattern.chars().count())
        .min_by_key(|(d, _)| *d)
        .map(|(_, n)| n.clone())
}

fn is_glob(pattern: &str) -> bool {
    pattern.contains(['*', '?'])
}

/// Matches `*` (any run of characters) and `?` (one character); everything else
/// matches itself. Simple enough that a crate would add more than it saves.
pub fn glob_match(pattern: &str, name: &str) -> bool {
    let p: Vec<char> = pattern.chars().collect();
    let n: Vec<char> = name.chars().collect();
    let (mut pi, mut ni) = (0, 0);
    let mut star: Option<(usize, usize)> = None;
    while ni < n.len() {
        if pi < p.len() && (p[pi] == '?' || p[pi] == n[ni]) {
            pi += 1;
            ni += 1;
        } else if pi < p.len() && p[pi] == '*' {
            star = Some((pi, ni));
            pi += 1;
        } else if let Some((sp, sn)) = star {
            pi = sp + 1;
            ni = sn + 1;
            star = Some((sp, sn + 1));
        } else {
            return false;
        }
    }
    p[pi..].iter().all(|&c| c == '*')
}

/// The chosen features, and each excluded column with its reason.
type FeatureSelection = (Vec<String>, Vec<(String, String)>);

fn select_features(
    recipe: &LoadedRecipe,
    input: &InputPlan,
    table: &Table,
) -> Result<FeatureSelection, Error> {
    let raw = &recipe.raw.input;
    let has_role =
        |name: &str| input.id.as_deref() == Some(name) || input.groups.iter().any(|g| g == name);
    let excluded = |name: &str| raw.exclude.iter().any(|p| glob_match(p.get_ref(), name));
    let listed = |name: &str| -> Option<&Spanned<String>> {
        raw.features
            .as_ref()
            .and_then(|ps| ps.iter().find(|p| glob_match(p.get_ref(), name)))
    };

    let mut features = Vec::new();
    let mut unused = Vec::new();
    for column in &table.columns {
        let name = column.name.as_str();
        if has_role(name) {
            if let Some(p) = listed(name).filter(|p| p.get_ref() == name) {
                let role = if input.id.as_deref() == Some(name) {
                    "the id"
                } else {
                    "a group"
                };
                return Err(recipe
                    .error_at(
                        p.span(),
                        RecipeProblem::TwoRoles {
                            name: name.into(),
                            first: role,
                            second: "a feature",
                        },
                    )
                    .into());
            }
            continue;
        }
        if excluded(name) {
            unused.push((name.to_string(), "excluded by input.exclude".to_string()));
            continue;
        }
        let explicit = raw.features.is_some();
        if explicit && listed(name).is_none() {
            unused.push((name.to_string(), "not listed in input.features".to_string()));
            continue;
        }
        let ColumnData::Numeric(values) = &column.data else {
            unreachable!("only id and group columns are read as text")
        };
        if values.bad == 0 {
            features.push(name.to_string());
        } else if !explicit && values.looks_textual(table.n_rows()) {
            unused.push((name.to_string(), "text, not numbers".to_string()));
        } else {
            let (line, text) = values.first_bad.clone().unwrap_or_default();
            return Err(InputError::bad_cell(&table.display, line, name, text).into());
        }
    }
    Ok((features, unused))
}

fn assign_transforms(
    recipe: &LoadedRecipe,
    features: &[String],
) -> Result<Vec<Option<Transform>>, RecipeError> {
    let t = &recipe.raw.transform;
    let lists = [
        (Transform::Log10, &t.log10),
        (Transform::Ln, &t.ln),
        (Transform::Sqrt, &t.sqrt),
    ];
    let mut assigned: Vec<Option<Transform>> = vec![None; features.len()];
    for (kind, patterns) in lists {
        for pattern in patterns {
            let mut matched = false;
            for (i, f) in features.iter().enumerate() {
                if !glob_match(pattern.get_ref(), f) {
                    continue;
                }
                matched = true;
                if let Some(first) = assigned[i]
                    && first != kind
                {
                    return Err(recipe.error_at(
                        pattern.span(),
                        RecipeProblem::TwoTransforms {
                            name: f.clone(),
                            first: first.name(),
                            second: kind.name(),
                        },
                    ));
                }
                assigned[i] = Some(kind);
            }
            if !matched {
                return Err(recipe.error_at(
                    pattern.span(),
                    RecipeProblem::TransformNotFeature {
                        name: pattern.get_ref().clone(),
                        transform: kind.name(),
                    },
                ));
            }
        }
    }
    Ok(assigned)
}

/// The number of components of the iterative PCA imputation model.
pub fn imputation_components(recipe: &LoadedRecipe) -> usize {
    let raw = &recipe.raw;
    match (
        raw.missing.iterative().components,
        raw.components.keep.as_ref().map(|k| *k.get_ref()),
    ) {
        (Some(c), _) => c.0.get(),
        (None, Some(Keep::Count(k))) => k.get(),
        _ => 2,
    }
}

fn components_plan(recipe: &LoadedRecipe) -> Result<ComponentsPlan, RecipeError> {
    let c = &recipe.raw.components;
    let keep = c.keep.as_ref().map(|k| *k.get_ref()).unwrap_or(Keep::Count(
        NonZeroUsize::new(DEFAULT_KEEP).expect("non-zero"),
    ));
    let compute = c.compute.as_ref().map(|n| n.get_ref().0.get());
    if let (Keep::Count(k), Some(compute), Some(span)) =
        (keep, compute, c.keep.as_ref().map(|k| k.span()))
        && k.get() > compute
    {
        return Err(recipe.error_at(
            span,
            RecipeProblem::KeepAboveCompute {
                keep: k.get(),
                compute,
            },
        ));
    }
    Ok(ComponentsPlan {
        keep,
        parallel_analysis: c.parallel(),
        cross_validation: c.cross_validation(),
        keep_written: c
            .keep
            .as_ref()
            .map(|k| Position::locate(&recipe.text, k.span().start)),
        compute,
    })
}

/// Checks `components.method` against the settings that need every eigenvalue.
///
/// The randomized method knows only the leading eigenvalues (and the sum and sum
/// of squares of all of them), so rules that look at the whole spectrum and the
/// Jackson–Mudholkar SPE limit (which needs the sum of cubes of the dropped
/// eigenvalues) are refused rather than fed a partial spectrum.
pub fn method_plan(recipe: &LoadedRecipe) -> Result<MethodPlan, RecipeError> {
    let c = &recipe.raw.components;
    let method = c
        .method
        .as_ref()
        .map_or(DecompositionMethod::Exact, |m| *m.get_ref());
    match method {
        // `[components.randomized]` under the exact method is refused when the
        // recipe is read (`super::applies`).
        DecompositionMethod::Exact => Ok(MethodPlan::Exact),
        DecompositionMethod::Qr => Ok(MethodPlan::Qr),
        DecompositionMethod::Randomized => {
            if let Some(keep) = &c.keep
                && let Some((rule, why)) = whole_spectrum_rule(*keep.get_ref())
            {
                return Err(recipe.error_at(
                    keep.span(),
                    RecipeProblem::RandomizedNeedsCount { rule, why },
                ));
            }
            if recipe.raw.diagnostics.spe_limit != SpeLimit::Box {
                let span = c.method.as_ref().map(|m| m.span()).unwrap_or_default();
                return Err(recipe.error_at(span, RecipeProblem::RandomizedNeedsBox));
            }
            let settings = c
                .randomized
                .as_ref()
                .map(|s| s.get_ref().clone())
                .unwrap_or_default();
            Ok(MethodPlan::Randomized(settings))
        }
    }
}

/// The rule as written and why it needs more than the leading components.
fn whole_spectrum_rule(keep: Keep) -> Option<(String, &'static str)> {
    let spectrum = "compares the eigenvalues with the whole spectrum";
    match keep {
        Keep::Count(_) => None,
        Keep::Variance(s) => Some((format!("{{ variance = {} }}", s.0), spectrum)),
        Keep::Kaiser => Some(("\"kaiser\"".into(), spectrum)),
        Keep::BrokenStick => Some(("\"broken-stick\"".into(), spectrum)),
        Keep::ParallelAnalysis => Some((
            "\"parallel-analysis\"".into(),
            "decomposes hundreds of random tables of the same shape exactly",
        )),
        Keep::CrossValidation => Some((
            "\"cross-validation\"".into(),
            "refits the exact decomposition on every fold",
        )),
    }
}

/// Resolves the results folder and refuses one that would hold the recipe or the
/// input, since a rerun replaces the whole folder.
pub fn output_folder(
    recipe: &LoadedRecipe,
    input: &InputPlan,
) -> Result<(PathBuf, String), RecipeError> {
    let written = recipe.raw.output.folder.get_ref();
    let span = recipe.raw.output.folder.span();
    if written.trim().is_empty() {
        return Err(recipe.error_at(
            span,
            RecipeProblem::EmptyName {
                key: "output.folder",
            },
        ));
    }
    let folder = crate::paths::tidy(&recipe.dir().join(written));
    let folder_abs = normalize(&folder);
    // A file where a folder must go would only fail at the very end of a run.
    if let Some(file) = folder_abs.ancestors().skip(1).find(|a| a.is_file()) {
        return Err(recipe.error_at(
            span,
            RecipeProblem::OutputBlocked {
                folder: written.clone(),
                file: file.display().to_string(),
            },
        ));
    }
    // A link to nothing fails only when the finished results are moved into
    // place, after the whole computation.
    if let Some((link, target)) = dangling_link(&folder_abs) {
        return Err(recipe.error_at(
            span,
            RecipeProblem::OutputDanglingLink {
                folder: written.clone(),
                link: link.display().to_string(),
                target: target.display().to_string(),
            },
        ));
    }
    let guarded = [
        ("the recipe", &recipe.path),
        ("the input table", &input.file),
    ];
    for (what, path) in guarded {
        if crate::paths::inside(path, &folder) {
            return Err(recipe.error_at(
                recipe.raw.output.folder.span(),
                RecipeProblem::OutputContains {
                    folder: written.clone(),
                    what,
                    path: path.display().to_string(),
                },
            ));
        }
    }
    Ok((folder, written.clone()))
}

/// The first of `folder` and its ancestors that is a symbolic link whose
/// target does not exist (or does not resolve), with that target.
fn dangling_link(folder: &Path) -> Option<(PathBuf, PathBuf)> {
    folder.ancestors().find_map(|a| {
        let is_link = std::fs::symlink_metadata(a).is_ok_and(|m| m.file_type().is_symlink());
        if is_link && std::fs::metadata(a).is_err() {
            Some((a.to_path_buf(), std::fs::read_link(a).unwrap_or_default()))
        } else {
            None
        }
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn glob_patterns() {
        assert!(glob_match("*_pct", "fat_pct"));
        assert!(glob_match("f?t*", "fat_pct"));
        assert!(glob_match("*", ""));
        assert!(!glob_match("*_pct", "fat_pct_x"));
        assert!(glob_match("a*b*c", "aXbYbc"));
        assert!(!glob_match("ph", "pH"));
    }

    #[test]
    fn near_names_are_suggested() {
        let names = vec!["fat_pct".to_string(), "ph".to_string()];
        assert_eq!(closest("fat_pc", &names).as_deref(), Some("fat_pct"));
        assert_eq!(closest("PH", &names).as_deref(), Some("ph"));
        assert_eq!(closest("conductivity", &names), None);
    }
}
