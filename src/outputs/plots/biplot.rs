//! Biplot (Gabriel 1971): the rows as points and the features as arrows in the
//! plane of two components, in the covariance form (α = 0): points are the
//! scores divided by √λ, arrows are the loadings times √λ. Then a point's
//! projection onto an arrow approximates that feature's scaled value, arrow
//! lengths approximate the features' standard deviations (for unit-variance
//! scaling, the arrows' coordinates are the correlations of the features with
//! the components), and angles between arrows approximate correlations.

use super::circle::{arrow_labels, draw_arrows, left_out_sentence};
use super::frame::{self, Extent, Frame, Panel, Step};
use super::scatter::{self, Colour, Groups, Legend, Placements, PointSelection, RowLayers};
use super::scores::{DENSITY_NAMES, DENSITY_WORDS, labelling, with_binning};
use super::svg::{self, NEUTRAL};
use super::{LEGEND_X, equal_axes, scatter_layout, title};
use crate::outputs::view::PlotView;
use crate::recipe::plots::PlotPlan;
use crate::row_results::Batch;
use crate::text::significant_plain;
use std::fmt::Write;

/// Arrow colour.
pub const ARROW: &str = "#3D3D3D";

/// What one scan of the rows gathers for the biplot.
struct BiplotScan {
    /// The extents of the points' coordinates over every row.
    x: Extent,
    y: Extent,
    /// Divisors of the scores (√λ), or 1 where λ is not positive.
    root: (f64, f64),
    /// Arrow tips before stretching.
    tips: Vec<(f64, f64)>,
    /// The common stretch of the arrows.
    stretch: f64,
    groups: Groups,
    sel: PointSelection,
}

/// The divisors of the two components' scores: √λ, or 1 where λ is not
/// positive.
fn roots(plan: &PlotPlan, view: &PlotView) -> (f64, f64) {
    let root = |l: f64| {
        if l > 0.0 && l.is_finite() {
            l.sqrt()
        } else {
            1.0
        }
    };
    (
        root(view.eigenvalues[plan.x - 1]),
        root(view.eigenvalues[plan.y - 1]),
    )
}

/// A row's point: its scores on the two components divided by √λ.
fn coords(plan: &PlotPlan, view: &PlotView) -> impl Fn(&Batch, usize) -> (f64, f64) {
    let (a, b) = (plan.x - 1, plan.y - 1);
    let (ra, rb) = roots(plan, view);
    move |batch: &Batch, i: usize| {
        let s = batch.scores(i);
        (s[a] / ra, s[b] / rb)
    }
}

fn prepare(plan: &PlotPlan, view: &PlotView) -> BiplotScan {
    let (a, b) = (plan.x - 1, plan.y - 1);
    let (ra, rb) = roots(plan, view);
    let colour = Colour::of(view, plan.color.as_deref());
    let g = scatter::gather(
        view,
        colour,
        labelling(plan),
        plan.density_above,
        coords(plan, view),
        |_, _| {},
    );
    let tips: Vec<(f64, f64)> = view
        .loadings
        .iter()
        .take(view.features.len())
        .map(|l| (l[a] * ra, l[b] * rb))
        .collect();
    let reach = g.x.reach().max(g.y.reach());
    let longest = tips
        .iter()
        .filter(|t| t.0.is_finite() && t.1.is_finite())
        .fold(0.0f64, |m, t| m.max((t.0 * t.0 + t.1 * t.1).sqrt()));
    let stretch = if reach > 0.0 && longest > 0.0 {
        Step::at_most(0.9 * reach / longest).value()
    } else {
        1.0
    };
    BiplotScan {
        x: g.x,
        y: g.y,
        root: (ra, rb),
        tips,
        stretch,
        groups: g.groups,
        sel: g.sel,
    }
}

/// The drawing area, the arrows' tips and where the names go, known before
/// the caption (which names the labels left out).
struct Figure {
    panel: Panel,
    tips: Vec<(f64, f64)>,
    names: Placements,
    labels: Placements,
}

fn figure(view: &PlotView, p: &BiplotScan) -> Figure {
    let layout = scatter_layout();
    let tips: Vec<(f64, f64)> = p
        .tips
        .iter()
        .map(|t| (t.0 * p.stretch, t.1 * p.stretch))
        .collect();
    let tx: Vec<f64> = tips.iter().map(|t| t.0).collect();
    let ty: Vec<f64> = tips.iter().map(|t| t.1).collect();
    let mut include_x = tx.clone();
    include_x.push(0.0);
    let mut include_y = ty.clone();
    include_y.push(0.0);
    let xr = p.x.padded(&include_x, 0.08);
    let yr = p.y.padded(&include_y, 0.08);
    let (xa, ya) = equal_axes(&layout, xr, yr);
    let panel = layout.panel(xa, ya);
    let bounds = (panel.left, panel.top, panel.right, panel.bottom);
    let names = arrow_labels(&panel, &tips, &view.features, bounds);
    let labels = scatter::place_rows(&panel, &p.sel, &names.boxes());
    Figure {
        panel,
        tips,
        names,
        labels,
    }
}

/// Each row's layer, in density mode.
pub fn layers(plan: &PlotPlan, view: &PlotView) -> Option<RowLayers> {
    let p = prepare(plan, view);
    if !p.sel.density {
        return None;
    }
    let fig = figure(view, &p);
    Some(with_binning(view, &fig.panel, coords(plan, view), |b| {
        scatter::row_layers(view, b, &p.sel)
    }))
}

fn render_prepared(
    plan: &PlotPlan,
    view: &PlotView,
    p: &BiplotScan,
    fig: &Figure,
    caption: &str,
) -> String {
    let (a, b) = (plan.x - 1, plan.y - 1);
    let layout = scatter_layout();
    let panel = &fig.panel;
    let t = title(plan, view);
    let x_title = format!("{}, score / √λ", super::axis_title(view, a));
    let y_title = format!("{}, score / √λ", super::axis_title(view, b));
    let back = frame::backdrop(&t, &[Frame::new(layout, panel, x_title, y_title)]);

    let mut body = String::new();
    let mut density = None;
    if p.sel.density {
        density = Some(with_binning(view, panel, coords(plan, view), |b| {
            scatter::draw_density(&mut body, view, b)
        }));
    }
    scatter::draw_points(&mut body, panel, &p.sel, &p.groups);
    draw_arrows(&mut body, panel, &fig.tips, ARROW, true, &fig.names);
    scatter::write_labels(&mut body, "labels", svg::INK, &fig.labels);

    let mut legend = Legend::new(LEGEND_X, f64::from(frame::TOP), panel.bottom);
    legend.groups(&p.groups, 5 + if p.sel.density { 14 } else { 0 });
    if p.groups.column.is_none() && !p.sel.density {
        legend.marker(NEUTRAL, svg::Shape::Circle, false, "row");
    }
    if p.sel.flagged_drawn > 0 {
        legend.marker("#FFFFFF", svg::Shape::Circle, true, "above a limit");
    }
    legend.rule(ARROW, None, 1.2, "feature: loading × √λ");
    legend.note(&format!(
        "arrows drawn × {}",
        significant_plain(p.stretch, 3)
    ));
    legend.gap();
    if let Some(drawn) = &density {
        legend.density(drawn, &DENSITY_NAMES);
    }
    body.push_str(&legend.finish());
    frame::finish(back, &t, caption, &body)
}

fn caption_prepared(plan: &PlotPlan, view: &PlotView, p: &BiplotScan, fig: &Figure) -> String {
    let (a, b) = (plan.x - 1, plan.y - 1);
    let mut s = format!(
        "{}. A biplot (Gabriel 1971) of PC{} ({}) and PC{} ({}) in the covariance form: each point is a row's scores divided by √λ of the component (so both axes have unit variance), and each arrow is a feature's loadings multiplied by √λ",
        title(plan, view),
        plan.x,
        crate::text::percent_or_undefined(view.share(a)),
        plan.y,
        crate::text::percent_or_undefined(view.share(b)),
    );
    if view.scaling.gives_correlations() {
        s.push_str(
            " (with unit-variance scaling, these are the correlations of the feature with the two components)",
        );
    }
    let _ = write!(
        s,
        ", all arrows stretched by the common factor {} so they can be read against the points. One data unit has the same length on both axes. Angles between arrows approximate the correlations between features, and a point's projection onto an arrow approximates that feature's scaled value (times {}).",
        significant_plain(p.stretch, 3),
        significant_plain(p.stretch, 3),
    );
    if p.root.0 == 1.0 && view.eigenvalues[a] != 1.0
        || p.root.1 == 1.0 && view.eigenvalues[b] != 1.0
    {
        s.push_str(" A component with a zero eigenvalue is drawn unscaled.");
    }
    if let Some(column) = &p.groups.column {
        let _ = write!(
            s,
            " Colour and marker shape show the {} group ({} values).",
            column,
            p.groups.names.len()
        );
    }
    s.push(' ');
    s.push_str(&p.sel.describe(
        "rows",
        plan.density_above,
        labelling(plan),
        &fig.labels.left_out,
    ));
    if p.sel.density {
        s.push_str(DENSITY_WORDS);
    }
    s.push_str(&left_out_sentence(&fig.names.left_out));
    s
}

/// The figure and its caption from one reading of the rows.
pub fn draw(plan: &PlotPlan, view: &PlotView) -> (String, String) {
    let p = prepare(plan, view);
    let fig = figure(view, &p);
    let caption = caption_prepared(plan, view, &p, &fig);
    (render_prepared(plan, view, &p, &fig, &caption), caption)
}

pub fn render(plan: &PlotPlan, view: &PlotView) -> String {
    draw(plan, view).0
}

pub fn caption(plan: &PlotPlan, view: &PlotView) -> String {
    let p = prepare(plan, view);
    caption_prepared(plan, view, &p, &figure(view, &p))
}
