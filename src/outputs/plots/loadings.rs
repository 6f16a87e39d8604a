//! Loadings: one component's loadings as bars (one per feature), or two
//! components' loadings as a scatter with the feature names beside the points.

use super::frame::{self, Axis, Frame, LABEL_SIZE, Layout, TICK_SIZE, TOP, padded_range};
use super::scatter::{self, MARK};
use super::svg::{self, Anchor, HEIGHT, INK, MUTED, N, WIDTH};
use super::{equal_axes, title};
use crate::outputs::view::PlotView;
use crate::recipe::plots::PlotPlan;
use crate::text::significant_plain;
use std::fmt::Write;

const POSITIVE: &str = "#0072B2";
const NEGATIVE: &str = "#D55E00";
/// Longest feature name written under a bar, in characters.
const NAME_CHARS: usize = 26;

pub fn render(plan: &PlotPlan, view: &PlotView) -> String {
    if plan.y == 0 {
        bars(plan, view)
    } else {
        scatter_plot(plan, view)
    }
}

/// The bar chart's layout: names need a label area as tall as the longest
/// name when written upright (rotated), or one line when they fit flat.
struct BarLayout {
    layout: Layout,
    rotated: bool,
    /// Label every `every`-th feature (1 when all fit).
    every: usize,
}

fn bar_layout(view: &PlotView) -> BarLayout {
    let p = view.features.len().max(1);
    let width = f64::from(WIDTH) - 16.0 - 62.0;
    let slot = width / p as f64;
    let longest = view
        .features
        .iter()
        .map(|f| svg::text_width(&svg::clip_text(f, NAME_CHARS), TICK_SIZE))
        .fold(0.0f64, f64::max);
    let rotated = longest + 6.0 > slot;
    let every = if slot >= TICK_SIZE + 1.0 {
        1
    } else {
        ((TICK_SIZE + 1.0) / slot).ceil() as usize
    };
    let bottom = if rotated {
        (longest + 14.0).clamp(30.0, 190.0) as i32
    } else {
        30
    };
    BarLayout {
        layout: Layout {
            x0: 8,
            y0: TOP,
            x1: WIDTH as i32 - 8,
            y1: HEIGHT as i32 - 8,
            left: 62,
            bottom,
            right: 0,
        },
        rotated,
        every,
    }
}

fn bars(plan: &PlotPlan, view: &PlotView) -> String {
    let a = plan.x - 1;
    let values: Vec<f64> = view
        .loadings
        .iter()
        .take(view.features.len())
        .map(|r| r[a])
        .collect();
    let p = values.len();
    let reference = if p > 0 { 1.0 / (p as f64).sqrt() } else { 0.0 };
    let big = values
        .iter()
        .filter(|v| v.is_finite())
        .fold(reference, |m, v| m.max(v.abs()));
    let bl = bar_layout(view);
    let layout = bl.layout;
    let lim = big * 1.1;
    let ya = Axis::nice(-lim, lim, layout.plot_height() / 55.0);
    let xa = Axis::fixed(0.0, p.max(1) as f64, Vec::new());
    let panel = layout.panel(xa, ya);
    let t = title(plan, view);
    let mut fr = Frame::new(
        layout,
        &panel,
        String::new(),
        format!("loading on {}", super::axis_title(view, a)),
    );
    fr.x_grid = false;
    let back = frame::backdrop(&t, &[fr]);

    let mut body = String::new();
    // Equal-contribution reference: a unit vector with all p loadings equal.
    let dash = format!("stroke=\"{MUTED}\" stroke-width=\"0.9\" stroke-dasharray=\"5 4\"");
    body.push_str("<g class=\"reference\">\n");
    for v in [reference, -reference] {
        svg::line(
            &mut body,
            panel.left,
            panel.py(v),
            panel.right,
            panel.py(v),
            &dash,
        );
    }
    // Its key sits above the plotting area, right-aligned, clear of the bars.
    let key = "±1/√p: all features equal";
    let key_x = panel.right - svg::text_width(key, LABEL_SIZE) - 6.0;
    svg::line(
        &mut body,
        key_x - 20.0,
        panel.top - 7.0,
        key_x - 2.0,
        panel.top - 7.0,
        &dash,
    );
    svg::text(
        &mut body,
        key_x,
        panel.top - 3.5,
        Anchor::Start,
        key,
        &format!("font-size=\"{}\" fill=\"{MUTED}\"", N(LABEL_SIZE)),
    );
    body.push_str("</g>\n");

    let slot = panel.width() / p.max(1) as f64;
    let half = (slot * 0.36).max(0.5);
    body.push_str("<g class=\"bars\">\n");
    for (j, &v) in values.iter().enumerate() {
        let v = if v.is_finite() { v } else { 0.0 };
        let cx = panel.left + (j as f64 + 0.5) * slot;
        let colour = if v >= 0.0 { POSITIVE } else { NEGATIVE };
        svg::rect(
            &mut body,
            cx - half,
            panel.py(0.0),
            cx + half,
            panel.py(v),
            &format!(
                "fill=\"{colour}\" data-feature=\"{}\"",
                svg::esc(&view.features[j])
            ),
        );
    }
    body.push_str("</g>\n");
    svg::line(
        &mut body,
        panel.left,
        panel.py(0.0),
        panel.right,
        panel.py(0.0),
        &format!("stroke=\"{INK}\" stroke-width=\"1\""),
    );
    // Feature names as tick labels.
    let _ = writeln!(
        body,
        "<g class=\"tick-labels\" font-size=\"{}\" fill=\"{INK}\">",
        N(TICK_SIZE)
    );
    for (j, name) in view.features.iter().enumerate() {
        if j % bl.every != 0 {
            continue;
        }
        let cx = panel.left + (j as f64 + 0.5) * slot;
        let name = svg::clip_text(name, NAME_CHARS);
        if bl.rotated {
            let (x, y) = (cx + 0.35 * TICK_SIZE, panel.bottom + 6.0);
            let _ = writeln!(
                body,
                "<text x=\"{}\" y=\"{}\" text-anchor=\"end\" transform=\"rotate(-90 {} {})\">{}</text>",
                N(x),
                N(y),
                N(x),
                N(y),
                svg::esc(&name)
            );
        } else {
            svg::text(
                &mut body,
                cx,
                panel.bottom + 6.0 + TICK_SIZE,
                Anchor::Middle,
                &name,
                "",
            );
        }
    }
    body.push_str("</g>\n");
    frame::finish(back, &t, &caption(plan, view), &body)
}

fn scatter_plot(plan: &PlotPlan, view: &PlotView) -> String {
    let (a, b) = (plan.x - 1, plan.y - 1);
    let pts: Vec<(f64, f64)> = view
        .loadings
        .iter()
        .take(view.features.len())
        .map(|r| (r[a], r[b]))
        .collect();
    let layout = Layout {
        x0: 8,
        y0: TOP,
        x1: WIDTH as i32 - 8,
        y1: HEIGHT as i32 - 8,
        left: 62,
        bottom: 48,
        right: 0,
    };
    // Room for the names: pad the range by a fifth.
    let xr = padded_range(pts.iter().map(|p| p.0), &[0.0], 0.2);
    let yr = padded_range(pts.iter().map(|p| p.1), &[0.0], 0.12);
    let (xa, ya) = equal_axes(&layout, xr, yr);
    let panel = layout.panel(xa, ya);
    let t = title(plan, view);
    let back = frame::backdrop(
        &t,
        &[Frame::new(
            layout,
            &panel,
            format!("loading on {}", super::axis_title(view, a)),
            format!("loading on {}", super::axis_title(view, b)),
        )],
    );
    let mut body = String::new();
    frame::origin_lines(&mut body, &panel);
    let _ = writeln!(
        body,
        "<g class=\"points\" fill=\"{POSITIVE}\" stroke=\"#FFFFFF\" stroke-width=\"0.6\">"
    );
    let mut items = Vec::new();
    for (j, &(x, y)) in pts.iter().enumerate() {
        let (x, y) = if x.is_finite() && y.is_finite() {
            (x, y)
        } else {
            (0.0, 0.0)
        };
        let (px, py) = (panel.px(x), panel.py(y));
        svg::marker(&mut body, svg::Shape::Circle, px, py, MARK, "");
        items.push((px, py, view.features[j].clone()));
    }
    body.push_str("</g>\n");
    let marks: Vec<(f64, f64)> = items.iter().map(|i| (i.0, i.1)).collect();
    scatter::draw_labels(
        &mut body,
        &items,
        &marks,
        &[],
        (panel.left, panel.top, panel.right, panel.bottom),
    );
    frame::finish(back, &t, &caption(plan, view), &body)
}

pub fn caption(plan: &PlotPlan, view: &PlotView) -> String {
    let a = plan.x - 1;
    let p = view.features.len();
    if plan.y == 0 {
        let mut s = format!(
            "{}. The loading of each of the {p} features on PC{} ({} of the variance), in table order: blue bars are positive, vermilion bars negative. The loadings form a unit vector, so the dashed lines at ±1/√p = ±{} mark the size every loading would have if all features contributed equally; bars beyond them weigh more than an equal share. The sign of a component is a convention (its largest loading is positive).",
            title(plan, view),
            plan.x,
            crate::text::percent_or_undefined(view.share(a)),
            significant_plain(1.0 / (p.max(1) as f64).sqrt(), 3),
        );
        let bl = bar_layout(view);
        if bl.every > 1 {
            let _ = write!(
                s,
                " With this many features, one name in every {} is written under its bar.",
                bl.every
            );
        }
        s
    } else {
        let b = plan.y - 1;
        format!(
            "{}. Each point is a feature, at its loadings on PC{} ({}, horizontal) and PC{} ({}, vertical), with one unit the same length on both axes. Features far from the origin shape these components; features close together load alike.",
            title(plan, view),
            plan.x,
            crate::text::percent_or_undefined(view.share(a)),
            plan.y,
            crate::text::percent_or_undefined(view.share(b)),
        )
    }
}
