//! The figures of a scored batch: the control chart (T² and SPE of each new
//! row in chart order, with the limits at every confidence level of the
//! model) and the new rows on the training score plot.
//!
//! Both use the run's frame, marks, legend and label placement; the outlier
//! map's square-root scale takes over an axis whose largest value is far
//! beyond its limit. Marks are grouped under classes a test can find:
//! `control-t2`, `control-spe` (each a `series` polyline and the row markers,
//! `flagged` above the lowest limit), `t2-limit` and `spe-limit` lines with
//! their `data-confidence`, `training` (muted points or density cells) and
//! `new-rows` on the score plot, `labels`.

use super::frame::{self, Axis, Frame, Layout, Panel, Step, TOP};
use super::outliers::{root, stat_axis, wants_root};
use super::scatter::{self, Legend};
use super::svg::{self, Anchor, HEIGHT, MUTED, Shape};
use super::{LEGEND_X, equal_axes, scatter_layout};
use crate::outputs::batch_view::BatchView;
use crate::text::{count, readable};
use std::fmt::Write;

/// Rows within the limits, and rows above one (Okabe & Ito colours).
const WITHIN: &str = "#0072B2";
const ABOVE: &str = "#D55E00";
/// The training rows, kept quiet behind the new ones.
const TRAINING: &str = "#B8B8B8";
/// Dashes of the limit lines, one per confidence level.
const DASHES: [&str; 4] = ["6 4", "2 3", "10 3 2 3", "1 2"];
/// At most this many new rows are labelled on the score plot.
pub const MAX_BATCH_LABELS: usize = 12;
/// Above this many rows a chart draws markers only for flagged rows.
const MARKED_AT_MOST: usize = 2000;
/// Above this many rows (training and new together) the score plot draws
/// every row in a density and only the labelled rows as points.
const POINTS_AT_MOST: usize = 3000;

/// How far row `i` is beyond the lowest limits (largest ratio of statistic to limit).
fn severity(view: &BatchView, i: usize) -> f64 {
    let (lt, ls) = view.lowest_limits();
    let ratio = |v: f64, l: Option<f64>| l.filter(|l| *l > 0.0).map_or(0.0, |l| v / l);
    ratio(view.t2[i], lt).max(ratio(view.spe[i], ls))
}

/// Flagged rows, most severe first (ties in chart order), at most `max`.
fn most_severe(view: &BatchView, max: usize) -> Vec<usize> {
    let mut rows: Vec<usize> = (0..view.t2.len()).filter(|&i| view.is_flagged(i)).collect();
    rows.sort_by(|&a, &b| {
        severity(view, b)
            .total_cmp(&severity(view, a))
            .then(a.cmp(&b))
    });
    rows.truncate(max);
    rows
}

/// The level label, "95 %".
fn level(confidence: f64) -> String {
    format!("{} %", crate::outputs::tables::level_label(confidence))
}

/// The x title of the control chart.
fn order_words(view: &BatchView) -> String {
    match &view.order {
        Some((column, _)) => format!("new rows ordered by `{column}`"),
        None => "new rows in file order".into(),
    }
}

/// One panel of the control chart: a statistic of every row with its limits.
struct Series<'a> {
    class: &'a str,
    limit_class: &'a str,
    name: &'a str,
    values: &'a [f64],
    limits: Vec<(f64, f64)>,
    rooted: bool,
}

fn series<'a>(view: &'a BatchView, t2: bool) -> Series<'a> {
    let values = if t2 { &view.t2 } else { &view.spe };
    let limits: Vec<(f64, f64)> = view
        .limits
        .iter()
        .filter_map(|l| {
            let v = if t2 { l.t2 } else { l.spe };
            v.filter(|v| v.is_finite()).map(|v| (l.confidence, v))
        })
        .collect();
    let top = values
        .iter()
        .copied()
        .filter(|v| v.is_finite())
        .fold(0.0, f64::max);
    let highest = limits.iter().map(|l| l.1).reduce(f64::max);
    Series {
        class: if t2 { "control-t2" } else { "control-spe" },
        limit_class: if t2 { "t2-limit" } else { "spe-limit" },
        name: if t2 { "Hotelling's T²" } else { "SPE" },
        values,
        rooted: wants_root(top, highest),
        limits,
    }
}

/// The control chart and its caption.
pub fn control_chart(view: &BatchView) -> (String, String) {
    let n = view.t2.len();
    let title = "Control chart: T² and SPE of the new rows";
    let panels = [series(view, true), series(view, false)];
    let layouts = [
        Layout {
            x0: 8,
            y0: TOP,
            x1: 640,
            y1: 280,
            left: 62,
            bottom: 18,
            right: 0,
        },
        Layout {
            x0: 8,
            y0: 296,
            x1: 640,
            y1: HEIGHT as i32 - 8,
            left: 62,
            bottom: 48,
            right: 0,
        },
    ];
    let width = layouts[0].plot_width();
    let step = Step::at_least((n as f64 * 60.0 / width).max(1.0));
    let x = Axis::with_step(0.5, n as f64 + 0.5, step);
    let mut frames = Vec::new();
    let mut built = Vec::new();
    for (s, layout) in panels.iter().zip(layouts) {
        let plotted = |v: f64| if s.rooted { root(v) } else { v };
        let mut extent = frame::Extent::default();
        s.values.iter().for_each(|&v| extent.add(plotted(v)));
        let include: Vec<f64> = s.limits.iter().map(|l| plotted(l.1)).chain([0.0]).collect();
        let (_, hi) = extent.padded(&include, 0.06);
        let y = stat_axis(hi, s.rooted, layout.plot_height(), 40.0);
        let panel = layout.panel(x.clone(), y);
        let y_title = format!("{}{}", s.name, if s.rooted { " (√ scale)" } else { "" });
        let x_title = if s.class == "control-spe" {
            order_words(view)
        } else {
            String::new()
        };
        frames.push(Frame::new(layout, &panel, x_title, y_title));
        built.push(panel);
    }
    let caption = control_caption(view, &panels);
    let back = frame::backdrop(title, &frames);
    let mut body = String::new();
    let flagged: Vec<bool> = (0..n).map(|i| view.is_flagged(i)).collect();
    for (s, panel) in panels.iter().zip(&built) {
        draw_series(&mut body, panel, s, &flagged);
    }
    (frame::finish(back, title, &caption, &body), caption)
}

fn draw_series(out: &mut String, panel: &Panel, s: &Series, flagged: &[bool]) {
    let plotted = |v: f64| if s.rooted { root(v) } else { v };
    let _ = writeln!(out, "<g class=\"{}\">", s.class);
    out.push_str("<g class=\"limits\">\n");
    for (k, (confidence, limit)) in s.limits.iter().enumerate() {
        let y = panel.py(plotted(*limit));
        svg::line(
            out,
            panel.left,
            y,
            panel.right,
            y,
            &format!(
                "class=\"{}\" data-confidence=\"{}\" stroke=\"{MUTED}\" stroke-width=\"1.2\" stroke-dasharray=\"{}\"",
                s.limit_class,
                crate::text::number(*confidence),
                DASHES[k % DASHES.len()]
            ),
        );
        svg::text(
            out,
            panel.right + 4.0,
            y + 3.5,
            Anchor::Start,
            &level(*confidence),
            &format!("font-size=\"10\" fill=\"{MUTED}\""),
        );
    }
    out.push_str("</g>\n");
    let points: Vec<(f64, f64)> = s
        .values
        .iter()
        .enumerate()
        .filter(|(_, v)| v.is_finite())
        .map(|(i, &v)| (panel.px(i as f64 + 1.0), panel.py(plotted(v))))
        .collect();
    svg::polyline(
        out,
        &points,
        &format!(
            "class=\"series\" fill=\"none\" stroke=\"{WITHIN}\" stroke-width=\"1\" stroke-opacity=\"0.55\""
        ),
    );
    let every = s.values.len() <= MARKED_AT_MOST;
    let _ = writeln!(out, "<g class=\"points\" fill=\"{WITHIN}\">");
    for (i, &v) in s.values.iter().enumerate() {
        if !v.is_finite() || !(every || flagged[i]) {
            continue;
        }
        let (x, y) = (panel.px(i as f64 + 1.0), panel.py(plotted(v)));
        if flagged[i] {
            svg::marker(
                out,
                Shape::Diamond,
                x,
                y,
                3.4,
                &format!("class=\"flagged\" fill=\"{ABOVE}\""),
            );
        } else {
            svg::marker(out, Shape::Circle, x, y, 2.4, "");
        }
    }
    out.push_str("</g>\n</g>\n");
}

fn control_caption(view: &BatchView, panels: &[Series; 2]) -> String {
    let n = view.t2.len();
    let mut s = format!(
        "Control chart: Hotelling's T² (top) and the squared prediction error SPE (bottom) of the {}, {} (position 1 is the first).",
        count(n, "scored new row", "scored new rows"),
        match &view.order {
            Some((column, _)) => format!(
                "ordered by the column `{column}` (ties and empty cells in file order, empty cells last)"
            ),
            None => "in file order".to_string(),
        }
    );
    for p in panels {
        if p.limits.is_empty() {
            let _ = write!(s, " No {} limit is defined, so none is drawn.", p.name);
        } else {
            let each: Vec<String> = p
                .limits
                .iter()
                .map(|(c, l)| format!("{} at {}", readable(*l), level(*c)))
                .collect();
            let _ = write!(
                s,
                " Dashed lines: the {} limit {}.",
                p.name,
                each.join(", ")
            );
        }
        if p.rooted {
            let _ = write!(
                s,
                " The {} axis has a square-root scale (ticks in its own units), because some rows lie far beyond the limit.",
                p.name
            );
        }
    }
    let flagged = (0..n).filter(|&i| view.is_flagged(i)).count();
    let _ = write!(
        s,
        " {} above a limit at the lowest level {} drawn as orange diamonds.",
        count(flagged, "row", "rows"),
        if flagged == 1 { "is" } else { "are" }
    );
    if n > MARKED_AT_MOST {
        let _ = write!(
            s,
            " With more than {MARKED_AT_MOST} rows only those rows have markers; the line joins every row."
        );
    }
    s.push_str(" The T² limits are those for new rows (F form), saved with the model.");
    s
}

/// The new rows on the training score plot, and its caption.
pub fn batch_scores(view: &BatchView) -> (String, String) {
    let title = "Scores: the new rows on the training rows, PC1 against PC2";
    let layout = scatter_layout();
    let mut xe = frame::Extent::default();
    let mut ye = frame::Extent::default();
    for s in &view.scores {
        xe.add(s[0]);
        ye.add(s[1]);
    }
    if let Ok(training) = &view.training {
        for p in training {
            xe.add(p[0]);
            ye.add(p[1]);
        }
    }
    let (xa, ya) = equal_axes(&layout, xe.padded(&[0.0], 0.05), ye.padded(&[0.0], 0.05));
    let panel = layout.panel(xa, ya);
    let back = frame::backdrop(
        title,
        &[Frame::new(layout, &panel, "PC1".into(), "PC2".into())],
    );
    let mut body = String::new();
    frame::origin_lines(&mut body, &panel);
    let labelled = most_severe(view, MAX_BATCH_LABELS);
    let training_rows = view.training.as_ref().map_or(0, Vec::len);
    let (layers, marks) = if training_rows + view.scores.len() > POINTS_AT_MOST {
        let drawn = draw_cells(&mut body, &panel, view);
        (
            Layers::Cells(drawn),
            draw_new_points(&mut body, &panel, view, &labelled),
        )
    } else {
        let training = draw_training_points(&mut body, &panel, view);
        let every: Vec<usize> = (0..view.scores.len()).collect();
        (
            Layers::Points { training },
            draw_new_points(&mut body, &panel, view, &every),
        )
    };
    let labels: Vec<(f64, f64, String)> = labelled
        .iter()
        .map(|&i| {
            (
                panel.px(view.scores[i][0]),
                panel.py(view.scores[i][1]),
                view.labels[i].clone(),
            )
        })
        .collect();
    scatter::draw_labels(
        &mut body,
        &labels,
        &marks,
        &[],
        (panel.left, panel.top, panel.right, panel.bottom),
    );
    let mut legend = Legend::new(LEGEND_X, f64::from(TOP), panel.bottom);
    match &layers {
        Layers::Points { training } => {
            legend.heading("rows");
            if *training > 0 {
                legend.marker(TRAINING, Shape::Circle, false, "training");
            }
            legend.marker(WITHIN, Shape::Circle, false, "new, within limits");
            legend.marker(ABOVE, Shape::Diamond, true, "new, above a limit");
        }
        Layers::Cells(drawn) => {
            legend.density(drawn, &CELL_NAMES);
            legend.gap();
            legend.marker(ABOVE, Shape::Diamond, true, "labelled, above a limit");
        }
    }
    body.push_str(&legend.finish());
    let caption = scores_caption(view, &layers, labelled.len());
    (frame::finish(back, title, &caption, &body), caption)
}

/// How the score plot drew its rows: every row as a point, or every row in a
/// density cell of its kind with only the labelled rows as points on top.
enum Layers {
    Points { training: usize },
    Cells(scatter::Drawn),
}

/// The kinds of row in the density, in drawing order.
const CELL_NAMES: [&str; 3] = ["training", "new, within", "new, above"];

/// Counts every training and new row into a cell of its kind (`Grid::cell`,
/// the rule of the run's density) and draws the cells: training rows grey,
/// new rows blue, new rows above a limit as orange inset squares, so no kind
/// hides another and no row is left out.
fn draw_cells(out: &mut String, panel: &Panel, view: &BatchView) -> scatter::Drawn {
    let grid = scatter::Grid::new(panel, None, None);
    let categories = [
        scatter::Category::tinted("training", TRAINING, false),
        scatter::Category::tinted("new-within", WITHIN, false),
        scatter::Category::tinted("new-above", ABOVE, true),
    ];
    let mut counts = scatter::Counts::new(&grid, categories.len());
    let mut count = |p: &[f64], kind: usize| {
        let cell = grid.cell(
            panel.px(p[0]),
            panel.py(p[1]),
            kind,
            scatter::Sides::default(),
        );
        counts.add(cell);
    };
    if let Ok(training) = &view.training {
        training.iter().for_each(|p| count(p, 0));
    }
    for (i, p) in view.scores.iter().enumerate() {
        count(p, if view.is_flagged(i) { 2 } else { 1 });
    }
    scatter::draw_counts(out, &grid, &categories, &counts)
}

/// Draws the training rows as muted points; returns how many were drawn.
fn draw_training_points(out: &mut String, panel: &Panel, view: &BatchView) -> usize {
    let Ok(training) = &view.training else {
        return 0;
    };
    let inside: Vec<(f64, f64)> = training
        .iter()
        .map(|p| (panel.px(p[0]), panel.py(p[1])))
        .filter(|(x, y)| x.is_finite() && y.is_finite())
        .collect();
    let _ = writeln!(
        out,
        "<g class=\"training\" fill=\"{TRAINING}\" fill-opacity=\"0.7\">"
    );
    for (x, y) in &inside {
        svg::marker(out, Shape::Circle, *x, *y, 2.2, "");
    }
    out.push_str("</g>\n");
    inside.len()
}

/// Draws the new rows `rows` as points, flagged ones last (on top) as
/// diamonds; returns the drawn positions (for label placement).
fn draw_new_points(
    out: &mut String,
    panel: &Panel,
    view: &BatchView,
    rows: &[usize],
) -> Vec<(f64, f64)> {
    let mut order = rows.to_vec();
    order.sort_by_key(|&i| view.is_flagged(i));
    let mut marks = Vec::new();
    out.push_str("<g class=\"new-rows\">\n");
    for i in order {
        let (x, y) = (panel.px(view.scores[i][0]), panel.py(view.scores[i][1]));
        if !(x.is_finite() && y.is_finite()) {
            continue;
        }
        marks.push((x, y));
        if view.is_flagged(i) {
            svg::marker(
                out,
                Shape::Diamond,
                x,
                y,
                4.2,
                &format!(
                    "class=\"flagged\" fill=\"{ABOVE}\" stroke=\"#000000\" stroke-width=\"0.8\""
                ),
            );
        } else {
            svg::marker(
                out,
                Shape::Circle,
                x,
                y,
                scatter::MARK,
                &format!("fill=\"{WITHIN}\" stroke=\"#FFFFFF\" stroke-width=\"0.6\""),
            );
        }
    }
    out.push_str("</g>\n");
    marks
}

fn scores_caption(view: &BatchView, layers: &Layers, labelled: usize) -> String {
    let mut s = String::from(
        "Scores of the new rows on the first two components of the model, with one score unit the same length on both axes.",
    );
    let flagged = (0..view.t2.len()).filter(|&i| view.is_flagged(i)).count();
    match (&view.training, layers) {
        (Err(why), _) => {
            let _ = write!(
                s,
                " Only the new rows are drawn: the training scores are not shown ({why})."
            );
        }
        (Ok(_), Layers::Points { training }) => {
            let _ = write!(
                s,
                " The {} are the grey points.",
                count(*training, "training row", "training rows")
            );
        }
        (Ok(_), Layers::Cells(_)) => {}
    }
    if let Layers::Cells(drawn) = layers {
        let [training, within, above] =
            [0, 1, 2].map(|k| drawn.counts.get(k).copied().unwrap_or(0));
        let _ = write!(
            s,
            " Too many rows to draw one by one, so every row is counted in a square cell of its kind, darker where more rows fall: {}{} within the limits in blue, {} above a T² or SPE limit at the lowest level as smaller orange squares; only the labelled rows are also drawn as orange diamonds.",
            if view.training.is_ok() {
                format!(
                    "{} in grey, ",
                    count(training, "training row", "training rows")
                )
            } else {
                String::new()
            },
            count(within, "new row", "new rows"),
            count(above, "new row", "new rows"),
        );
        return labelled_words(s, flagged, labelled);
    }
    let _ = write!(
        s,
        " New rows within the limits are blue circles; {} above a T² or SPE limit at the lowest level {}.",
        count(flagged, "row", "rows"),
        if flagged == 1 {
            "is an orange diamond"
        } else {
            "are orange diamonds"
        }
    );
    labelled_words(s, flagged, labelled)
}

/// The caption's closing words on the labelled rows.
fn labelled_words(mut s: String, flagged: usize, labelled: usize) -> String {
    if labelled > 0 {
        let _ = write!(
            s,
            " The {} most severe flagged {} labelled",
            labelled,
            if labelled == 1 { "row is" } else { "rows are" }
        );
        if flagged > labelled {
            let _ = write!(
                s,
                " ({} more are not labelled; the table below lists the most severe)",
                flagged - labelled
            );
        }
        s.push('.');
    }
    s
}
