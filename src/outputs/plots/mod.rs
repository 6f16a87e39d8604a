//! Deterministic SVG figures: one function per plot kind, each returning a
//! complete SVG document, and a caption in plain words for the report.
//!
//! The frame (background, title, grid, ticks, axis titles) is drawn by
//! `plotters` with its SVG backend and our own axis type (see `frame.rs` for
//! why); the marks are written by our own code so they are grouped under
//! classes a reader or a test can find and count:
//!
//! | class | what |
//! |---|---|
//! | `points` | one marker per individually drawn row or feature, in `group` subgroups (`data-group`); `flagged` on rows above a limit |
//! | `density` | every row binned in density mode: `density-category` groups (`data-category`) of `density-class` subgroups (`data-from`), one `rect` per occupied cell with its rows as `data-n` |
//! | `labels`, `arrow-labels` | row ids beside points; feature names beside arrows |
//! | `arrows` | one `path` per feature (shaft and head), biplot and correlation circle |
//! | `bars` | one `rect` per bar; in the scree `bar`, plus `kept` for kept components |
//! | `cumulative`, `broken-stick`, `parallel`, `press` | scree series: a polyline and one marker per value |
//! | `kept-rule`, `kaiser`, `variance-target`, `press-choice` | the scree's marks of k and of the rules |
//! | `ellipse`, `t2-limit`, `spe-limit`, `unit-circle` | the T² ellipse, the outlier-map limits, the correlation circle |
//! | `legend`, `tick-labels` | the legend column; feature names under loading bars |
//!
//! Same view, same bytes: numbers are written from integers or rounded to
//! tenths of a pixel, no ids or timestamps are written, and groups are sorted
//! by name (digit runs by value). Having no ids, several figures can be
//! inlined into one HTML page without clashes. Text uses the generic
//! `sans-serif` family; no font is embedded. Each document carries its title
//! and caption as `<title>` and `<desc>`.

pub mod batch;
mod biplot;
mod circle;
mod frame;
mod loadings;
mod outliers;
mod scatter;
mod scores;
mod scree;
mod svg;

use super::view::PlotView;
use crate::recipe::plots::PlotPlan;
use crate::recipe::raw::PlotKind;
use frame::{Axis, Layout, Step, TOP};
use svg::{HEIGHT, WIDTH};

pub use scatter::{Cell, RowLayers};

/// In which layer each row of a scatter plot (scores, biplot, outlier map) is
/// drawn, when the plot shows a density (`None` otherwise): every finite row
/// in exactly one density cell of one category, the labelled rows also drawn
/// as points on top. The figure's density is counted by the same rule.
pub fn row_layers(plan: &PlotPlan, view: &PlotView) -> Option<RowLayers> {
    if missing_data(plan, view).is_some() {
        return None;
    }
    match plan.kind {
        PlotKind::Scores => scores::layers(plan, view),
        PlotKind::Biplot => biplot::layers(plan, view),
        PlotKind::OutlierMap => outliers::layers(plan, view),
        _ => None,
    }
}

/// The box a label's text takes in pixels (left, top, right, bottom), as the
/// figures reckon it when keeping labels apart: `anchor` is the text's
/// `text-anchor` ("start", "middle" or "end").
pub fn label_box(x: f64, y: f64, anchor: &str, text: &str) -> (f64, f64, f64, f64) {
    let anchor = match anchor {
        "end" => svg::Anchor::End,
        "middle" => svg::Anchor::Middle,
        _ => svg::Anchor::Start,
    };
    let w = svg::text_width(text, frame::LABEL_SIZE);
    let b = scatter::Spot { x, y, anchor }.bounds(w);
    (b.x0, b.y0, b.x1, b.y1)
}

/// Draws one plot as an SVG document.
pub fn render(plan: &PlotPlan, view: &PlotView) -> String {
    if let Some(problem) = missing_data(plan, view) {
        return placeholder(plan, &problem);
    }
    match plan.kind {
        PlotKind::Scree => scree::render(plan, view),
        PlotKind::Scores => scores::render(plan, view),
        PlotKind::Loadings => loadings::render(plan, view),
        PlotKind::Biplot => biplot::render(plan, view),
        PlotKind::CorrelationCircle => circle::render(plan, view),
        PlotKind::OutlierMap => outliers::render(plan, view),
    }
}

/// The plot and its caption ([`render`] and [`caption`] together); the
/// scatter plots read the rows once for both.
pub fn draw(plan: &PlotPlan, view: &PlotView) -> (String, String) {
    if missing_data(plan, view).is_some() {
        return (render(plan, view), caption(plan, view));
    }
    match plan.kind {
        PlotKind::Scores => scores::draw(plan, view),
        PlotKind::Biplot => biplot::draw(plan, view),
        PlotKind::OutlierMap => outliers::draw(plan, view),
        _ => (render(plan, view), caption(plan, view)),
    }
}

/// A caption in plain words for the report: what is drawn and how to read it.
pub fn caption(plan: &PlotPlan, view: &PlotView) -> String {
    if let Some(problem) = missing_data(plan, view) {
        return format!("{} Not drawn: {problem}", title(plan, view));
    }
    match plan.kind {
        PlotKind::Scree => scree::caption(plan, view),
        PlotKind::Scores => scores::caption(plan, view),
        PlotKind::Loadings => loadings::caption(plan, view),
        PlotKind::Biplot => biplot::caption(plan, view),
        PlotKind::CorrelationCircle => circle::caption(plan, view),
        PlotKind::OutlierMap => outliers::caption(plan, view),
    }
}

/// The plot's title: the recipe's, or one made from the kind and components.
pub fn title(plan: &PlotPlan, _view: &PlotView) -> String {
    if let Some(t) = &plan.title {
        return t.clone();
    }
    let (x, y) = (plan.x, plan.y);
    match plan.kind {
        PlotKind::Scree => "Scree: eigenvalues and cumulative share".into(),
        PlotKind::Scores => format!("Scores: PC{x} against PC{y}"),
        PlotKind::Loadings if y == 0 => format!("Loadings of PC{x}"),
        PlotKind::Loadings => format!("Loadings: PC{x} against PC{y}"),
        PlotKind::Biplot => format!("Biplot: PC{x} against PC{y}"),
        PlotKind::CorrelationCircle => format!("Correlation circle: PC{x} against PC{y}"),
        PlotKind::OutlierMap => "Outlier map: T² against SPE".into(),
    }
}

/// Why a plot cannot be drawn from this view, if it cannot.
fn missing_data(plan: &PlotPlan, view: &PlotView) -> Option<String> {
    let needed = plan.x.max(plan.y);
    let has = view.eigenvalues.len();
    if view.eigenvalues.is_empty() {
        return Some("the view has no components.".into());
    }
    if needed > has {
        return Some(format!(
            "component {needed} is not among the {has} computed."
        ));
    }
    let needs_scores = matches!(plan.kind, PlotKind::Scores | PlotKind::Biplot);
    if needs_scores && !view.rows.is_empty() && view.rows.cols() < needed {
        return Some("some rows lack the scores of the components asked for.".into());
    }
    let needs_features = matches!(
        plan.kind,
        PlotKind::Loadings | PlotKind::Biplot | PlotKind::CorrelationCircle
    );
    if needs_features {
        let table = if plan.kind == PlotKind::CorrelationCircle {
            &view.correlations
        } else {
            &view.loadings
        };
        if table.len() < view.features.len() || table.iter().any(|r| r.len() < needed) {
            return Some("the view lacks loadings or correlations for some features.".into());
        }
    }
    None
}

/// An SVG that says why the plot is empty.
fn placeholder(plan: &PlotPlan, problem: &str) -> String {
    let t = title(plan, &PlotView::default());
    let back = frame::backdrop(&t, &[]);
    let mut body = String::new();
    svg::text(
        &mut body,
        f64::from(WIDTH) / 2.0,
        f64::from(HEIGHT) / 2.0,
        svg::Anchor::Middle,
        &format!("Not drawn: {problem}"),
        "font-size=\"13\"",
    );
    frame::finish(back, &t, problem, &body)
}

/// The layout of a scatter plot with a legend column on the right.
fn scatter_layout() -> Layout {
    Layout {
        x0: 8,
        y0: TOP,
        x1: 540,
        y1: HEIGHT as i32 - 8,
        left: 62,
        bottom: 48,
        right: 0,
    }
}

/// Left edge of the legend column of [`scatter_layout`].
const LEGEND_X: f64 = 552.0;

/// Axes over the two ranges with one data unit the same length on both, and
/// the same tick step, so distances and angles read true.
fn equal_axes(layout: &Layout, xr: (f64, f64), yr: (f64, f64)) -> (Axis, Axis) {
    let (w, h) = (layout.plot_width(), layout.plot_height());
    let (xr, yr) = (frame::sane_range(xr.0, xr.1), frame::sane_range(yr.0, yr.1));
    let unit = ((xr.1 - xr.0) / w).max((yr.1 - yr.0) / h);
    let (cx, cy) = ((xr.0 + xr.1) / 2.0, (yr.0 + yr.1) / 2.0);
    let (hw, hh) = (unit * w / 2.0, unit * h / 2.0);
    let step = Step::at_least(unit * 75.0);
    (
        Axis::with_step(cx - hw, cx + hw, step),
        Axis::with_step(cy - hh, cy + hh, step),
    )
}

/// The view's axis title ("PC1 (41.2 %)"), or just "PC1" when the share is
/// not a finite number.
fn axis_title(view: &PlotView, a: usize) -> String {
    if view.share(a).is_finite() {
        view.axis_title(a)
    } else {
        format!("PC{}", a + 1)
    }
}
