//! What the scatter plots (scores, biplot, outlier map) share: groups with their
//! colours and shapes, the choice of which rows are drawn one by one and which
//! are binned into a density, point labels, and the legend column.

use super::frame::{LABEL_SIZE, Panel};
use super::svg::{
    self, Anchor, INK, MUTED, N, NEUTRAL, OKABE_ITO, SHAPES, Shape, blend, esc, text, text_width,
};
use super::view_rows;
use crate::outputs::view::PlotView;
use crate::recipe::raw::PointLabels;
use std::cmp::Ordering;
use std::collections::BTreeMap;
use std::fmt::Write;

/// At most this many rows are drawn one by one in density mode (the most
/// extreme flagged rows first); the others join the density.
pub const MAX_INDIVIDUAL: usize = 2_000;
/// With `labels = "flagged"`, at most this many rows get their id written (the
/// most extreme first), so labels stay readable.
pub const MAX_FLAGGED_LABELS: usize = 40;
/// Side of a density cell in pixels.
pub const CELL: f64 = 8.0;
/// Marker "radius" in pixels.
pub const MARK: f64 = 3.6;

/// The groups of a colour column, in natural order of their names, or one
/// anonymous group when there is no colour.
pub struct Groups {
    /// The column's name, `None` when points are not coloured.
    pub column: Option<String>,
    pub names: Vec<String>,
    pub counts: Vec<usize>,
    /// Group index of each row.
    pub of_row: Vec<u32>,
    /// Index of the group of rows with an empty value, if any (drawn grey).
    pub missing: Option<usize>,
}

/// Name shown for rows whose group cell is empty.
pub const MISSING_GROUP: &str = "(empty)";

impl Groups {
    pub fn new(view: &PlotView, color: Option<&str>) -> Groups {
        let n = view_rows(view);
        let column = color.and_then(|c| view.groups.iter().find(|(name, _)| name == c));
        let Some((name, values)) = column else {
            return Groups {
                column: None,
                names: vec!["all rows".into()],
                counts: vec![n],
                of_row: vec![0; n],
                missing: None,
            };
        };
        let mut seen: BTreeMap<&str, usize> = BTreeMap::new();
        for v in values.iter().take(n) {
            *seen.entry(v).or_insert(0) += 1;
        }
        let mut names: Vec<&str> = seen.keys().copied().filter(|s| !s.is_empty()).collect();
        names.sort_by(|a, b| natural_cmp(a, b));
        let has_missing = seen.contains_key("") || values.len() < n;
        let mut index: BTreeMap<&str, u32> = BTreeMap::new();
        for (i, s) in names.iter().enumerate() {
            index.insert(s, i as u32);
        }
        let missing_index = names.len() as u32;
        let of_row: Vec<u32> = (0..n)
            .map(|i| {
                values
                    .get(i)
                    .and_then(|v| index.get(v).copied())
                    .unwrap_or(missing_index)
            })
            .collect();
        let mut out_names: Vec<String> = names.iter().map(|s| s.to_string()).collect();
        let missing = if has_missing {
            out_names.push(MISSING_GROUP.into());
            Some(out_names.len() - 1)
        } else {
            None
        };
        let mut counts = vec![0; out_names.len()];
        for &g in &of_row {
            counts[g as usize] += 1;
        }
        Groups {
            column: Some(name.clone()),
            names: out_names,
            counts,
            of_row,
            missing,
        }
    }

    /// Colour and shape of group `g`: Okabe & Ito colours in turn, shapes in
    /// turn, so beyond eight groups the shape still tells them apart (56
    /// distinct pairs before any repeats).
    pub fn style(&self, g: usize) -> (&'static str, Shape) {
        if self.column.is_none() || Some(g) == self.missing {
            (NEUTRAL, Shape::Circle)
        } else {
            (OKABE_ITO[g % OKABE_ITO.len()], SHAPES[g % SHAPES.len()])
        }
    }
}

/// Orders names with digit runs compared by value ("batch 2" before "batch 10"),
/// then by bytes, so the order is total and never depends on the rows.
pub fn natural_cmp(a: &str, b: &str) -> Ordering {
    let (mut x, mut y) = (a.as_bytes(), b.as_bytes());
    loop {
        match (x.first(), y.first()) {
            (None, None) => return a.cmp(b),
            (None, Some(_)) => return Ordering::Less,
            (Some(_), None) => return Ordering::Greater,
            (Some(c), Some(d)) if c.is_ascii_digit() && d.is_ascii_digit() => {
                let lx = x.iter().take_while(|c| c.is_ascii_digit()).count();
                let ly = y.iter().take_while(|c| c.is_ascii_digit()).count();
                let (dx, dy) = (&x[..lx], &y[..ly]);
                let tx = &dx[dx.iter().take_while(|&&c| c == b'0').count()..];
                let ty = &dy[dy.iter().take_while(|&&c| c == b'0').count()..];
                let o = tx.len().cmp(&ty.len()).then_with(|| tx.cmp(ty));
                if o != Ordering::Equal {
                    return o;
                }
                x = &x[lx..];
                y = &y[ly..];
            }
            (Some(c), Some(d)) => {
                if c != d {
                    return c.cmp(d);
                }
                x = &x[1..];
                y = &y[1..];
            }
        }
    }
}

/// How far beyond its limits a row is: the larger of T²/limit and SPE/limit
/// (the raw T² when neither limit is defined). Used to pick the most extreme
/// flagged rows when not all can be drawn or labelled.
pub fn severity(view: &PlotView, i: usize) -> f64 {
    let t2 = view.t2.get(i).copied().unwrap_or(0.0);
    let spe = view.spe.get(i).copied().unwrap_or(0.0);
    let a = view.t2_limit.filter(|l| *l > 0.0).map(|l| t2 / l);
    let b = view.spe_limit.filter(|l| *l > 0.0).map(|l| spe / l);
    let s = match (a, b) {
        (Some(a), Some(b)) => a.max(b),
        (Some(a), None) => a,
        (None, Some(b)) => b,
        (None, None) => t2,
    };
    if s.is_finite() { s } else { f64::MAX }
}

/// Which rows are drawn one by one, which are binned, which are labelled.
pub struct Selection {
    /// Rows with finite coordinates.
    pub n_finite: usize,
    /// Rows left out for a non-finite coordinate.
    pub n_nonfinite: usize,
    /// Whether the plot shows a density instead of every point.
    pub density: bool,
    /// Rows drawn individually, in drawing order (unflagged first).
    pub drawn: Vec<usize>,
    /// Per row: drawn individually.
    pub is_drawn: Vec<bool>,
    /// Rows flagged in all, and flagged rows drawn individually.
    pub flagged_total: usize,
    pub flagged_drawn: usize,
    /// Rows whose label is written.
    pub labelled: Vec<usize>,
    /// Flagged rows that would be labelled but are not, for the cap.
    pub labels_capped: usize,
}

/// Chooses what to draw. `xs`/`ys` are the data coordinates of every row.
pub fn select(
    view: &PlotView,
    xs: &[f64],
    ys: &[f64],
    groups: &Groups,
    labels: PointLabels,
    density_above: usize,
) -> Selection {
    let n = xs.len().min(ys.len());
    let finite: Vec<bool> = (0..n)
        .map(|i| xs[i].is_finite() && ys[i].is_finite())
        .collect();
    let n_finite = finite.iter().filter(|&&f| f).count();
    let flagged = |i: usize| view.flagged.get(i).copied().unwrap_or(false);
    let flagged_rows: Vec<usize> = (0..n).filter(|&i| finite[i] && flagged(i)).collect();
    let by_severity = |rows: &mut Vec<usize>| {
        let sev: Vec<f64> = rows.iter().map(|&i| severity(view, i)).collect();
        let mut order: Vec<usize> = (0..rows.len()).collect();
        order.sort_by(|&a, &b| sev[b].total_cmp(&sev[a]).then(rows[a].cmp(&rows[b])));
        *rows = order.into_iter().map(|o| rows[o]).collect();
    };
    let density = n_finite > density_above;
    let mut is_drawn = vec![false; n];
    if density {
        let mut chosen = flagged_rows.clone();
        if chosen.len() > MAX_INDIVIDUAL {
            by_severity(&mut chosen);
            chosen.truncate(MAX_INDIVIDUAL);
        }
        for i in chosen {
            is_drawn[i] = true;
        }
    } else {
        is_drawn.copy_from_slice(&finite);
    }
    // Drawing order: unflagged, then flagged on top; by group, then row.
    let mut drawn: Vec<usize> = (0..n).filter(|&i| is_drawn[i]).collect();
    drawn.sort_by_key(|&i| (flagged(i), groups.of_row.get(i).copied().unwrap_or(0), i));
    let flagged_drawn = drawn.iter().filter(|&&i| flagged(i)).count();
    let (labelled, labels_capped) = match labels {
        PointLabels::None => (Vec::new(), 0),
        PointLabels::All => (drawn.clone(), 0),
        PointLabels::Flagged => {
            let mut rows: Vec<usize> = drawn.iter().copied().filter(|&i| flagged(i)).collect();
            let capped = rows.len().saturating_sub(MAX_FLAGGED_LABELS);
            if capped > 0 {
                by_severity(&mut rows);
                rows.truncate(MAX_FLAGGED_LABELS);
                rows.sort_unstable();
            }
            (rows, capped)
        }
    };
    Selection {
        n_finite,
        n_nonfinite: n - n_finite,
        density,
        drawn,
        is_drawn,
        flagged_total: flagged_rows.len(),
        flagged_drawn,
        labelled,
        labels_capped,
    }
}

impl Selection {
    /// Plain words about what the points are, for a caption.
    pub fn describe(&self, what: &str, density_above: usize, labels: PointLabels) -> String {
        let mut s = String::new();
        if self.density {
            let binned = self.n_finite - self.drawn.len();
            let _ = write!(
                s,
                "With {} {what} (more than {}), the plot shows how many fall in each {}-pixel square (shade, counts in the legend) instead of every point; ",
                self.n_finite,
                density_above,
                N(CELL)
            );
            if self.flagged_drawn == self.flagged_total {
                let _ = write!(
                    s,
                    "the {} flagged rows are drawn one by one on top and {} rows are binned.",
                    self.flagged_total, binned
                );
            } else {
                let _ = write!(
                    s,
                    "the {} most extreme of the {} flagged rows are drawn one by one on top and the other {} rows are binned.",
                    self.flagged_drawn, self.flagged_total, binned
                );
            }
        } else {
            let _ = write!(s, "Each of the {} {what} is a point.", self.n_finite);
        }
        if self.flagged_total > 0 {
            s.push_str(" Rows above the T² or SPE limit have a dark outline.");
        }
        match labels {
            PointLabels::None => {}
            PointLabels::All => {
                let _ = write!(
                    s,
                    " {} points are labelled with their id.",
                    self.labelled.len()
                );
            }
            PointLabels::Flagged if self.labelled.is_empty() => {}
            PointLabels::Flagged if self.labels_capped > 0 => {
                let _ = write!(
                    s,
                    " The {} most extreme flagged rows are labelled with their id ({} more are not, to keep the labels readable).",
                    self.labelled.len(),
                    self.labels_capped
                );
            }
            PointLabels::Flagged => {
                let _ = write!(
                    s,
                    " Flagged rows are labelled with their id ({}).",
                    self.labelled.len()
                );
            }
        }
        if self.n_nonfinite > 0 {
            let _ = write!(
                s,
                " {} rows with a value that is not a finite number are left out.",
                self.n_nonfinite
            );
        }
        s
    }
}

/// Shades of the density cells, light to dark.
const DENSITY_LIGHT: &str = "#E3E8EE";
const DENSITY_DARK: &str = "#34495E";

/// Count classes of the density: lower bounds 1, 2, 5, 10, 20, … up to the
/// largest count; when that gives more than eight classes, 1, 3, 10, 30, …;
/// and when that still does, decades.
pub fn density_classes(max_count: usize) -> Vec<usize> {
    let max = max_count.max(1);
    let sequence = |steps: &[usize]| -> Vec<usize> {
        let mut edges = vec![1usize];
        let mut scale = 1usize;
        'outer: loop {
            for &s in steps {
                let Some(next) = scale.checked_mul(s) else {
                    break 'outer;
                };
                if next > max {
                    break 'outer;
                }
                edges.push(next);
            }
            match scale.checked_mul(10) {
                Some(s) => scale = s,
                None => break,
            }
        }
        edges
    };
    for steps in [&[2usize, 5, 10][..], &[3, 10], &[10]] {
        let edges = sequence(steps);
        if edges.len() <= 8 {
            return edges;
        }
    }
    sequence(&[10])
}

/// The density of the rows not drawn individually, binned in CELL-pixel squares
/// of the plotting area; returns (class lower bounds, colours) for the legend.
pub fn draw_density(
    out: &mut String,
    panel: &Panel,
    xs: &[f64],
    ys: &[f64],
    sel: &Selection,
) -> (Vec<usize>, Vec<String>) {
    let nx = (panel.width() / CELL).ceil().max(1.0) as usize;
    let ny = (panel.height() / CELL).ceil().max(1.0) as usize;
    let mut counts = vec![0usize; nx * ny];
    let (sx, sy) = (panel.x_scale(), panel.y_scale());
    for i in 0..xs.len().min(ys.len()) {
        if sel.is_drawn[i] || !xs[i].is_finite() || !ys[i].is_finite() {
            continue;
        }
        let cx = ((xs[i] - panel.x.lo) * sx / CELL).floor();
        let cy = ((panel.y.hi - ys[i]) * sy / CELL).floor();
        let cx = (cx.max(0.0) as usize).min(nx - 1);
        let cy = (cy.max(0.0) as usize).min(ny - 1);
        counts[cy * nx + cx] += 1;
    }
    let max = counts.iter().copied().max().unwrap_or(0);
    let classes = density_classes(max.max(1));
    let colours: Vec<String> = (0..classes.len())
        .map(|c| {
            let t = if classes.len() == 1 {
                0.5
            } else {
                0.12 + 0.88 * c as f64 / (classes.len() - 1) as f64
            };
            blend(DENSITY_LIGHT, DENSITY_DARK, t)
        })
        .collect();
    out.push_str("<g class=\"density\" shape-rendering=\"crispEdges\">\n");
    for (c, colour) in colours.iter().enumerate() {
        let lo = classes[c];
        let hi = classes.get(c + 1).copied().unwrap_or(usize::MAX);
        let _ = writeln!(
            out,
            "<g class=\"density-class\" data-from=\"{lo}\" fill=\"{colour}\">"
        );
        for cy in 0..ny {
            for cx in 0..nx {
                let k = counts[cy * nx + cx];
                if k >= lo && k < hi {
                    let x = panel.left + cx as f64 * CELL;
                    let y = panel.top + cy as f64 * CELL;
                    let w = CELL.min(panel.right - x);
                    let h = CELL.min(panel.bottom - y);
                    let _ = writeln!(
                        out,
                        "<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\"/>",
                        N(x),
                        N(y),
                        N(w),
                        N(h)
                    );
                }
            }
        }
        out.push_str("</g>\n");
    }
    out.push_str("</g>\n");
    (classes, colours)
}

/// Draws the individually drawn rows as markers, grouped by group.
pub fn draw_points(
    out: &mut String,
    panel: &Panel,
    xs: &[f64],
    ys: &[f64],
    sel: &Selection,
    groups: &Groups,
    view: &PlotView,
) {
    out.push_str("<g class=\"points\">\n");
    // Group the drawing order into runs of one group (unflagged and flagged
    // runs of the same group are separate <g>, so flagged stay on top).
    let mut current: Option<usize> = None;
    for &i in &sel.drawn {
        let g = groups.of_row.get(i).copied().unwrap_or(0) as usize;
        if current != Some(g) {
            if current.is_some() {
                out.push_str("</g>\n");
            }
            let (colour, _) = groups.style(g);
            let _ = writeln!(
                out,
                "<g class=\"group\" data-group=\"{}\" fill=\"{colour}\" stroke=\"#FFFFFF\" stroke-width=\"0.6\">",
                esc(&groups.names[g])
            );
            current = Some(g);
        }
        let (_, shape) = groups.style(g);
        let flagged = view.flagged.get(i).copied().unwrap_or(false);
        let extra = if flagged {
            "class=\"flagged\" stroke=\"#000000\" stroke-width=\"1.4\""
        } else {
            ""
        };
        let r = if flagged { MARK * 1.15 } else { MARK };
        svg::marker(out, shape, panel.px(xs[i]), panel.py(ys[i]), r, extra);
    }
    if current.is_some() {
        out.push_str("</g>\n");
    }
    out.push_str("</g>\n");
}

/// A box in pixels.
#[derive(Clone, Copy, Debug)]
pub struct Box2 {
    pub x0: f64,
    pub y0: f64,
    pub x1: f64,
    pub y1: f64,
}

impl Box2 {
    fn overlaps(&self, o: &Box2) -> bool {
        self.x0 < o.x1 && o.x0 < self.x1 && self.y0 < o.y1 && o.y0 < self.y1
    }

    /// The box around a marker at (x, y).
    pub fn around(x: f64, y: f64, r: f64) -> Box2 {
        Box2 {
            x0: x - r,
            y0: y - r,
            x1: x + r,
            y1: y + r,
        }
    }
}

/// One place a label could go: text position (baseline) and anchor.
#[derive(Clone, Copy, Debug)]
pub struct Spot {
    pub x: f64,
    pub y: f64,
    pub anchor: Anchor,
}

impl Spot {
    fn bounds(&self, width: f64) -> Box2 {
        let (x0, x1) = match self.anchor {
            Anchor::Start => (self.x, self.x + width),
            Anchor::End => (self.x - width, self.x),
            Anchor::Middle => (self.x - width / 2.0, self.x + width / 2.0),
        };
        Box2 {
            x0,
            y0: self.y - 0.76 * LABEL_SIZE,
            x1,
            y1: self.y + 0.2 * LABEL_SIZE,
        }
    }
}

/// A label and the places it may take, best first.
pub struct Placement {
    pub text: String,
    pub spots: Vec<Spot>,
}

/// White outline behind label text so it stays readable over marks and lines.
pub const HALO: &str =
    "stroke=\"#FFFFFF\" stroke-width=\"2.6\" stroke-linejoin=\"round\" paint-order=\"stroke\"";

/// Places labels one after another (in the given order, so the result is
/// deterministic), each at the spot that overlaps the fewest labels already
/// placed (and `taken`, labels placed before) and `obstacles` (markers) and
/// stays inside `bounds`; ties go to the earlier spot. Writes them in a group
/// of class `class` and returns the boxes they take.
pub fn place_labels(
    out: &mut String,
    class: &str,
    colour: &str,
    items: &[Placement],
    obstacles: &[Box2],
    taken: &[Box2],
    bounds: (f64, f64, f64, f64),
) -> Vec<Box2> {
    let _ = writeln!(
        out,
        "<g class=\"{class}\" font-size=\"{}\" fill=\"{colour}\" {HALO}>",
        N(LABEL_SIZE)
    );
    // Collision checks cost labels × (labels + obstacles); beyond this many
    // pairs labels simply take their first spot.
    let careful = items.len() * (items.len() + obstacles.len()) <= 4_000_000;
    let mut placed: Vec<Box2> = taken.to_vec();
    let (bx0, by0, bx1, by1) = bounds;
    for item in items {
        let label = svg::clip_text(&item.text, 24);
        let w = text_width(&label, LABEL_SIZE);
        let mut best = 0;
        if careful {
            let mut best_cost = usize::MAX;
            for (k, spot) in item.spots.iter().enumerate() {
                let b = spot.bounds(w);
                let outside = b.x0 < bx0 || b.x1 > bx1 || b.y0 < by0 || b.y1 > by1;
                let cost = usize::from(outside) * 1000
                    + placed.iter().filter(|p| p.overlaps(&b)).count() * 3
                    + obstacles.iter().filter(|p| p.overlaps(&b)).count();
                if cost < best_cost {
                    best_cost = cost;
                    best = k;
                }
                if cost == 0 {
                    break;
                }
            }
        }
        let Some(spot) = item.spots.get(best) else {
            continue;
        };
        placed.push(spot.bounds(w));
        text(out, spot.x, spot.y, spot.anchor, &label, "");
    }
    out.push_str("</g>\n");
    placed.split_off(taken.len())
}

/// The eight spots around a marker at (x, y): right, left, above, below, then
/// the corners.
pub fn spots_around(x: f64, y: f64) -> Vec<Spot> {
    let gap = MARK + 2.5;
    let mid = y + 0.3 * LABEL_SIZE;
    let above = y - gap - 0.5;
    let below = y + gap + 0.75 * LABEL_SIZE;
    vec![
        Spot {
            x: x + gap,
            y: mid,
            anchor: Anchor::Start,
        },
        Spot {
            x: x - gap,
            y: mid,
            anchor: Anchor::End,
        },
        Spot {
            x,
            y: above,
            anchor: Anchor::Middle,
        },
        Spot {
            x,
            y: below,
            anchor: Anchor::Middle,
        },
        Spot {
            x: x + gap - 1.5,
            y: above,
            anchor: Anchor::Start,
        },
        Spot {
            x: x + gap - 1.5,
            y: below,
            anchor: Anchor::Start,
        },
        Spot {
            x: x - gap + 1.5,
            y: above,
            anchor: Anchor::End,
        },
        Spot {
            x: x - gap + 1.5,
            y: below,
            anchor: Anchor::End,
        },
    ]
}

/// Labels beside markers: `labelled` are (x, y, text) in pixels; every drawn
/// marker position in `marks` and every box in `taken` is kept clear where
/// possible.
pub fn draw_labels(
    out: &mut String,
    labelled: &[(f64, f64, String)],
    marks: &[(f64, f64)],
    taken: &[Box2],
    bounds: (f64, f64, f64, f64),
) {
    let items: Vec<Placement> = labelled
        .iter()
        .map(|(x, y, t)| Placement {
            text: t.clone(),
            spots: spots_around(*x, *y),
        })
        .collect();
    let obstacles: Vec<Box2> = marks
        .iter()
        .map(|&(x, y)| Box2::around(x, y, MARK))
        .collect();
    place_labels(out, "labels", INK, &items, &obstacles, taken, bounds);
}

/// Writes the ids of the selected rows beside their markers.
pub fn label_rows(
    out: &mut String,
    panel: &Panel,
    xs: &[f64],
    ys: &[f64],
    sel: &Selection,
    view: &PlotView,
    taken: &[Box2],
) {
    if sel.labelled.is_empty() {
        return;
    }
    let at = |i: usize| (panel.px(xs[i]), panel.py(ys[i]));
    let labelled: Vec<(f64, f64, String)> = sel
        .labelled
        .iter()
        .map(|&i| {
            let (x, y) = at(i);
            (x, y, view.row_labels.get(i).unwrap_or_default().to_string())
        })
        .collect();
    let marks: Vec<(f64, f64)> = sel.drawn.iter().map(|&i| at(i)).collect();
    draw_labels(
        out,
        &labelled,
        &marks,
        taken,
        (panel.left, panel.top, panel.right, panel.bottom),
    );
}

/// The legend column: entries stacked from the top.
pub struct Legend {
    pub x: f64,
    pub y: f64,
    pub bottom: f64,
    pub body: String,
}

pub const LEGEND_ROW: f64 = 17.0;
/// Legend text size in pixels.
pub const LEGEND_SIZE: f64 = 10.5;

/// How many legend characters fit after a key in a column starting at `x`.
fn legend_chars(x: f64) -> usize {
    let room = f64::from(svg::WIDTH) - 6.0 - (x + 18.0);
    (room / (0.58 * LEGEND_SIZE)).max(4.0) as usize
}

impl Legend {
    pub fn new(x: f64, y: f64, bottom: f64) -> Legend {
        let mut body = String::new();
        let _ = writeln!(
            body,
            "<g class=\"legend\" font-size=\"{}\" fill=\"{INK}\">",
            N(LEGEND_SIZE)
        );
        Legend { x, y, bottom, body }
    }

    /// How many characters fit after a key, up to the canvas edge.
    pub fn chars(&self) -> usize {
        legend_chars(self.x)
    }

    pub fn rows_left(&self) -> usize {
        ((self.bottom - self.y) / LEGEND_ROW).max(0.0) as usize
    }

    pub fn heading(&mut self, title: &str) {
        text(
            &mut self.body,
            self.x,
            self.y + 10.8,
            Anchor::Start,
            &svg::clip_text(title, legend_chars(self.x) + 1),
            "font-weight=\"bold\"",
        );
        self.y += LEGEND_ROW + 1.0;
    }

    pub fn note(&mut self, note: &str) {
        text(
            &mut self.body,
            self.x,
            self.y + 10.8,
            Anchor::Start,
            &svg::clip_text(note, legend_chars(self.x) + 3),
            &format!("fill=\"{MUTED}\""),
        );
        self.y += LEGEND_ROW;
    }

    /// An entry with a marker of the given colour and shape.
    pub fn marker(&mut self, colour: &str, shape: Shape, outline: bool, label: &str) {
        let extra = if outline {
            format!("fill=\"{colour}\" stroke=\"#000000\" stroke-width=\"1.4\"")
        } else {
            format!("fill=\"{colour}\"")
        };
        svg::marker(
            &mut self.body,
            shape,
            self.x + 6.0,
            self.y + 7.0,
            MARK * 1.1,
            &extra,
        );
        self.entry_label(label);
    }

    /// The text of an entry beside its sample, then the next row.
    fn entry_label(&mut self, label: &str) {
        text(
            &mut self.body,
            self.x + 18.0,
            self.y + 10.8,
            Anchor::Start,
            &svg::clip_text(label, legend_chars(self.x)),
            "",
        );
        self.y += LEGEND_ROW;
    }

    /// A marker entry "name (count)": the count is never cut, a long name is.
    pub fn counted(&mut self, colour: &str, shape: Shape, name: &str, count: usize) {
        let count = format!(" ({count})");
        let room = self.chars().saturating_sub(count.chars().count()).max(3);
        let label = format!("{}{count}", svg::clip_text(name, room));
        self.marker(colour, shape, false, &label);
    }

    /// An entry with a short line sample (for rules and curves).
    pub fn rule(&mut self, colour: &str, dash: Option<&str>, width: f64, label: &str) {
        let dash = dash.map_or(String::new(), |d| format!(" stroke-dasharray=\"{d}\""));
        svg::line(
            &mut self.body,
            self.x,
            self.y + 7.0,
            self.x + 14.0,
            self.y + 7.0,
            &format!("stroke=\"{colour}\" stroke-width=\"{}\"{dash}", N(width)),
        );
        self.entry_label(label);
    }

    /// An entry with a filled square.
    pub fn swatch(&mut self, colour: &str, label: &str) {
        svg::rect(
            &mut self.body,
            self.x + 1.0,
            self.y + 2.0,
            self.x + 11.0,
            self.y + 12.0,
            &format!("fill=\"{colour}\""),
        );
        self.entry_label(label);
    }

    pub fn gap(&mut self) {
        self.y += LEGEND_ROW * 0.6;
    }

    /// The groups (as many as fit, keeping `reserve` rows for what follows).
    pub fn groups(&mut self, groups: &Groups, reserve: usize) {
        let Some(column) = &groups.column else {
            return;
        };
        self.heading(column);
        let room = self.rows_left().saturating_sub(reserve).max(2);
        let total = groups.names.len();
        let shown = if total <= room { total } else { room - 1 };
        for g in 0..shown {
            let (colour, shape) = groups.style(g);
            self.counted(colour, shape, &groups.names[g], groups.counts[g]);
        }
        if shown < total {
            self.note(&format!("… and {} more groups", total - shown));
        }
        self.gap();
    }

    /// The density classes.
    pub fn density(&mut self, classes: &[usize], colours: &[String]) {
        self.heading("rows per square");
        for (c, colour) in colours.iter().enumerate() {
            let lo = classes[c];
            let label = match classes.get(c + 1) {
                Some(&next) if next - 1 > lo => format!("{lo}–{}", next - 1),
                Some(_) => format!("{lo}"),
                None => format!("{lo} or more"),
            };
            self.swatch(colour, &label);
        }
        self.gap();
    }

    pub fn finish(mut self) -> String {
        self.body.push_str("</g>\n");
        self.body
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn natural_order() {
        let mut v = vec!["b10", "b2", "a", "b02", "B1"];
        v.sort_by(|a, b| natural_cmp(a, b));
        assert_eq!(v, ["B1", "a", "b02", "b2", "b10"]);
    }

    #[test]
    fn classes() {
        assert_eq!(density_classes(1), [1]);
        assert_eq!(density_classes(37), [1, 2, 5, 10, 20]);
        assert_eq!(density_classes(300), [1, 2, 5, 10, 20, 50, 100, 200]);
        assert_eq!(density_classes(600), [1, 3, 10, 30, 100, 300]);
        assert_eq!(density_classes(5000), [1, 3, 10, 30, 100, 300, 1000, 3000]);
        assert_eq!(density_classes(50_000), [1, 10, 100, 1000, 10_000]);
    }
}
