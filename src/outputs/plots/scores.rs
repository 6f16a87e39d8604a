//! Scores of two components, coloured by a group column, with an optional
//! Hotelling T² ellipse.
//!
//! Above `density_above` rows, every row is counted in a density: rows within
//! the limits in grey-blue squares, rows above a limit in smaller vermilion
//! squares in their cells' middle (so the grey density under them still
//! shows); only the labelled rows are drawn as points on top.

use super::frame::{self, Extent, Frame, Panel};
use super::scatter::{
    self, Binning, Colour, Grid, Groups, Labelling, Legend, Placements, PointSelection, RowLayers,
};
use super::svg::{self, MUTED, N, NEUTRAL};
use super::{LEGEND_X, equal_axes, scatter_layout, title};
use crate::outputs::view::PlotView;
use crate::recipe::plots::PlotPlan;
use crate::row_results::Batch;
use crate::stats::limits::t2_limit_phase1;
use crate::text::significant_plain;
use std::fmt::Write;

/// The ellipse: the limit L and the semi-axes along x and y, or why it is not drawn.
type Ellipse = Result<(f64, f64, f64), String>;

/// What one scan of the rows gathers for the score plot.
struct ScoreScan {
    /// The extents of the two components' scores over every row.
    x: Extent,
    y: Extent,
    /// Rows in all.
    n: usize,
    groups: Groups,
    sel: PointSelection,
    ellipse: Option<Ellipse>,
}

/// A row's plotted coordinates: its scores on the two components.
fn coords(plan: &PlotPlan) -> impl Fn(&Batch, usize) -> (f64, f64) {
    let (a, b) = (plan.x - 1, plan.y - 1);
    move |batch: &Batch, i: usize| {
        let s = batch.scores(i);
        (s[a], s[b])
    }
}

fn prepare(plan: &PlotPlan, view: &PlotView) -> ScoreScan {
    let (a, b) = (plan.x - 1, plan.y - 1);
    let colour = Colour::of(view, plan.color.as_deref());
    let g = scatter::gather(
        view,
        colour,
        labelling(plan),
        plan.density_above,
        coords(plan),
        |_, _| {},
    );
    let n = g.rows;
    let ellipse = plan.ellipse.map(|conf| {
        let (la, lb) = (view.eigenvalues[a], view.eigenvalues[b]);
        if !(la > 0.0 && lb > 0.0 && la.is_finite() && lb.is_finite()) {
            return Err("an eigenvalue of the plotted components is not positive".to_string());
        }
        let l = t2_limit_phase1(n, 2, conf).map_err(|e| e.to_string())?;
        Ok((l, (l * la).sqrt(), (l * lb).sqrt()))
    });
    ScoreScan {
        x: g.x,
        y: g.y,
        n,
        groups: g.groups,
        sel: g.sel,
        ellipse,
    }
}

pub(super) fn labelling(plan: &PlotPlan) -> Labelling {
    Labelling {
        which: plan.labels,
        most: plan.max_labels,
    }
}

/// The drawing area and the labels' places, known before the caption (which
/// names the labels left out).
struct Figure {
    panel: Panel,
    labels: Placements,
}

fn figure(p: &ScoreScan) -> Figure {
    let layout = scatter_layout();
    let (ex, ey) = match &p.ellipse {
        Some(Ok((_, ex, ey))) => (*ex, *ey),
        _ => (0.0, 0.0),
    };
    let xr = p.x.padded(&[-ex, ex, 0.0], 0.05);
    let yr = p.y.padded(&[-ey, ey, 0.0], 0.05);
    let (xa, ya) = equal_axes(&layout, xr, yr);
    let panel = layout.panel(xa, ya);
    let labels = scatter::place_rows(&panel, &p.sel, &[]);
    Figure { panel, labels }
}

/// Gives `f` the binning of the rows into the density (by flag, no splits).
pub(super) fn with_binning<R>(
    view: &PlotView,
    panel: &Panel,
    at: impl Fn(&Batch, usize) -> (f64, f64),
    f: impl FnOnce(&Binning) -> R,
) -> R {
    let pixel = |batch: &Batch, i: usize| {
        let (x, y) = at(batch, i);
        (panel.px(x), panel.py(y))
    };
    let category = scatter::flag_category(view);
    let binning = Binning {
        grid: Grid::new(panel, None, None),
        categories: scatter::flag_categories(),
        pixel: &pixel,
        category: &category,
    };
    f(&binning)
}

/// Each row's layer, in density mode.
pub fn layers(plan: &PlotPlan, view: &PlotView) -> Option<RowLayers> {
    let p = prepare(plan, view);
    if !p.sel.density {
        return None;
    }
    let fig = figure(&p);
    Some(with_binning(view, &fig.panel, coords(plan), |b| {
        scatter::row_layers(view, b, &p.sel)
    }))
}

/// The legend's names of the density's categories.
pub(super) const DENSITY_NAMES: [&str; 2] = ["within limits", "above a limit"];

fn render_prepared(
    plan: &PlotPlan,
    view: &PlotView,
    p: &ScoreScan,
    fig: &Figure,
    caption: &str,
) -> String {
    let (a, b) = (plan.x - 1, plan.y - 1);
    let layout = scatter_layout();
    let panel = &fig.panel;
    let t = title(plan, view);
    let back = frame::backdrop(
        &t,
        &[Frame::new(
            layout,
            panel,
            super::axis_title(view, a),
            super::axis_title(view, b),
        )],
    );

    let mut body = String::new();
    // Zero lines through the origin (the scores' mean).
    frame::origin_lines(&mut body, panel);

    let mut density = None;
    if p.sel.density {
        density = Some(with_binning(view, panel, coords(plan), |b| {
            scatter::draw_density(&mut body, view, b)
        }));
    }
    if let Some(Ok((_, ex, ey))) = &p.ellipse {
        let _ = writeln!(
            body,
            "<ellipse class=\"ellipse\" cx=\"{}\" cy=\"{}\" rx=\"{}\" ry=\"{}\" fill=\"none\" stroke=\"{MUTED}\" stroke-width=\"1.2\" stroke-dasharray=\"6 4\"/>",
            N(panel.px(0.0)),
            N(panel.py(0.0)),
            N(ex * panel.x_scale()),
            N(ey * panel.y_scale())
        );
    }
    scatter::draw_points(&mut body, panel, &p.sel, &p.groups);
    scatter::write_labels(&mut body, "labels", svg::INK, &fig.labels);

    let mut legend = Legend::new(LEGEND_X, f64::from(frame::TOP), panel.bottom);
    let reserve = 3 + if p.sel.density { 14 } else { 0 } + usize::from(p.ellipse.is_some()) * 2;
    legend.groups(&p.groups, reserve);
    if p.groups.column.is_none() && !p.sel.density {
        legend.marker(NEUTRAL, svg::Shape::Circle, false, "row");
    }
    if p.sel.flagged_drawn > 0 {
        legend.marker("#FFFFFF", svg::Shape::Circle, true, "above a limit");
        legend.gap();
    }
    if let Some(Ok(_)) = &p.ellipse {
        legend.rule(
            MUTED,
            Some("6 4"),
            1.2,
            &format!(
                "T² ellipse {}",
                crate::text::percent_or_undefined(plan.ellipse.unwrap_or(0.0))
            ),
        );
        legend.gap();
    }
    if let Some(drawn) = &density {
        legend.density(drawn, &DENSITY_NAMES);
    }
    body.push_str(&legend.finish());
    frame::finish(back, &t, caption, &body)
}

fn caption_prepared(plan: &PlotPlan, view: &PlotView, p: &ScoreScan, fig: &Figure) -> String {
    let (a, b) = (plan.x - 1, plan.y - 1);
    let mut s = format!(
        "{}. Scores of the rows on PC{} ({} of the variance, horizontal) and PC{} ({}, vertical), with one score unit the same length on both axes.",
        title(plan, view),
        plan.x,
        crate::text::percent_or_undefined(view.share(a)),
        plan.y,
        crate::text::percent_or_undefined(view.share(b)),
    );
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
    match &p.ellipse {
        None => {}
        Some(Ok((l, _, _))) => {
            let _ = write!(
                s,
                " The dashed ellipse is the Hotelling T² limit at {} for these two components alone: t{}²/λ{} + t{}²/λ{} = L with L = {} (the Phase I limit of Tracy, Young and Mason for n = {} rows and 2 components). Rows are flagged by T² over the {} kept components and by SPE, not by this ellipse, so a flagged row may lie inside it.",
                crate::text::percent_or_undefined(plan.ellipse.unwrap_or(0.0)),
                plan.x,
                plan.x,
                plan.y,
                plan.y,
                significant_plain(*l, 4),
                p.n,
                view.kept
            );
        }
        Some(Err(why)) => {
            let _ = write!(s, " No T² ellipse is drawn: {why}.");
        }
    }
    s
}

/// How the density of a score plot or biplot reads, for its caption.
pub(super) const DENSITY_WORDS: &str = " Grey-blue squares count the rows within the limits; smaller vermilion squares in a square's middle count the rows above a T² or SPE limit there, so the grey under them still shows.";

/// The figure and its caption from one reading of the rows.
pub fn draw(plan: &PlotPlan, view: &PlotView) -> (String, String) {
    let p = prepare(plan, view);
    let fig = figure(&p);
    let caption = caption_prepared(plan, view, &p, &fig);
    (render_prepared(plan, view, &p, &fig, &caption), caption)
}

pub fn render(plan: &PlotPlan, view: &PlotView) -> String {
    draw(plan, view).0
}

pub fn caption(plan: &PlotPlan, view: &PlotView) -> String {
    let p = prepare(plan, view);
    caption_prepared(plan, view, &p, &figure(&p))
}
