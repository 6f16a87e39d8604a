//! `sextant diff`: what changed between two analyses, for a reviewer.
//!
//! Each side is a results folder, a recipe (run in memory, nothing written),
//! or a recipe as committed at a git revision (`git`). The comparison lists
//! the recipe settings in effect that differ, one row per setting
//! (`settings`); inputs whose hash changed; the number of kept components;
//! eigenvalues and shares side by side; the principal angles between the two
//! kept-loading subspaces (`angles`); the largest change in a score after
//! aligning signs; the rows flagged above a limit on one side only; and the
//! features whose loadings moved most. `render` writes it as text or as
//! Markdown for a pull-request comment, both opening with the same headline.
//!
//! Two analyses differ when a setting in effect (other than where results are
//! written), an input, or a result differs; `--exit-code` turns that into
//! exit code 1, so a CI job can gate on it.

mod angles;
mod git;
mod render;
mod settings;
mod tables;

pub use angles::principal_angles;
pub use render::{DiffFormat, render_comparison};
pub use settings::SettingChange;
pub use tables::side_from_tables;

use crate::error::Error;
use crate::outputs::manifest::{RunInfo, render as render_manifest};
use crate::run::{compute, prepare_recipe};
use nalgebra::DMatrix;
use serde_json::Value;
use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

/// The exit code of `diff --exit-code` when the analyses differ.
pub const EXIT_DIFFERENT: i32 = 1;

/// One side of a comparison, read from the result tables.
#[derive(Debug, Clone)]
pub struct Side {
    pub label: String,
    /// The manifest without its `run` block.
    pub manifest: Value,
    /// (eigenvalue, share) per computed component.
    pub variance: Vec<(f64, f64)>,
    pub kept: usize,
    pub features: Vec<String>,
    /// `loadings[feature][component]` for the computed components.
    pub loadings: Vec<Vec<f64>>,
    /// Kept scores by row key (the id, or the row number).
    pub scores: BTreeMap<String, Vec<f64>>,
    /// The rows above a T² or SPE limit at some confidence level, by key.
    pub flagged: BTreeSet<String>,
    /// What a reader must know about how this side was obtained (an input
    /// read from git, or another side's input used in place of a lost one).
    pub notes: Vec<String>,
    /// For a side computed from a recipe: the input file it read.
    pub input_file: Option<PathBuf>,
}

/// What to compare, as given on the command line.
#[derive(Debug, Clone)]
pub struct DiffRequest {
    pub a: PathBuf,
    pub b: Option<PathBuf>,
    /// With one path: compare the recipe as committed at this revision with
    /// the file in the working tree.
    pub rev: Option<String>,
}

/// Loads both sides of a request and compares them.
pub fn diff(request: &DiffRequest) -> Result<(Side, Side, Comparison), Error> {
    let (a, b) = git::sides(request)?;
    // B first: a recipe from a revision whose input is gone is computed on
    // B's input instead.
    let sb = load(&b, None)?;
    let sa = load(
        &a,
        sb.input_file
            .as_ref()
            .map(|f| (f.as_path(), sb.label.as_str())),
    )?;
    let c = compare(&sa, &sb);
    Ok((sa, sb, c))
}

/// Where one side comes from.
#[derive(Debug, Clone)]
pub(crate) enum Source {
    /// A results folder or a recipe file on disk.
    Path(PathBuf),
    /// A recipe as committed at a revision.
    Revision(git::Revision),
}

fn load(source: &Source, other_input: Option<(&Path, &str)>) -> Result<Side, Error> {
    match source {
        Source::Path(path) => load_side(path),
        Source::Revision(revision) => git::load_revision(revision, other_input),
    }
}

/// Loads a side from a results folder or, for a `.toml` path, by running the recipe.
///
/// A results folder's manifest must match its digest, and its tables must be
/// regular files of the folder that read as sextant wrote them.
pub fn load_side(path: &Path) -> Result<Side, Error> {
    let label = path.display().to_string();
    if path.is_file() {
        let recipe = crate::recipe::load(path)?;
        return side_of_recipe(label.clone(), recipe, &|name| {
            format!("{name} computed from {label}")
        });
    }
    let manifest = crate::verify::read_trusted_manifest(path)?;
    let mut files = BTreeMap::new();
    for name in ["variance.csv", "loadings.csv", "scores.csv"] {
        files.insert(name.to_string(), tables::read_table_file(path, name)?);
    }
    side_from_tables(label, manifest, &files, &|name| {
        path.join(name).display().to_string()
    })
}

/// Runs a loaded recipe in memory and reads its result tables as a side.
fn side_of_recipe(
    label: String,
    recipe: crate::recipe::LoadedRecipe,
    shown: &dyn Fn(&str) -> String,
) -> Result<Side, Error> {
    let prepared = prepare_recipe(recipe)?;
    // Absolute: another recipe, in another folder, may be pointed at it.
    let input_file =
        crate::paths::normalize(&crate::recipe::plan::input_plan(&prepared.recipe).file);
    let (_, _, computed) = compute(&prepared)?;
    let run = RunInfo {
        started_utc: String::new(),
        seconds: 0.0,
        host: String::new(),
        threads: 0,
        platform: String::new(),
    };
    let (text, _) = render_manifest(&computed.body, &computed.outputs, &run);
    let manifest = serde_json::from_str(&text).expect("our own JSON");
    let files = computed.files.into_iter().collect();
    let mut side = side_from_tables(label, manifest, &files, shown)?;
    side.input_file = Some(input_file);
    Ok(side)
}

/// A component number with (eigenvalue, share) on each side, where it exists.
pub type VarianceRow = (usize, Option<(f64, f64)>, Option<(f64, f64)>);

/// The comparison of two sides.
#[derive(Debug, Clone)]
pub struct Comparison {
    /// The settings in effect that differ, one per setting.
    pub settings: Vec<SettingChange>,
    /// (input, before, after) for inputs whose hash or shape changed.
    pub inputs: Vec<(String, String, String)>,
    pub kept: (usize, usize),
    pub rules: (String, String),
    pub variance: Vec<VarianceRow>,
    /// Principal angles in degrees, largest first, on the common features.
    pub angles: Vec<f64>,
    pub common_features: usize,
    /// (row key, component, size) of the largest score change after sign alignment.
    pub largest_score_change: Option<(String, usize, f64)>,
    pub common_rows: usize,
    /// (feature, distance) for the features whose loadings moved most.
    pub moved: Vec<(String, f64)>,
    /// Rows flagged on B but not on A, and on A but not on B.
    pub flagged_entered: Vec<String>,
    pub flagged_left: Vec<String>,
    /// Whether anything but where results are written differs.
    pub differ: bool,
}

fn resolved(s: &Side) -> &Value {
    s.manifest
        .pointer("/recipe/resolved")
        .unwrap_or(&Value::Null)
}

/// Compares two sides.
pub fn compare(a: &Side, b: &Side) -> Comparison {
    let settings = settings::changed_settings(resolved(a), resolved(b));
    let inputs = changed_inputs(a, b);
    let rule = |s: &Side| {
        s.manifest
            .pointer("/steps/components/rule")
            .and_then(Value::as_str)
            .unwrap_or("?")
            .to_string()
    };
    let variance = (0..a.variance.len().max(b.variance.len()))
        .map(|i| {
            (
                i + 1,
                a.variance.get(i).copied(),
                b.variance.get(i).copied(),
            )
        })
        .collect();
    let moves = loading_moves(a, b);
    let flagged_entered: Vec<String> = b.flagged.difference(&a.flagged).cloned().collect();
    let flagged_left: Vec<String> = a.flagged.difference(&b.flagged).cloned().collect();
    let differ = settings.iter().any(|s| !s.output_only)
        || !inputs.is_empty()
        || a.variance != b.variance
        || a.kept != b.kept
        || a.features != b.features
        || a.loadings != b.loadings
        || a.scores != b.scores
        || a.flagged != b.flagged;
    Comparison {
        settings,
        inputs,
        kept: (a.kept, b.kept),
        rules: (rule(a), rule(b)),
        variance,
        angles: moves.angles,
        common_features: moves.common_features,
        largest_score_change: moves.largest,
        common_rows: moves.common_rows,
        moved: moves.moved,
        flagged_entered,
        flagged_left,
        differ,
    }
}

/// The inputs whose content changed, described on each side.
fn changed_inputs(a: &Side, b: &Side) -> Vec<(String, String, String)> {
    let input_list = |s: &Side| s.manifest["inputs"].as_array().cloned().unwrap_or_default();
    let (ia, ib) = (input_list(a), input_list(b));
    let describe = |v: Option<&Value>| match v {
        Some(v) => format!(
            "{} ({} rows × {} columns, sha256 {})",
            v["path"].as_str().unwrap_or("?"),
            v["rows"],
            v["columns"],
            v["sha256"]
                .as_str()
                .unwrap_or("?")
                .chars()
                .take(12)
                .collect::<String>()
        ),
        None => "—".to_string(),
    };
    (0..ia.len().max(ib.len()))
        .filter(|&i| ia.get(i).map(|v| &v["sha256"]) != ib.get(i).map(|v| &v["sha256"]))
        .map(|i| {
            (
                format!("input {}", i + 1),
                describe(ia.get(i)),
                describe(ib.get(i)),
            )
        })
        .collect()
}

/// How the kept loadings and scores moved between the sides.
struct Moves {
    angles: Vec<f64>,
    common_features: usize,
    largest: Option<(String, usize, f64)>,
    common_rows: usize,
    moved: Vec<(String, f64)>,
}

fn loading_moves(a: &Side, b: &Side) -> Moves {
    // Loadings on the features both sides used, in A's order.
    let common: Vec<(usize, usize)> = a
        .features
        .iter()
        .enumerate()
        .filter_map(|(i, f)| b.features.iter().position(|g| g == f).map(|j| (i, j)))
        .collect();
    let basis = |s: &Side, rows: &[usize]| {
        DMatrix::from_fn(rows.len(), s.kept, |r, c| s.loadings[rows[r]][c])
    };
    let rows_a: Vec<usize> = common.iter().map(|c| c.0).collect();
    let rows_b: Vec<usize> = common.iter().map(|c| c.1).collect();
    let (la, lb) = (basis(a, &rows_a), basis(b, &rows_b));
    let angles = if common.is_empty() {
        Vec::new()
    } else {
        principal_angles(&la, &lb)
    };

    // Sign of each shared component: B's component flipped to point like A's.
    let shared = a.kept.min(b.kept);
    let signs: Vec<f64> = (0..shared)
        .map(|c| {
            let dot: f64 = (0..common.len()).map(|r| la[(r, c)] * lb[(r, c)]).sum();
            if dot < 0.0 { -1.0 } else { 1.0 }
        })
        .collect();
    let mut largest: Option<(String, usize, f64)> = None;
    let mut common_rows = 0;
    for (key, ta) in &a.scores {
        let Some(tb) = b.scores.get(key) else {
            continue;
        };
        common_rows += 1;
        for c in 0..shared {
            let d = (ta[c] - signs[c] * tb[c]).abs();
            if largest.as_ref().is_none_or(|l| d > l.2) {
                largest = Some((key.clone(), c + 1, d));
            }
        }
    }
    let mut moved: Vec<(String, f64)> = common
        .iter()
        .enumerate()
        .map(|(r, &(i, _))| {
            let d2: f64 = (0..shared)
                .map(|c| (la[(r, c)] - signs[c] * lb[(r, c)]).powi(2))
                .sum();
            (a.features[i].clone(), d2.sqrt())
        })
        .collect();
    moved.sort_by(|x, y| y.1.total_cmp(&x.1).then_with(|| x.0.cmp(&y.0)));
    moved.truncate(5);
    Moves {
        angles,
        common_features: common.len(),
        largest,
        common_rows,
        moved,
    }
}
