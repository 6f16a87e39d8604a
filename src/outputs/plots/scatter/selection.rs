//! Which rows a scatter plot draws one by one: every row up to
//! `density_above`; above it, only the labelled rows, drawn on top of a
//! density that counts every row (so no row is missing from the density and
//! no edge appears where the drawn points start). Also which rows are
//! labelled: at most `max_labels`, the most severe first.

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

/// How far beyond its limits a row with this T² and SPE is: the larger of
/// T²/limit and SPE/limit (the raw T² when neither limit is defined). Used to
/// pick the most extreme rows when not all can be labelled.
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
    /// Whether the row may be labelled (`labels` chooses it).
    named: bool,
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

/// How a plot labels its rows: which rows may be labelled, and how many at most.
#[derive(Clone, Copy, Debug)]
pub struct Labelling {
    pub which: PointLabels,
    pub most: usize,
}

/// Which rows are drawn one by one, which are labelled.
pub struct PointSelection {
    /// Rows with finite coordinates.
    pub n_finite: usize,
    /// Rows left out for a non-finite coordinate.
    pub n_nonfinite: usize,
    /// Whether the plot shows a density of every row under the points.
    pub density: bool,
    /// Rows drawn individually, in drawing order (unflagged first): every
    /// finite row, or in density mode only the labelled rows.
    pub points: Vec<Point>,
    /// Rows flagged in all, and flagged rows drawn individually.
    pub flagged_total: usize,
    pub flagged_drawn: usize,
    /// The points whose label is written if it finds room (indices into
    /// `points`), the most severe first.
    pub labelled: Vec<usize>,
    /// Rows that `labels` chooses.
    pub candidates: usize,
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
/// the rows that may be labelled, pruned to the `labelling.most` most severe
/// whenever twice as many are held (a row pruned then has that many more
/// severe rows ahead of it, so it could not be among the labelled).
pub fn gather(
    view: &PlotView,
    colour: Colour,
    labelling: Labelling,
    density_above: usize,
    coords: impl Fn(&Batch, usize) -> (f64, f64),
    mut watch: impl FnMut(f64, f64),
) -> Gathered {
    let mut groups = GroupCount::new(colour);
    let (mut x, mut y) = (Extent::default(), Extent::default());
    let (mut rows, mut n_finite, mut flagged_total, mut candidates) = (0, 0, 0, 0);
    let mut density = false;
    let mut kept: Vec<Point> = Vec::new();
    let most = labelling.most.max(1);
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
            let named = match labelling.which {
                PointLabels::All => true,
                PointLabels::Flagged => flagged,
                PointLabels::None => false,
            };
            candidates += usize::from(named);
            if !density && n_finite > density_above {
                density = true;
                kept.retain(|p| p.named);
            }
            if density && !named {
                continue;
            }
            kept.push(Point {
                row: batch.first + i,
                x: px,
                y: py,
                flagged,
                group,
                severity: severity(view, t2, spe),
                named,
                label: if named {
                    batch.label(i).into_owned()
                } else {
                    String::new()
                },
            });
            if density && kept.len() > 2 * most {
                most_severe(&mut kept, most);
            }
        }
    });
    if density && kept.len() > labelling.most {
        most_severe(&mut kept, labelling.most);
    }
    let (groups, remap) = groups.finish();
    for p in &mut kept {
        p.group = remap[p.group as usize];
    }
    let sel = PointSelection::new(kept, labelling, density, n_finite, rows, flagged_total);
    Gathered {
        groups,
        sel: PointSelection { candidates, ..sel },
        x,
        y,
        rows,
    }
}

impl PointSelection {
    /// Orders the drawn points and chooses the labelled ones.
    fn new(
        mut points: Vec<Point>,
        labelling: Labelling,
        density: bool,
        n_finite: usize,
        rows: usize,
        flagged_total: usize,
    ) -> PointSelection {
        // Drawing order: unflagged, then flagged on top; by group, then row.
        points.sort_by_key(|p| (p.flagged, p.group, p.row));
        let flagged_drawn = points.iter().filter(|p| p.flagged).count();
        let mut labelled: Vec<usize> = (0..points.len()).filter(|&k| points[k].named).collect();
        // The most severe first: they are placed first, so they keep their
        // labels when room runs out.
        labelled.sort_by(|&a, &b| by_severity(&points[a], &points[b]));
        let named = labelled.len();
        labelled.truncate(labelling.most);
        PointSelection {
            n_finite,
            n_nonfinite: rows - n_finite,
            density,
            points,
            flagged_total,
            flagged_drawn,
            labelled,
            candidates: named,
        }
    }

    /// Changes the drawn points' coordinates (as when an axis gets another scale).
    pub fn map_points(&mut self, f: impl Fn(f64, f64) -> (f64, f64)) {
        for p in &mut self.points {
            (p.x, p.y) = f(p.x, p.y);
        }
    }

    /// Rows that `labels` chooses but the limit leaves out.
    pub fn capped(&self) -> usize {
        self.candidates - self.labelled.len()
    }

    /// Plain words about what the points are, for a caption: `left_out` are
    /// the labels left out because they would overlap others.
    pub fn describe(
        &self,
        what: &str,
        density_above: usize,
        labelling: Labelling,
        left_out: &[String],
    ) -> String {
        let mut s = String::new();
        if self.density {
            let _ = write!(
                s,
                "With {} {what} (more than {}), the plot shows how many fall in each {}-pixel square (shade, counts in the legend) instead of every point: every row is counted in exactly one square, rows above a limit included, so the density has no gap where they begin; only the labelled rows are also drawn as points on top ({}).",
                self.n_finite,
                density_above,
                N(CELL),
                self.points.len()
            );
        } else {
            let _ = write!(s, "Each of the {} {what} is a point.", self.n_finite);
            if self.flagged_total > 0 {
                s.push_str(" Rows above the T² or SPE limit have a dark outline.");
            }
        }
        let whom = match labelling.which {
            PointLabels::None => None,
            PointLabels::All => Some("rows"),
            PointLabels::Flagged => Some("flagged rows"),
        };
        if let Some(whom) = whom
            && !self.labelled.is_empty()
        {
            let drawn = self.labelled.len() - left_out.len();
            let all_shown = self.capped() == 0 && left_out.is_empty();
            if all_shown && labelling.which == PointLabels::All {
                let _ = write!(s, " {drawn} points are labelled with their id.");
            } else if all_shown {
                let _ = write!(s, " Flagged rows are labelled with their id ({drawn}).");
            } else {
                let _ = write!(
                    s,
                    " The {drawn} most severe {whom} are labelled with their id (at most {} per plot",
                    labelling.most
                );
                if self.capped() > 0 {
                    let _ = write!(s, "; {} more are not", self.capped());
                }
                s.push_str(").");
            }
            if !left_out.is_empty() {
                let _ = write!(
                    s,
                    " Left out where the label would overlap another: {}.",
                    left_out.join(", ")
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
