//! What the scatter plots (scores, biplot, outlier map) share: groups with their
//! colours and shapes, the choice of which rows are drawn one by one and which
//! are binned into a density, point labels, and the legend column.
//!
//! The rows are read only through [`crate::row_results::RowResults::scan`] (they may
//! be in a scratch file): one reading ([`gather`]) counts the groups, folds the
//! axis ranges and keeps the rows drawn one by one; a second
//! ([`draw_density`]) bins the others into a grid of fixed size. Neither holds
//! anything per row beyond the drawn points, so memory does not grow with the
//! number of rows.

use super::frame::{Extent, LABEL_SIZE, Panel};
use super::svg::{
    self, Anchor, INK, MUTED, N, NEUTRAL, OKABE_ITO, SHAPES, Shape, blend, esc, text, text_width,
};
use crate::outputs::view::PlotView;
use crate::recipe::raw::PointLabels;
use crate::row_results::Batch;
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
    /// Rows in each group (all rows, drawn or not).
    pub counts: Vec<usize>,
    /// Index of the group of rows with an empty value, if any (drawn grey).
    pub missing: Option<usize>,
}

/// Name shown for rows whose group cell is empty.
pub const MISSING_GROUP: &str = "(empty)";

/// Where the rows' groups come from.
pub enum Colour<'a> {
    /// No colour: one anonymous group of all rows.
    None,
    /// The values of the rows' group column `g`, called `name`.
    Column { g: usize, name: String },
    /// Fixed groups named in order (shown under the heading `column`), and the
    /// group of each row.
    Kinds {
        column: &'a str,
        names: &'a [&'a str],
        of: &'a dyn Fn(&Batch, usize) -> u32,
    },
}

impl Colour<'_> {
    /// The group column `color` of the view's rows; no colour when there is
    /// none or the rows have no such column.
    pub fn of(view: &PlotView, color: Option<&str>) -> Colour<'static> {
        match color.and_then(|c| view.rows.group_index(c).map(|g| (g, c))) {
            Some((g, name)) => Colour::Column {
                g,
                name: name.to_string(),
            },
            None => Colour::None,
        }
    }
}

/// Counts the groups while the rows are read: a column's distinct values get
/// a provisional number in the order they are first met, renumbered in natural
/// order of their names at the end (the number of rows never matters).
struct GroupCount<'a> {
    colour: Colour<'a>,
    /// Column values: (rows, provisional number).
    seen: BTreeMap<String, (usize, u32)>,
    /// Rows per group for no colour (one) and for fixed kinds.
    counts: Vec<usize>,
}

impl<'a> GroupCount<'a> {
    fn new(colour: Colour<'a>) -> GroupCount<'a> {
        let counts = match &colour {
            Colour::Kinds { names, .. } => vec![0; names.len()],
            _ => vec![0],
        };
        GroupCount {
            colour,
            seen: BTreeMap::new(),
            counts,
        }
    }

    /// Counts row `i` of the batch and gives its (provisional) group.
    fn add(&mut self, batch: &Batch, i: usize) -> u32 {
        match &self.colour {
            Colour::None => {
                self.counts[0] += 1;
                0
            }
            Colour::Kinds { of, .. } => {
                let k = of(batch, i);
                self.counts[k as usize] += 1;
                k
            }
            Colour::Column { g, .. } => {
                let value = batch.group(*g, i);
                let next = self.seen.len() as u32;
                if let Some((count, id)) = self.seen.get_mut(value) {
                    *count += 1;
                    return *id;
                }
                self.seen.insert(value.to_string(), (1, next));
                next
            }
        }
    }

    /// The groups, and for each provisional number its final group.
    fn finish(self) -> (Groups, Vec<u32>) {
        let (name, seen) = match self.colour {
            Colour::None => {
                let groups = Groups {
                    column: None,
                    names: vec!["all rows".into()],
                    counts: self.counts,
                    missing: None,
                };
                return (groups, vec![0]);
            }
            Colour::Kinds { column, names, .. } => {
                let groups = Groups {
                    column: Some(column.to_string()),
                    names: names.iter().map(|s| s.to_string()).collect(),
                    counts: self.counts,
                    missing: None,
                };
                let same = (0..names.len() as u32).collect();
                return (groups, same);
            }
            Colour::Column { name, .. } => (name, self.seen),
        };
        let mut names: Vec<&str> = seen
            .keys()
            .map(String::as_str)
            .filter(|s| !s.is_empty())
            .collect();
        names.sort_by(|a, b| natural_cmp(a, b));
        let missing_index = names.len() as u32;
        let mut remap = vec![missing_index; seen.len()];
        let mut counts = vec![0; names.len()];
        for (g, s) in names.iter().enumerate() {
            let (count, id) = seen[*s];
            remap[id as usize] = g as u32;
            counts[g] = count;
        }
        let mut out_names: Vec<String> = names.iter().map(|s| s.to_string()).collect();
        let missing = seen.get("").map(|&(count, _)| {
            out_names.push(MISSING_GROUP.into());
            counts.push(count);
            out_names.len() - 1
        });
        let groups = Groups {
            column: Some(name),
            names: out_names,
            counts,
            missing,
        };
        (groups, remap)
    }
}

impl Groups {
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
pub struct Selection {
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
    pub sel: Selection,
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
    let sel = Selection::new(kept, labels, density, n_finite, rows, flagged_total);
    Gathered {
        groups,
        sel,
        x,
        y,
        rows,
    }
}

impl Selection {
    /// Orders the drawn points and chooses the labelled ones.
    fn new(
        mut points: Vec<Point>,
        labels: PointLabels,
        density: bool,
        n_finite: usize,
        rows: usize,
        flagged_total: usize,
    ) -> Selection {
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
        Selection {
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
    fn is_drawn(&self, row: usize) -> bool {
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
/// of the plotting area while the rows are read again (`coords` gives a row's
/// plotted coordinates); returns (class lower bounds, colours) for the legend.
pub fn draw_density(
    out: &mut String,
    panel: &Panel,
    view: &PlotView,
    sel: &Selection,
    coords: impl Fn(&Batch, usize) -> (f64, f64),
) -> (Vec<usize>, Vec<String>) {
    let nx = (panel.width() / CELL).ceil().max(1.0) as usize;
    let ny = (panel.height() / CELL).ceil().max(1.0) as usize;
    let mut counts = vec![0usize; nx * ny];
    let (sx, sy) = (panel.x_scale(), panel.y_scale());
    view.rows.scan(|batch| {
        for i in 0..batch.len() {
            let (x, y) = coords(batch, i);
            if !x.is_finite() || !y.is_finite() || sel.is_drawn(batch.first + i) {
                continue;
            }
            let cx = ((x - panel.x.lo) * sx / CELL).floor();
            let cy = ((panel.y.hi - y) * sy / CELL).floor();
            let cx = (cx.max(0.0) as usize).min(nx - 1);
            let cy = (cy.max(0.0) as usize).min(ny - 1);
            counts[cy * nx + cx] += 1;
        }
    });
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
pub fn draw_points(out: &mut String, panel: &Panel, sel: &Selection, groups: &Groups) {
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
pub fn label_rows(out: &mut String, panel: &Panel, sel: &Selection, taken: &[Box2]) {
    if sel.labelled.is_empty() {
        return;
    }
    let at = |p: &Point| (panel.px(p.x), panel.py(p.y));
    let labelled: Vec<(f64, f64, String)> = sel
        .labelled
        .iter()
        .map(|&k| {
            let (x, y) = at(&sel.points[k]);
            (x, y, sel.points[k].label.clone())
        })
        .collect();
    let marks: Vec<(f64, f64)> = sel.points.iter().map(at).collect();
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
