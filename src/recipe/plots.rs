//! Checking `[[plot]]` tables: which keys apply to which kind, component numbers
//! within what is computed, colours from group columns, and file names that stay
//! inside the results folder's plots/ and do not collide.

use super::LoadedRecipe;
use super::raw::{DEFAULT_COMPUTE, PlotKind, PointLabels, RawPlot};
use crate::error::{Position, RecipeError, RecipeProblem};
use toml::Spanned;

/// The number of points above which scatter plots bin points by default.
pub const DEFAULT_DENSITY_ABOVE: usize = 20_000;

/// The number of rows a scatter plot labels at most by default: enough to name
/// the rows worth a look, few enough to stay readable.
pub const DEFAULT_MAX_LABELS: usize = 20;

/// A checked plot.
#[derive(Debug, Clone, PartialEq)]
pub struct PlotPlan {
    pub kind: PlotKind,
    /// File name inside plots/.
    pub file: String,
    pub title: Option<String>,
    /// Components (1-based) on the axes; for a loadings bar chart `x` is the
    /// component and `y` is 0.
    pub x: usize,
    pub y: usize,
    pub color: Option<String>,
    pub labels: PointLabels,
    /// At most this many rows are labelled, the most severe first.
    pub max_labels: usize,
    pub ellipse: Option<f64>,
    pub density_above: usize,
    /// Where the plot's table starts in the recipe, for errors found later.
    pub at: Position,
}

impl PlotPlan {
    /// The highest component the plot needs.
    pub fn highest_component(&self) -> usize {
        self.x.max(self.y)
    }
}

/// Checks every `[[plot]]` table against the recipe's groups and `compute`.
pub fn plot_plans(recipe: &LoadedRecipe, groups: &[String]) -> Result<Vec<PlotPlan>, RecipeError> {
    let compute = recipe
        .raw
        .components
        .compute
        .as_ref()
        .map_or(DEFAULT_COMPUTE, |c| c.get_ref().0.get());
    let mut plans: Vec<PlotPlan> = Vec::new();
    for spanned in &recipe.raw.plots {
        let plan = one_plot(recipe, spanned, groups, compute)?;
        if plans.iter().any(|p| p.file == plan.file) {
            let span = spanned
                .get_ref()
                .file
                .as_ref()
                .map_or(spanned.span(), |f| f.span());
            return Err(recipe.error_at(span, RecipeProblem::PlotFileTwice { file: plan.file }));
        }
        plans.push(plan);
    }
    Ok(plans)
}

fn one_plot(
    recipe: &LoadedRecipe,
    spanned: &Spanned<RawPlot>,
    groups: &[String],
    compute: usize,
) -> Result<PlotPlan, RecipeError> {
    let raw = spanned.get_ref();
    let kind = raw.kind;
    let err = |span: std::ops::Range<usize>, problem| recipe.error_at(span, problem);
    let not_for = |key: &'static str| RecipeProblem::PlotKeyNotApplicable {
        key,
        kind: kind.name(),
    };

    // Which keys each kind takes.
    let two_axes = matches!(
        kind,
        PlotKind::Scores | PlotKind::Biplot | PlotKind::CorrelationCircle | PlotKind::Loadings
    );
    let takes_points = matches!(
        kind,
        PlotKind::Scores | PlotKind::Biplot | PlotKind::OutlierMap
    );
    if !two_axes {
        for (key, v) in [("x", &raw.x), ("y", &raw.y)] {
            if let Some(v) = v {
                return Err(err(v.span(), not_for(key)));
            }
        }
    }
    if kind != PlotKind::Loadings
        && let Some(c) = &raw.component
    {
        return Err(err(c.span(), not_for("component")));
    }
    if !matches!(kind, PlotKind::Scores | PlotKind::Biplot)
        && let Some(c) = &raw.color
    {
        return Err(err(c.span(), not_for("color")));
    }
    if kind != PlotKind::Scores
        && let Some(e) = &raw.ellipse
    {
        return Err(err(e.span(), not_for("ellipse")));
    }
    if !takes_points {
        if let Some(l) = &raw.labels {
            return Err(err(l.span(), not_for("labels")));
        }
        if let Some(d) = &raw.density_above {
            return Err(err(d.span(), not_for("density_above")));
        }
        if let Some(m) = &raw.max_labels {
            return Err(err(m.span(), not_for("max_labels")));
        }
    }

    let index =
        |v: &Option<Spanned<super::raw::Count>>, default: usize| -> Result<usize, RecipeError> {
            match v {
                None => Ok(default),
                Some(s) => {
                    let i = s.get_ref().0.get();
                    if i > compute {
                        Err(err(
                            s.span(),
                            RecipeProblem::PlotComponentBeyondCompute { index: i, compute },
                        ))
                    } else {
                        Ok(i)
                    }
                }
            }
        };
    let (x, y) = match kind {
        PlotKind::Loadings if raw.x.is_none() && raw.y.is_none() => (index(&raw.component, 1)?, 0),
        PlotKind::Loadings if raw.component.is_some() => {
            let c = raw.component.as_ref().expect("checked");
            return Err(err(c.span(), RecipeProblem::PlotAxesAndComponent));
        }
        _ if two_axes => (index(&raw.x, 1)?, index(&raw.y, 2.min(compute).max(1))?),
        _ => (0, 0),
    };
    if two_axes && y != 0 && x == y {
        let span = raw
            .y
            .as_ref()
            .or(raw.x.as_ref())
            .map_or(spanned.span(), |s| s.span());
        return Err(err(span, RecipeProblem::PlotSameAxes { index: x }));
    }
    let color = match &raw.color {
        Some(c) if !groups.contains(c.get_ref()) => {
            return Err(err(
                c.span(),
                RecipeProblem::PlotColorNotGroup {
                    column: c.get_ref().clone(),
                    groups: groups.join(", "),
                },
            ));
        }
        other => other.as_ref().map(|c| c.get_ref().clone()),
    };
    let file = match &raw.file {
        Some(f) => {
            let name = f.get_ref();
            let plain = name
                .chars()
                .all(|c| c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.'));
            if !plain || !name.ends_with(".svg") || name.starts_with('.') {
                return Err(err(
                    f.span(),
                    RecipeProblem::PlotFileName { file: name.clone() },
                ));
            }
            name.clone()
        }
        None => default_file(kind, x, y),
    };
    Ok(PlotPlan {
        kind,
        file,
        title: raw.title.clone(),
        x,
        y,
        color,
        labels: raw
            .labels
            .as_ref()
            .map_or(PointLabels::default(), |l| *l.get_ref()),
        max_labels: raw
            .max_labels
            .as_ref()
            .map_or(DEFAULT_MAX_LABELS, |m| m.get_ref().0.get()),
        ellipse: raw.ellipse.as_ref().map(|e| e.get_ref().0),
        density_above: raw
            .density_above
            .as_ref()
            .map_or(DEFAULT_DENSITY_ABOVE, |d| d.get_ref().0.get()),
        at: Position::locate(&recipe.text, spanned.span().start),
    })
}

/// The file name a plot gets when the recipe does not name one.
fn default_file(kind: PlotKind, x: usize, y: usize) -> String {
    match (kind, x, y) {
        (PlotKind::Scree | PlotKind::OutlierMap, _, _) => format!("{}.svg", kind.name()),
        (_, x, 0) => format!("{}-pc{x}.svg", kind.name()),
        (_, x, y) => format!("{}-pc{x}-pc{y}.svg", kind.name()),
    }
}
