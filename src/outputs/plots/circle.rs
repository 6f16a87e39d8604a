//! The correlation circle: each feature's correlation with two components, as
//! an arrow inside the unit circle.

use super::frame::{self, Axis, Frame, LABEL_SIZE, Layout, Panel, Step, TOP};
use super::scatter::{Box2, Placement, Placements, Spot, place_apart, write_labels};
use super::svg::{self, Anchor, MUTED, N};
use super::title;
use crate::outputs::view::PlotView;
use crate::recipe::plots::PlotPlan;
use crate::text::significant_plain;
use std::fmt::Write;

/// Arrow colour.
const ARROW: &str = "#0072B2";

/// A tip that can be drawn: non-finite ones at the origin.
fn finite(&(x, y): &(f64, f64)) -> (f64, f64) {
    if x.is_finite() && y.is_finite() {
        (x, y)
    } else {
        (0.0, 0.0)
    }
}

/// Places the feature names beyond the arrows' tips, longest arrow first
/// (ties by feature order), each clear of the names already placed and inside
/// `bounds`; a name with no free spot is left out (see `place_apart`).
pub fn arrow_labels(
    panel: &Panel,
    tips: &[(f64, f64)],
    names: &[String],
    bounds: (f64, f64, f64, f64),
) -> Placements {
    let (ox, oy) = (panel.px(0.0), panel.py(0.0));
    let mut items: Vec<(f64, Placement)> = Vec::new();
    let mut obstacles = Vec::new();
    for (j, tip) in tips.iter().enumerate() {
        let (x, y) = finite(tip);
        let (tx, ty) = (panel.px(x), panel.py(y));
        obstacles.push(Box2::around(tx, ty, 2.0));
        let (dx, dy) = (tx - ox, ty - oy);
        let len = (dx * dx + dy * dy).sqrt();
        let (ux, uy) = if len > 1e-9 {
            (dx / len, dy / len)
        } else {
            (1.0, 0.0)
        };
        let anchor = if ux > 0.35 {
            Anchor::Start
        } else if ux < -0.35 {
            Anchor::End
        } else {
            Anchor::Middle
        };
        let mut spots = Vec::new();
        for along in [5.0, 14.0, 26.0] {
            let lx = tx + ux * along;
            let ly = ty + uy * along + 0.35 * LABEL_SIZE + uy * 0.45 * LABEL_SIZE;
            for shift in [0.0, -1.0, 1.0, -2.0, 2.0, -3.0, 3.0] {
                spots.push(Spot {
                    x: lx,
                    y: ly + shift * LABEL_SIZE,
                    anchor,
                });
            }
        }
        items.push((
            len,
            Placement {
                text: names.get(j).cloned().unwrap_or_default(),
                spots,
            },
        ));
    }
    // Longest first (ties by feature order: the sort is stable).
    items.sort_by(|a, b| b.0.total_cmp(&a.0));
    let items: Vec<Placement> = items.into_iter().map(|(_, p)| p).collect();
    place_apart(&items, &obstacles, &[], bounds)
}

/// Draws arrows from the origin to each tip, then the placed feature names
/// (`arrows` and `arrow-labels` groups, one path per feature and one text per
/// placed name).
pub fn draw_arrows(
    out: &mut String,
    panel: &Panel,
    tips: &[(f64, f64)],
    colour: &str,
    casing: bool,
    labels: &Placements,
) {
    let (ox, oy) = (panel.px(0.0), panel.py(0.0));
    let mut paths = String::new();
    for tip in tips {
        let (x, y) = finite(tip);
        svg::arrow(&mut paths, ox, oy, panel.px(x), panel.py(y), 7.0, "");
    }
    if casing {
        // A white casing under the arrows keeps them visible over points and
        // density cells.
        let _ = writeln!(
            out,
            "<g class=\"arrow-casing\" fill=\"none\" stroke=\"#FFFFFF\" stroke-width=\"3.4\" stroke-linecap=\"round\" stroke-linejoin=\"round\">"
        );
        out.push_str(&paths);
        out.push_str("</g>\n");
    }
    let _ = writeln!(
        out,
        "<g class=\"arrows\" fill=\"none\" stroke=\"{colour}\" stroke-width=\"1.2\" stroke-linecap=\"round\">"
    );
    out.push_str(&paths);
    out.push_str("</g>\n");
    write_labels(out, "arrow-labels", colour, labels);
}

/// Names left out of a figure for want of room, as a caption sentence.
pub fn left_out_sentence(left_out: &[String]) -> String {
    if left_out.is_empty() {
        return String::new();
    }
    format!(
        " Feature names left out where they would overlap another: {}.",
        left_out.join(", ")
    )
}

/// The circle's plotting area, its arrows' tips and where their names go.
struct Figure {
    layout: Layout,
    panel: Panel,
    tips: Vec<(f64, f64)>,
    labels: Placements,
}

fn figure(plan: &PlotPlan, view: &PlotView) -> Figure {
    let (a, b) = (plan.x - 1, plan.y - 1);
    // A square plotting area, centred.
    let side = 440;
    let left = 62;
    let x0 = (svg::WIDTH as i32 - side) / 2 - left;
    let layout = Layout {
        x0,
        y0: TOP,
        x1: x0 + left + side + 1,
        y1: TOP + side + 1 + 48,
        left,
        bottom: 48,
        right: 0,
    };
    let step = Step {
        mantissa: 5,
        exponent: -1,
    };
    let xa = Axis::with_step(-1.1, 1.1, step);
    let ya = Axis::with_step(-1.1, 1.1, step);
    let panel = layout.panel(xa, ya);
    let tips: Vec<(f64, f64)> = view
        .correlations
        .iter()
        .take(view.features.len())
        .map(|r| (r[a], r[b]))
        .collect();
    let canvas = (
        4.0,
        f64::from(TOP),
        f64::from(svg::WIDTH) - 4.0,
        f64::from(svg::HEIGHT) - 4.0,
    );
    let labels = arrow_labels(&panel, &tips, &view.features, canvas);
    Figure {
        layout,
        panel,
        tips,
        labels,
    }
}

pub fn render(plan: &PlotPlan, view: &PlotView) -> String {
    let (a, b) = (plan.x - 1, plan.y - 1);
    let fig = figure(plan, view);
    let (layout, panel) = (fig.layout, &fig.panel);
    let t = title(plan, view);
    let mut fr = Frame::new(
        layout,
        panel,
        format!("correlation with {}", super::axis_title(view, a)),
        format!("correlation with {}", super::axis_title(view, b)),
    );
    fr.x_grid = false;
    fr.y_grid = false;
    let back = frame::backdrop(&t, &[fr]);

    let mut body = String::new();
    let (ox, oy) = (panel.px(0.0), panel.py(0.0));
    let r1 = panel.x_scale();
    body.push_str("<g class=\"circles\" fill=\"none\">\n");
    svg::line(
        &mut body,
        panel.px(-1.0),
        oy,
        panel.px(1.0),
        oy,
        &format!("stroke=\"{MUTED}\" stroke-width=\"0.8\""),
    );
    svg::line(
        &mut body,
        ox,
        panel.py(-1.0),
        ox,
        panel.py(1.0),
        &format!("stroke=\"{MUTED}\" stroke-width=\"0.8\""),
    );
    let _ = writeln!(
        body,
        "<circle class=\"unit-circle\" cx=\"{}\" cy=\"{}\" r=\"{}\" stroke=\"{MUTED}\" stroke-width=\"1.2\"/>",
        N(ox),
        N(oy),
        N(r1)
    );
    let _ = writeln!(
        body,
        "<circle class=\"half-circle\" cx=\"{}\" cy=\"{}\" r=\"{}\" stroke=\"{MUTED}\" stroke-width=\"0.8\" stroke-dasharray=\"4 4\"/>",
        N(ox),
        N(oy),
        N(r1 * std::f64::consts::FRAC_1_SQRT_2)
    );
    body.push_str("</g>\n");
    draw_arrows(&mut body, panel, &fig.tips, ARROW, false, &fig.labels);
    frame::finish(back, &t, &caption(plan, view), &body)
}

pub fn caption(plan: &PlotPlan, view: &PlotView) -> String {
    let (a, b) = (plan.x - 1, plan.y - 1);
    let longest = view
        .correlations
        .iter()
        .zip(&view.features)
        .map(|(r, f)| ((r[a] * r[a] + r[b] * r[b]).sqrt(), f))
        .filter(|(v, _)| v.is_finite())
        .max_by(|x, y| x.0.total_cmp(&y.0));
    let mut s = format!(
        "{}. Each arrow ends at the Pearson correlation of a scaled feature with the scores of PC{} ({}, horizontal) and PC{} ({}, vertical); both axes run from −1 to 1 at the same scale. The solid circle has radius 1: an arrow reaching it is explained entirely by the two components. The dashed circle has radius √½: beyond it, the two components explain more than half of the feature's variance. Arrows pointing the same way belong to correlated features.",
        title(plan, view),
        plan.x,
        crate::text::percent_or_undefined(view.share(a)),
        plan.y,
        crate::text::percent_or_undefined(view.share(b)),
    );
    if let Some((len, name)) = longest {
        let _ = write!(
            s,
            " The longest arrow is {} (length {}).",
            name,
            significant_plain(len, 2)
        );
    }
    s.push_str(&left_out_sentence(&figure(plan, view).labels.left_out));
    s
}
