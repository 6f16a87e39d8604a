//! The outlier map: Hotelling's T² against the squared prediction error (SPE)
//! of each row, with both limits.
//!
//! Both statistics are sums of squares with long right tails: a few rows far
//! beyond a limit would crowd every other row into a corner. When an axis's
//! largest value is more than [`ROOT_ABOVE`] times its limit, that axis gets a
//! square-root scale (ticks still in the statistic's own units), and the
//! caption says so.
//!
//! Above `density_above` rows, every row is counted in a density whose cell
//! borders fall on the limit lines, so each cell holds rows of one kind only
//! (within, above T², above SPE, above both) and is shaded in that kind's
//! colour; only the labelled rows are drawn as points on top.

use super::frame::{self, Axis, Extent, Frame, Panel};
use super::scatter::{
    self, Binning, Category, Colour, Grid, Groups, Legend, Placements, PointSelection, RowLayers,
    Sides,
};
use super::scores::labelling;
use super::svg::{self, MUTED, NEUTRAL, Shape};
use super::{LEGEND_X, scatter_layout, title};
use crate::outputs::view::PlotView;
use crate::recipe::plots::PlotPlan;
use crate::recipe::raw::PointLabels;
use crate::row_results::Batch;
use crate::text::significant_plain;
use std::fmt::Write;

/// Colours and shapes of the four kinds of rows (Okabe & Ito colours).
const WITHIN: (&str, Shape) = (NEUTRAL, Shape::Circle);
const T2_ONLY: (&str, Shape) = ("#0072B2", Shape::Square);
const SPE_ONLY: (&str, Shape) = ("#D55E00", Shape::TriangleUp);
const BOTH: (&str, Shape) = ("#CC79A7", Shape::Diamond);

/// An axis switches to a square-root scale when its largest value exceeds its
/// limit this many times.
pub const ROOT_ABOVE: f64 = 6.0;

/// What one scan of the rows gathers for the outlier map.
struct OutlierScan {
    /// The extents of the plotted coordinates over every row (of the square
    /// roots where the axis has a root scale).
    x: Extent,
    y: Extent,
    root_x: bool,
    root_y: bool,
    /// Rows by kind: 0 within, 1 above T² only, 2 above SPE only, 3 above both.
    groups: Groups,
    sel: PointSelection,
}

const KIND_NAMES: [&str; 4] = [
    "within both limits",
    "above the T² limit",
    "above the SPE limit",
    "above both limits",
];

/// A row's plotted coordinates: its T² and SPE, or their square roots on an
/// axis with a root scale.
fn coords(root_x: bool, root_y: bool) -> impl Fn(&Batch, usize) -> (f64, f64) {
    move |batch: &Batch, i: usize| {
        let (x, y) = (batch.t2(i), batch.spe(i));
        (
            if root_x { root(x) } else { x },
            if root_y { root(y) } else { y },
        )
    }
}

/// Whether a row is above the T² limit and above the SPE limit.
fn above(view: &PlotView, batch: &Batch, i: usize) -> (bool, bool) {
    let over = |v: f64, l: Option<f64>| l.is_some_and(|l| v > l);
    (
        over(batch.t2(i), view.t2_limit),
        over(batch.spe(i), view.spe_limit),
    )
}

/// A row's kind: 0 within, 1 above T² only, 2 above SPE only, 3 above both.
fn kind_of(a: bool, b: bool) -> u32 {
    match (a, b) {
        (false, false) => 0,
        (true, false) => 1,
        (false, true) => 2,
        (true, true) => 3,
    }
}

fn prepare(plan: &PlotPlan, view: &PlotView) -> OutlierScan {
    let kind = |batch: &Batch, i: usize| -> u32 {
        let (a, b) = above(view, batch, i);
        kind_of(a, b)
    };
    // Whether an axis gets a root scale is known only once every row is read,
    // so the same reading also folds the extents of the square roots.
    let (mut top_x, mut top_y) = (0.0f64, 0.0f64);
    let (mut rooted_x, mut rooted_y) = (Extent::default(), Extent::default());
    let watch = |x: f64, y: f64| {
        if x.is_finite() {
            top_x = top_x.max(x);
        }
        if y.is_finite() {
            top_y = top_y.max(y);
        }
        rooted_x.add(root(x));
        rooted_y.add(root(y));
    };
    let colour = Colour::Kinds {
        column: "rows",
        names: &KIND_NAMES,
        of: &kind,
    };
    let mut g = scatter::gather(
        view,
        colour,
        labelling(plan),
        plan.density_above,
        coords(false, false),
        watch,
    );
    let root_x = wants_root(top_x, view.t2_limit);
    let root_y = wants_root(top_y, view.spe_limit);
    g.sel.map_points(|x, y| {
        (
            if root_x { root(x) } else { x },
            if root_y { root(y) } else { y },
        )
    });
    OutlierScan {
        x: if root_x { rooted_x } else { g.x },
        y: if root_y { rooted_y } else { g.y },
        root_x,
        root_y,
        groups: g.groups,
        sel: g.sel,
    }
}

/// √v, with negative values (rounding noise) at 0 and non-finite values kept
/// non-finite so they are left out.
pub(super) fn root(v: f64) -> f64 {
    if v.is_finite() { v.max(0.0).sqrt() } else { v }
}

/// Whether an axis whose largest finite value (or 0) is `top` gets a root scale.
pub(super) fn wants_root(top: f64, limit: Option<f64>) -> bool {
    let Some(limit) = limit.filter(|l| l.is_finite() && *l > 0.0) else {
        return false;
    };
    top > ROOT_ABOVE * limit
}

/// An axis from 0 to `hi` (in plotted units). On a root scale, ticks sit at
/// 1, 2 or 5 × 10ᵉ in the statistic's own units, at least `gap` pixels apart
/// over `pixels`.
pub(super) fn stat_axis(hi: f64, rooted: bool, pixels: f64, gap: f64) -> Axis {
    if !rooted {
        return Axis::nice(0.0, hi, pixels / gap);
    }
    let top = hi * hi;
    let mut candidates = vec![(0.0, "0".to_string())];
    let mut e = -12;
    while frame::pow10(e + 1) < top / 2e4 {
        e += 1;
    }
    'outer: for exp in e..e + 40 {
        for m in [1i64, 2, 5] {
            let v = m as f64 * frame::pow10(exp);
            if v > top {
                break 'outer;
            }
            candidates.push((v, frame::decimal(m, exp)));
        }
    }
    let per_unit = pixels / hi;
    let mut ticks: Vec<(f64, String)> = Vec::new();
    // From the top down, so the large round values are kept.
    for (v, label) in candidates.into_iter().rev() {
        let at = v.sqrt();
        if ticks.last().is_none_or(|t| (t.0 - at) * per_unit >= gap) {
            ticks.push((at, label));
        }
    }
    ticks.reverse();
    if ticks.first().is_some_and(|t| t.0 > 0.0) && ticks[0].0 * per_unit < gap {
        ticks.remove(0);
        ticks.insert(0, (0.0, "0".into()));
    }
    Axis::fixed(0.0, hi, ticks)
}

fn style(kind: usize) -> (&'static str, Shape) {
    [WITHIN, T2_ONLY, SPE_ONLY, BOTH][kind.min(3)]
}

/// The density's categories, one per kind of row, in the kinds' colours.
fn kind_categories() -> Vec<Category> {
    let mut categories = scatter::flag_categories();
    categories.truncate(1);
    categories[0].name = KIND_NAMES[0];
    for k in 1..4 {
        categories.push(Category::tinted(KIND_NAMES[k], style(k).0, false));
    }
    categories
}

/// The drawing area and the labels' places, known before the caption (which
/// names the labels left out).
struct Figure {
    panel: Panel,
    /// The limits in plotted units, when defined.
    lx: Option<f64>,
    ly: Option<f64>,
    labels: Placements,
}

fn figure(view: &PlotView, p: &OutlierScan) -> Figure {
    let layout = scatter_layout();
    let lx = view.t2_limit.filter(|l| l.is_finite());
    let ly = view.spe_limit.filter(|l| l.is_finite());
    let lx = lx.map(|l| if p.root_x { root(l) } else { l });
    let ly = ly.map(|l| if p.root_y { root(l) } else { l });
    let include_x: Vec<f64> = lx.into_iter().chain([0.0]).collect();
    let include_y: Vec<f64> = ly.into_iter().chain([0.0]).collect();
    let (_, xhi) = p.x.padded(&include_x, 0.05);
    let (_, yhi) = p.y.padded(&include_y, 0.05);
    let xa = stat_axis(xhi, p.root_x, layout.plot_width(), 80.0);
    let ya = stat_axis(yhi, p.root_y, layout.plot_height(), 55.0);
    let panel = layout.panel(xa, ya);
    let labels = scatter::place_rows(&panel, &p.sel, &[]);
    Figure {
        panel,
        lx,
        ly,
        labels,
    }
}

/// Gives `f` the binning of the rows into the density: cell borders on the
/// limit lines, each row kept on its side of them.
fn with_binning<R>(
    view: &PlotView,
    p: &OutlierScan,
    fig: &Figure,
    f: impl FnOnce(&Binning) -> R,
) -> R {
    let panel = &fig.panel;
    let at = coords(p.root_x, p.root_y);
    let pixel = |batch: &Batch, i: usize| {
        let (x, y) = at(batch, i);
        (panel.px(x), panel.py(y))
    };
    let (has_x, has_y) = (fig.lx.is_some(), fig.ly.is_some());
    let category = |batch: &Batch, i: usize| {
        let (a, b) = above(view, batch, i);
        let sides = Sides {
            right: has_x.then_some(a),
            above: has_y.then_some(b),
        };
        (kind_of(a, b) as usize, sides)
    };
    let binning = Binning {
        grid: Grid::new(
            panel,
            fig.lx.map(|l| panel.px(l)),
            fig.ly.map(|l| panel.py(l)),
        ),
        categories: kind_categories(),
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
    let fig = figure(view, &p);
    Some(with_binning(view, &p, &fig, |b| {
        scatter::row_layers(view, b, &p.sel)
    }))
}

fn render_prepared(
    plan: &PlotPlan,
    view: &PlotView,
    p: &OutlierScan,
    fig: &Figure,
    caption: &str,
) -> String {
    let layout = scatter_layout();
    let panel = &fig.panel;
    let (lx, ly) = (fig.lx, fig.ly);
    let t = title(plan, view);
    let back = frame::backdrop(
        &t,
        &[Frame::new(
            layout,
            panel,
            format!(
                "Hotelling's T² ({} kept components){}",
                view.kept,
                if p.root_x { ", square-root scale" } else { "" }
            ),
            format!(
                "SPE (squared prediction error){}",
                if p.root_y { ", square-root scale" } else { "" }
            ),
        )],
    );

    let mut body = String::new();
    let mut density = None;
    if p.sel.density {
        density = Some(with_binning(view, p, fig, |b| {
            scatter::draw_density(&mut body, view, b)
        }));
    }
    // The limits.
    let rule = format!("stroke=\"{MUTED}\" stroke-width=\"1.2\" stroke-dasharray=\"6 4\"");
    let level = crate::text::percent_or_undefined(view.confidence);
    body.push_str("<g class=\"limits\">\n");
    if let Some(l) = lx {
        let x = panel.px(l);
        svg::line(
            &mut body,
            x,
            panel.top,
            x,
            panel.bottom,
            &format!("class=\"t2-limit\" {rule}"),
        );
    }
    if let Some(l) = ly {
        let y = panel.py(l);
        svg::line(
            &mut body,
            panel.left,
            y,
            panel.right,
            y,
            &format!("class=\"spe-limit\" {rule}"),
        );
    }
    body.push_str("</g>\n");

    // Points: coloured by which limits they exceed (not by a group column).
    draw_kinds(&mut body, panel, p);
    scatter::write_labels(&mut body, "labels", svg::INK, &fig.labels);

    let mut legend = Legend::new(LEGEND_X, f64::from(frame::TOP), panel.bottom);
    match &density {
        Some(drawn) => {
            let names: Vec<&str> = (0..4).map(short).collect();
            legend.density(drawn, &names);
        }
        None => {
            legend.heading("rows");
            for k in 0..4 {
                let (colour, shape) = style(k);
                legend.counted(colour, shape, short(k), p.groups.counts[k]);
            }
            legend.gap();
        }
    }
    legend.heading(&format!("limits at {level}"));
    legend.rule(MUTED, Some("6 4"), 1.2, "limit");
    match view.t2_limit {
        Some(l) => legend.note(&format!("T²: {}", significant_plain(l, 4))),
        None => legend.note("T²: not defined"),
    }
    match view.spe_limit {
        Some(l) => legend.note(&format!("SPE: {}", significant_plain(l, 4))),
        None => legend.note("SPE: not defined"),
    }
    body.push_str(&legend.finish());
    frame::finish(back, &t, caption, &body)
}

fn short(kind: usize) -> &'static str {
    [
        "within limits",
        "over T² only",
        "over SPE only",
        "over both",
    ][kind.min(3)]
}

fn draw_kinds(out: &mut String, panel: &frame::Panel, p: &OutlierScan) {
    out.push_str("<g class=\"points\">\n");
    let mut current: Option<usize> = None;
    for point in &p.sel.points {
        let k = point.group as usize;
        if current != Some(k) {
            if current.is_some() {
                out.push_str("</g>\n");
            }
            let (colour, _) = style(k);
            let _ = writeln!(
                out,
                "<g class=\"group\" data-group=\"{}\" fill=\"{colour}\" stroke=\"#FFFFFF\" stroke-width=\"0.6\">",
                KIND_NAMES[k]
            );
            current = Some(k);
        }
        let (_, shape) = style(k);
        let extra = if point.flagged {
            "class=\"flagged\""
        } else {
            ""
        };
        svg::marker(
            out,
            shape,
            panel.px(point.x),
            panel.py(point.y),
            scatter::MARK,
            extra,
        );
    }
    if current.is_some() {
        out.push_str("</g>\n");
    }
    out.push_str("</g>\n");
}

fn caption_prepared(plan: &PlotPlan, view: &PlotView, p: &OutlierScan, fig: &Figure) -> String {
    let level = crate::text::percent_or_undefined(view.confidence);
    let mut s = format!(
        "{}. Each row's Hotelling T² (distance within the model of {} kept components, horizontal) against its squared prediction error SPE (distance from the model, vertical).",
        title(plan, view),
        view.kept
    );
    match view.t2_limit {
        Some(l) => {
            let _ = write!(
                s,
                " The dashed vertical line is the T² limit at {level} ({}).",
                significant_plain(l, 4)
            );
        }
        None => {
            let _ = write!(
                s,
                " No T² limit is defined at {level}, so no vertical line is drawn."
            );
        }
    }
    match view.spe_limit {
        Some(l) => {
            let _ = write!(
                s,
                " The dashed horizontal line is the SPE limit at {level} ({}).",
                significant_plain(l, 4)
            );
        }
        None => {
            let _ = write!(
                s,
                " No SPE limit is defined at {level} (for example when every component is kept), so no horizontal line is drawn."
            );
        }
    }
    match (p.root_x, p.root_y) {
        (true, true) => s.push_str(
            " Both axes have a square-root scale (ticks in the statistics' own units), because some rows lie far beyond the limits.",
        ),
        (true, false) => s.push_str(
            " The T² axis has a square-root scale (ticks in T² units), because some rows lie far beyond the limit.",
        ),
        (false, true) => s.push_str(
            " The SPE axis has a square-root scale (ticks in SPE units), because some rows lie far beyond the limit.",
        ),
        (false, false) => {}
    }
    let _ = write!(
        s,
        " {} tell the rows within both limits ({}), above the T² limit only ({}), above the SPE limit only ({}) and above both ({}).",
        if p.sel.density {
            "Colours"
        } else {
            "Colour and shape"
        },
        p.groups.counts[0],
        p.groups.counts[1],
        p.groups.counts[2],
        p.groups.counts[3]
    );
    s.push(' ');
    let mut words = p.sel.describe(
        "rows",
        plan.density_above,
        labelling(plan),
        &fig.labels.left_out,
    );
    // Flagged rows here are told apart by colour, not by an outline.
    words = words.replace(" Rows above the T² or SPE limit have a dark outline.", "");
    s.push_str(&words);
    if p.sel.density {
        s.push_str(" The squares' borders fall on the limit lines, so each square holds rows of one kind only.");
    }
    if plan.labels == PointLabels::None {
        s.push_str(" No rows are labelled.");
    }
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
