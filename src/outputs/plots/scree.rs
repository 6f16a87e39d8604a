//! The scree plot: eigenvalues as bars, the cumulative share as a line on its
//! own axis, the kept number of components marked, and beside them the evidence
//! of the rules (broken-stick expectation, parallel-analysis thresholds,
//! Kaiser's mean eigenvalue, the variance target, and PRESS in a lower panel).

use super::frame::{self, Axis, Frame, LABEL_SIZE, Layout, Panel, Step, TOP};
use super::scatter::{HALO, Legend, MARK};
use super::svg::{self, Anchor, HEIGHT, INK, MUTED, N, Shape, blend};
use super::title;
use crate::outputs::view::PlotView;
use crate::recipe::plots::PlotPlan;
use crate::text::significant_plain;
use std::fmt::Write;

const BAR: &str = "#0072B2";
const CUMULATIVE: &str = "#D55E00";
const BROKEN_STICK: &str = "#009E73";
const PARALLEL: &str = "#CC79A7";
const RULE: &str = "#E69F00";
/// The legend column's left edge.
const LEGEND_X: f64 = 556.0;

/// Ticks at whole components, thinned when there are many.
fn component_axis(lo: f64, hi: f64, first: usize, last: usize) -> Axis {
    let count = last.saturating_sub(first) + 1;
    let every = if count <= 20 {
        1
    } else {
        Step::at_least(count as f64 / 15.0).value().max(1.0) as usize
    };
    let ticks = (first..=last)
        .filter(|c| c % every == 0 || every == 1)
        .map(|c| (c as f64, c.to_string()))
        .collect();
    Axis::fixed(lo, hi, ticks)
}

fn bar_fill(view: &PlotView, a: usize) -> String {
    if a < view.kept {
        BAR.to_string()
    } else {
        blend("#FFFFFF", BAR, 0.32)
    }
}

pub fn render(plan: &PlotPlan, view: &PlotView) -> String {
    let m = view.eigenvalues.len();
    let total = view.total_variance;
    let ev = &view.evidence;
    let press = ev.press.as_ref().filter(|p| !p.is_empty());
    let bottom_main = if press.is_some() {
        352
    } else {
        HEIGHT as i32 - 8
    };
    let main = Layout {
        x0: 8,
        y0: TOP,
        x1: LEGEND_X as i32 - 8,
        y1: bottom_main,
        left: 62,
        bottom: 42,
        right: 58,
    };
    let x_lo = if press.is_some() { -0.5 } else { 0.5 };
    let x_hi = m as f64 + 0.5;
    let xa = component_axis(x_lo, x_hi, 1, m);

    // Everything drawn on the eigenvalue scale decides its range.
    let sticks: Vec<f64> = ev.broken_stick.iter().take(m).map(|b| b * total).collect();
    let parallel: Vec<f64> = ev
        .parallel_thresholds
        .as_ref()
        .map(|t| t.iter().take(m).copied().collect())
        .unwrap_or_default();
    let kaiser = view.rule == "kaiser";
    let mut top = view
        .eigenvalues
        .iter()
        .chain(&sticks)
        .chain(&parallel)
        .filter(|v| v.is_finite())
        .fold(0.0f64, |a, v| a.max(*v));
    if kaiser && ev.mean_eigenvalue.is_finite() {
        top = top.max(ev.mean_eigenvalue);
    }
    let ya = Axis::nice(0.0, top.max(1e-12) * 1.08, main.plot_height() / 55.0);
    let share_axis = Axis::with_step(
        0.0,
        105.0,
        Step {
            mantissa: 2,
            exponent: 1,
        },
    );
    let panel = main.panel(xa.clone(), ya);
    let right = main.panel(xa.clone(), share_axis.clone());
    let mut frames = vec![Frame {
        layout: main,
        x: panel.x.clone(),
        y: panel.y.clone(),
        x_title: "component".into(),
        y_title: "eigenvalue".into(),
        right_axis: Some((share_axis, "cumulative share (%)".into())),
        x_grid: false,
        y_grid: true,
    }];

    let mut press_panel = None;
    if let Some(press) = press {
        // The same plotting box as the main panel's, without a right axis
        // (plotters would repeat the left one there).
        let layout = Layout {
            x0: 8,
            y0: 372,
            x1: LEGEND_X as i32 - 8 - 58,
            y1: HEIGHT as i32 - 8,
            left: 62,
            bottom: 42,
            right: 0,
        };
        let last = press.len() - 1;
        let px = component_axis(x_lo.min(-0.5), x_hi.max(last as f64 + 0.5), 0, last);
        let hi = press
            .iter()
            .filter(|v| v.is_finite())
            .fold(0.0f64, |a, v| a.max(*v));
        let py = Axis::nice(0.0, hi.max(1e-12) * 1.1, layout.plot_height() / 40.0);
        let pp = layout.panel(px, py);
        frames.push(Frame {
            layout,
            x: pp.x.clone(),
            y: pp.y.clone(),
            x_title: "components kept (k)".into(),
            y_title: "PRESS".into(),
            right_axis: None,
            x_grid: false,
            y_grid: true,
        });
        press_panel = Some(pp);
    }
    let t = title(plan, view);
    let back = frame::backdrop(&t, &frames);

    let mut body = String::new();
    // Bars.
    let half = 0.36;
    body.push_str("<g class=\"bars\">\n");
    for (a, &v) in view.eigenvalues.iter().enumerate() {
        let v = if v.is_finite() { v.max(0.0) } else { 0.0 };
        let x = (a + 1) as f64;
        let class = if a < view.kept { "bar kept" } else { "bar" };
        svg::rect(
            &mut body,
            panel.px(x - half),
            panel.py(0.0),
            panel.px(x + half),
            panel.py(v),
            &format!("class=\"{class}\" fill=\"{}\"", bar_fill(view, a)),
        );
    }
    body.push_str("</g>\n");

    // The kept number: a rule after bar k.
    if view.kept > 0 && view.kept <= m {
        let x = panel.px(view.kept as f64 + 0.5);
        body.push_str("<g class=\"kept-rule\">\n");
        svg::line(
            &mut body,
            x,
            panel.top,
            x,
            panel.bottom,
            &format!("stroke=\"{INK}\" stroke-width=\"1.2\" stroke-dasharray=\"2 3\""),
        );
        svg::text(
            &mut body,
            x + 4.0,
            panel.top + 12.0,
            Anchor::Start,
            &format!("k = {} kept", view.kept),
            &format!("font-size=\"{}\" fill=\"{INK}\"", N(LABEL_SIZE)),
        );
        body.push_str("</g>\n");
    }

    // Rules drawn as horizontal lines.
    body.push_str("<g class=\"rules\">\n");
    let small = format!("font-size=\"{}\" fill=\"{MUTED}\" {HALO}", N(LABEL_SIZE));
    if kaiser && ev.mean_eigenvalue.is_finite() {
        let y = panel.py(ev.mean_eigenvalue);
        svg::line(
            &mut body,
            panel.left,
            y,
            panel.right,
            y,
            &format!(
                "class=\"kaiser\" stroke=\"{RULE}\" stroke-width=\"1.4\" stroke-dasharray=\"6 3\""
            ),
        );
        svg::text(
            &mut body,
            panel.right - 4.0,
            y - 4.0,
            Anchor::End,
            &format!(
                "mean eigenvalue {}",
                significant_plain(ev.mean_eigenvalue, 3)
            ),
            &small,
        );
    }
    if let Some(target) = ev.variance_target.filter(|t| t.is_finite()) {
        let y = right.py(100.0 * target);
        svg::line(
            &mut body,
            panel.left,
            y,
            panel.right,
            y,
            &format!(
                "class=\"variance-target\" stroke=\"{RULE}\" stroke-width=\"1.4\" stroke-dasharray=\"6 3\""
            ),
        );
        svg::text(
            &mut body,
            panel.right - 4.0,
            y - 4.0,
            Anchor::End,
            &format!("target {}", crate::text::percent_or_undefined(target)),
            &small,
        );
    }
    body.push_str("</g>\n");

    // Evidence series on the eigenvalue scale.
    series(
        &mut body,
        "broken-stick",
        &panel,
        &sticks,
        1,
        BROKEN_STICK,
        Shape::Diamond,
        Some("4 3"),
    );
    if !parallel.is_empty() {
        series(
            &mut body,
            "parallel",
            &panel,
            &parallel,
            1,
            PARALLEL,
            Shape::TriangleUp,
            Some("4 3"),
        );
    }
    // The cumulative share on the share axis.
    let mut running = 0.0;
    let cumulative: Vec<f64> = view
        .eigenvalues
        .iter()
        .map(|v| {
            running += v;
            100.0 * running / total
        })
        .collect();
    series(
        &mut body,
        "cumulative",
        &right,
        &cumulative,
        1,
        CUMULATIVE,
        Shape::Circle,
        None,
    );

    // PRESS panel.
    if let (Some(pp), Some(press)) = (&press_panel, press) {
        series(&mut body, "press", pp, press, 0, INK, Shape::Circle, None);
        if let Some(v) = press.get(view.kept).filter(|v| v.is_finite()) {
            let _ = writeln!(
                body,
                "<circle class=\"press-choice\" cx=\"{}\" cy=\"{}\" r=\"{}\" fill=\"none\" stroke=\"{CUMULATIVE}\" stroke-width=\"1.6\"/>",
                N(pp.px(view.kept as f64)),
                N(pp.py(*v)),
                N(MARK * 2.0)
            );
        }
    }

    // Legend.
    let mut legend = Legend::new(LEGEND_X, f64::from(TOP), f64::from(HEIGHT) - 8.0);
    legend.heading("components");
    legend.swatch(BAR, "eigenvalue, kept");
    legend.swatch(&blend("#FFFFFF", BAR, 0.32), "eigenvalue, not kept");
    legend_series(
        &mut legend,
        CUMULATIVE,
        None,
        Shape::Circle,
        "cumulative share",
    );
    legend.gap();
    legend.heading("evidence for k");
    legend_series(
        &mut legend,
        BROKEN_STICK,
        Some("4 3"),
        Shape::Diamond,
        "broken-stick",
    );
    if !parallel.is_empty() {
        legend_series(
            &mut legend,
            PARALLEL,
            Some("4 3"),
            Shape::TriangleUp,
            "parallel analysis",
        );
    }
    if kaiser {
        legend.rule(RULE, Some("6 3"), 1.4, "mean eigenvalue");
    }
    if ev.variance_target.is_some() {
        legend.rule(RULE, Some("6 3"), 1.4, "variance target");
    }
    if press_panel.is_some() {
        legend_series(&mut legend, INK, None, Shape::Circle, "PRESS (below)");
    }
    legend.note(&format!("rule: {}", view.rule));
    body.push_str(&legend.finish());
    frame::finish(back, &t, &caption(plan, view), &body)
}

/// A line through values at components `first`, `first + 1`, … with a marker
/// at each, in a group of the given class (one marker per value).
#[allow(clippy::too_many_arguments)]
fn series(
    out: &mut String,
    class: &str,
    panel: &Panel,
    values: &[f64],
    first: usize,
    colour: &str,
    shape: Shape,
    dash: Option<&str>,
) {
    let pts: Vec<(f64, f64)> = values
        .iter()
        .enumerate()
        .filter(|(_, v)| v.is_finite())
        .map(|(i, v)| (panel.px((first + i) as f64), panel.py(*v)))
        .collect();
    let _ = writeln!(out, "<g class=\"{class}\">");
    let dash = dash.map_or(String::new(), |d| format!(" stroke-dasharray=\"{d}\""));
    svg::polyline(
        out,
        &pts,
        &format!("fill=\"none\" stroke=\"{colour}\" stroke-width=\"1.5\"{dash}"),
    );
    let _ = writeln!(
        out,
        "<g class=\"markers\" fill=\"{colour}\" stroke=\"#FFFFFF\" stroke-width=\"0.8\">"
    );
    for (x, y) in pts {
        svg::marker(out, shape, x, y, MARK, "");
    }
    out.push_str("</g>\n</g>\n");
}

fn legend_series(legend: &mut Legend, colour: &str, dash: Option<&str>, shape: Shape, label: &str) {
    let y = legend.y;
    legend.rule(colour, dash, 1.5, label);
    svg::marker(
        &mut legend.body,
        shape,
        legend.x + 7.0,
        y + 7.0,
        MARK,
        &format!("fill=\"{colour}\" stroke=\"#FFFFFF\" stroke-width=\"0.8\""),
    );
}

pub fn caption(plan: &PlotPlan, view: &PlotView) -> String {
    let ev = &view.evidence;
    let m = view.eigenvalues.len();
    let cumulative: f64 =
        view.eigenvalues.iter().take(view.kept).sum::<f64>() / view.total_variance;
    let mut s = format!(
        "{}. Bars are the eigenvalues of the {m} computed components (left axis); the vermilion line is the cumulative share of the total variance (right axis). The first {} components are kept (dark bars, dotted rule after bar {}), together explaining {} of the variance; the {} rule chose them: {}.",
        title(plan, view),
        view.kept,
        view.kept,
        crate::text::percent_or_undefined(cumulative),
        view.rule,
        view.rule_reason,
    );
    s.push_str(
        " Green diamonds are the broken-stick expectation, the eigenvalue each component would have if the variance were split at random (its expected share times the total variance); a component explains more than chance where its bar rises above the diamond.",
    );
    if ev.parallel_thresholds.is_some() {
        s.push_str(
            " Pink triangles are the parallel-analysis thresholds (Horn 1965): the eigenvalue a component reaches in random tables of the same size; bars above them stand out from noise.",
        );
    }
    if view.rule == "kaiser" {
        let _ = write!(
            s,
            " The orange dashed line is Kaiser's threshold, the mean eigenvalue {}.",
            significant_plain(ev.mean_eigenvalue, 3)
        );
    }
    if let Some(t) = ev.variance_target {
        let _ = write!(
            s,
            " The orange dashed line on the share axis is the variance target of {}.",
            crate::text::percent_or_undefined(t)
        );
    }
    if let Some(press) = ev.press.as_ref().filter(|p| !p.is_empty()) {
        let _ = write!(
            s,
            " The lower panel shows the cross-validation error PRESS for 0 to {} components; the ringed point is the chosen k.",
            press.len() - 1
        );
    }
    s
}
