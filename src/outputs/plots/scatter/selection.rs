//! Which rows a scatter plot draws one by one: all of them up to a bound, then
//! the most severe flagged rows; the rest are binned into the density. Also the
//! labelled rows and the drawing of the chosen points.

use super::MARK;
use super::density::CELL;
use super::groups::{Colour, GroupCount, Groups};
use crate::outputs::plots::frame::{Extent, Panel};
use crate::outputs::plots::svg::{self, N, esc};
use crate::outputs::view::PlotView;
use crate::recipe::raw::PointLabels;
use crate::row_results::Batch;
use std::cmp::Ordering;
use std::fmt::Write;

/// At most this many rows are drawn one by one in density mode (the most
/// extreme flagged rows first); the others join the density.
pub const MAX_INDIVIDUAL: usize = 2_000;
/// With `labels = "flagged"`, at most this many rows get their id written (the
/// most extreme first), so labels stay readable.
pub const MAX_FLAGGED_LABELS: usize = 40;

/// How far beyond its limits a row with this T² and SPE is: the larger of
/// T²/limit and SPE/limit (the raw T² when neither limit is defined). Used to
/// pick the most extreme flagged rows when not all can be drawn or labelled.
pub fn severity(view: &PlotView, t2: f64, spe: f64) -> f64 {
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

/// A row drawn one by one.
pub struct Point {
    /// The row's index among all rows.
    pub row: usize,
    /// Data coordinates (both finite).
    pub x: f64,
    pub y: f64,
    pub flagged: bool,
    pub group: u32,
    severity: f64,
    /// The row's label, kept only when it may be written.
    pub label: String,
}

/// Orders rows the most severe first, ties to the lower row.
fn by_severity(a: &Point, b: &Point) -> Ordering {
    b.severity.total_cmp(&a.severity).then(a.row.cmp(&b.row))
}

/// Keeps the `keep` most severe points (sorted the most severe first).
fn most_severe(points: &mut Vec<Point>, keep: usize) {
    points.sort_by(by_severity);
    points.truncate(keep);
}

/// Which rows are drawn one by one, which are binned, which are labelled.
pub struct PointSelection {
    /// Rows with finite coordinates.
    pub n_finite: usize,
    /// Rows left out for a non-finite coordinate.
    pub n_nonfinite: usize,
    /// Whether the plot shows a density instead of every point.
    pub density: bool,
    /// Rows drawn individually, in drawing order (unflagged first).
    pub points: Vec<Point>,
    /// The rows of `points`, ascending (to tell the binned rows).
    drawn_rows: Vec<usize>,
    /// Rows flagged in all, and flagged rows drawn individually.
    pub flagged_total: usize,
    pub flagged_drawn: usize,
    /// The points whose label is written (indices into `points`).
    pub labelled: Vec<usize>,
    /// Flagged rows that would be labelled but are not, for the cap.
    pub labels_capped: usize,
}

/// What one reading of every row gives a scatter plot.
pub struct Gathered {
    pub groups: Groups,
    pub sel: PointSelection,
    /// The finite coordinates' extents over every row, folded in row order.
    pub x: Extent,
    pub y: Extent,
    /// Rows in all.
    pub rows: usize,
}

/// Reads every row once and chooses what to draw: `coords` gives a row's data
/// coordinates, `watch` sees them for every row in row order (for what a plot
/// folds besides). Memory stays bounded whatever the number of rows: at most
/// `density_above` points while every finite row may still be drawn, then only
/// the flagged rows, pruned to the [`MAX_INDIVIDUAL`] most severe whenever
/// twice as many are held (a row pruned then has that many more severe rows
/// ahead of it, so it could not be among the drawn).
pub fn gather(
    view: &PlotView,
    colour: Colour,
    labels: PointLabels,
    density_above: usize,
    coords: impl Fn(&Batch, usize) -> (f64, f64),
    mut watch: impl FnMut(f64, f64),
) -> Gathered {
    let mut groups = GroupCount::new(colour);
    let (mut x, mut y) = (Extent::default(), Extent::default());
    let (mut rows, mut n_finite, mut flagged_total) = (0, 0, 0);
    let mut density = false;
    let mut kept: Vec<Point> = Vec::new();
    view.rows.scan(|batch| {
        for i in 0..batch.len() {
            let (px, py) = coords(batch, i);
            watch(px, py);
            x.add(px);
            y.add(py);
            rows += 1;
            let group = groups.add(batch, i);
            if !(px.is_finite() && py.is_finite()) {
                continue;
            }
            n_finite += 1;
            let (t2, spe) = (batch.t2(i), batch.spe(i));
            let flagged = view.is_flagged(t2, spe);
            flagged_total += usize::from(flagged);
            if !density && n_finite > density_above {
                density = true;
                kept.retain(|p| p.flagged);
            }
            if density && !flagged {
                continue;
            }
            let named = match labels {
                PointLabels::All => true,
                PointLabels::Flagged => flagged,
                PointLabels::None => false,
            };
            kept.push(Point {
                row: batch.first + i,
                x: px,
                y: py,
                flagged,
                group,
                severity: severity(view, t2, spe),
                label: if named {
                    batch.label(i).into_owned()
                } else {
                    String::new()
                },
            });
            if density && kept.len() > 2 * MAX_INDIVIDUAL {
                most_severe(&mut kept, MAX_INDIVIDUAL);
            }
        }
    });
    if density && kept.len() > MAX_INDIVIDUAL {
        most_severe(&mut kept, MAX_INDIVIDUAL);
    }
    let (groups, remap) = groups.finish();
    for p in &mut kept {
        p.group = remap[p.group as usize];
    }
    let sel = PointSelection::new(kept, labels, density, n_finite, rows, flagged_total);
    Gathered {
        groups,
        sel,
        x,
        y,
        rows,
    }
}

impl PointSelection {
    /// Orders the drawn points and chooses the labelled ones.
    fn new(
        mut points: Vec<Point>,
        labels: PointLabels,
        density: bool,
        n_finite: usize,
        rows: usize,
        flagged_total: usize,
    ) -> PointSelection {
        // Drawing order: unflagged, then flagged on top; by group, then row.
        points.sort_by_key(|p| (p.flagged, p.group, p.row));
        let mut drawn_rows: Vec<usize> = points.iter().map(|p| p.row).collect();
        drawn_rows.sort_unstable();
        let flagged_drawn = points.iter().filter(|p| p.flagged).count();
        let (labelled, labels_capped) = match labels {
            PointLabels::None => (Vec::new(), 0),
            PointLabels::All => ((0..points.len()).collect(), 0),
            PointLabels::Flagged => {
                let mut chosen: Vec<usize> =
                    (0..points.len()).filter(|&k| points[k].flagged).collect();
                let capped = chosen.len().saturating_sub(MAX_FLAGGED_LABELS);
                if capped > 0 {
                    chosen.sort_by(|&a, &b| by_severity(&points[a], &points[b]));
                    chosen.truncate(MAX_FLAGGED_LABELS);
                    chosen.sort_unstable_by_key(|&k| points[k].row);
                }
                (chosen, capped)
            }
        };
        PointSelection {
            n_finite,
            n_nonfinite: rows - n_finite,
            density,
            points,
            drawn_rows,
            flagged_total,
            flagged_drawn,
            labelled,
            labels_capped,
        }
    }

    /// Whether the row is drawn one by one.
    pub(super) fn is_drawn(&self, row: usize) -> bool {
        self.drawn_rows.binary_search(&row).is_ok()
    }

    /// Changes the drawn points' coordinates (as when an axis gets another scale).
    pub fn map_points(&mut self, f: impl Fn(f64, f64) -> (f64, f64)) {
        for p in &mut self.points {
            (p.x, p.y) = f(p.x, p.y);
        }
    }
    /// Plain words about what the points are, for a caption.
    pub fn describe(&self, what: &str, density_above: usize, labels: PointLabels) -> String {
        let mut s = String::new();
        if self.density {
            let binned = self.n_finite - self.points.len();
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

/// Draws the individually drawn rows as markers, grouped by group.
pub fn draw_points(out: &mut String, panel: &Panel, sel: &PointSelection, groups: &Groups) {
    out.push_str("<g class=\"points\">\n");
    // Group the drawing order into runs of one group (unflagged and flagged
    // runs of the same group are separate <g>, so flagged stay on top).
    let mut current: Option<usize> = None;
    for p in &sel.points {
        let g = p.group as usize;
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
        let extra = if p.flagged {
            "class=\"flagged\" stroke=\"#000000\" stroke-width=\"1.4\""
        } else {
            ""
        };
        let r = if p.flagged { MARK * 1.15 } else { MARK };
        svg::marker(out, shape, panel.px(p.x), panel.py(p.y), r, extra);
    }
    if current.is_some() {
        out.push_str("</g>\n");
    }
    out.push_str("</g>\n");
}
