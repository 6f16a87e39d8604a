//! The density of the rows: a grid of fixed cells over the plotting area,
//! counted separately for each category of row (for example within the
//! limits, above a limit), each category shaded in its own colour by its
//! count class.
//!
//! Every finite row is counted in exactly one cell of exactly one category
//! (`Grid::cell`, the one rule both the figure and `row_layers` use), so the
//! counts of a category sum to its rows and no category stops at an edge
//! where drawn points would begin. A grid may be split at a pixel line (an
//! outlier map's limits): cell borders then fall on the line, and a row is
//! kept on its category's side of it, so no cell mixes rows from both sides.

use crate::outputs::plots::frame::Panel;
use crate::outputs::plots::svg::{N, blend};
use crate::outputs::view::PlotView;
use crate::row_results::Batch;
use std::fmt::Write;

/// Side of a density cell in pixels.
pub const CELL: f64 = 8.0;

/// Shades of the density cells of rows within the limits, light to dark.
pub const DENSITY_LIGHT: &str = "#E3E8EE";
pub const DENSITY_DARK: &str = "#34495E";

/// How a category of rows is drawn in the density.
#[derive(Clone, Debug)]
pub struct Category {
    pub name: &'static str,
    /// The lightest and darkest shade.
    pub light: String,
    pub dark: String,
    /// Drawn as a square of half the cell's side in the cell's middle, so a
    /// cell of another category under it stays visible around it.
    pub inset: bool,
}

impl Category {
    /// A category shaded from a light tint of `colour` to a darker `colour`.
    pub fn tinted(name: &'static str, colour: &str, inset: bool) -> Category {
        Category {
            name,
            light: blend("#FFFFFF", colour, 0.22),
            dark: blend(colour, "#000000", 0.3),
            inset,
        }
    }

    /// The shade of count class `c` of `classes`.
    pub fn shade(&self, c: usize, classes: usize) -> String {
        let t = if classes == 1 {
            0.5
        } else {
            0.12 + 0.88 * c as f64 / (classes - 1) as f64
        };
        blend(&self.light, &self.dark, t)
    }
}

/// The cells of a density: where they start, how many, and the lines a row
/// may not cross.
#[derive(Clone, Debug)]
pub struct Grid {
    /// Pixel position of the first cell's left and top edges (at or before
    /// the plotting area's).
    x0: f64,
    y0: f64,
    pub nx: usize,
    pub ny: usize,
    /// Columns left of the vertical split and rows above the horizontal one.
    split_x: Option<usize>,
    split_y: Option<usize>,
    left: f64,
    top: f64,
    right: f64,
    bottom: f64,
}

/// A row's cell: its category and the cell's column and row in the grid.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub struct Cell {
    pub category: usize,
    pub cx: usize,
    pub cy: usize,
}

/// Which side of a split line a row belongs on: `Some(true)` right of the
/// vertical line / above the horizontal one.
#[derive(Clone, Copy, Debug, Default)]
pub struct Sides {
    pub right: Option<bool>,
    pub above: Option<bool>,
}

impl Grid {
    /// A grid over the panel whose cell borders fall on the pixel lines
    /// `split_x` (vertical) and `split_y` (horizontal) when given and inside.
    pub fn new(panel: &Panel, split_x: Option<f64>, split_y: Option<f64>) -> Grid {
        let inside = |v: f64, lo: f64, hi: f64| v.is_finite() && v > lo && v < hi;
        let split_x = split_x.filter(|&v| inside(v, panel.left, panel.right));
        let split_y = split_y.filter(|&v| inside(v, panel.top, panel.bottom));
        // Move the first border back so that one lands on the split.
        let start = |lo: f64, split: Option<f64>| match split {
            Some(v) => lo - (CELL - (v - lo).rem_euclid(CELL)).rem_euclid(CELL),
            None => lo,
        };
        let (x0, y0) = (start(panel.left, split_x), start(panel.top, split_y));
        let nx = ((panel.right - x0) / CELL).ceil().max(1.0) as usize;
        let ny = ((panel.bottom - y0) / CELL).ceil().max(1.0) as usize;
        let index = |v: f64, o: f64| ((v - o) / CELL).round() as usize;
        Grid {
            x0,
            y0,
            nx,
            ny,
            split_x: split_x.map(|v| index(v, x0)),
            split_y: split_y.map(|v| index(v, y0)),
            left: panel.left,
            top: panel.top,
            right: panel.right,
            bottom: panel.bottom,
        }
    }

    /// The cell of a row at pixel (px, py) of `category`, kept on its side of
    /// the splits; `None` for a non-finite position.
    pub fn cell(&self, px: f64, py: f64, category: usize, sides: Sides) -> Option<Cell> {
        if !(px.is_finite() && py.is_finite()) {
            return None;
        }
        let clamp = |v: f64, n: usize| (v.floor().max(0.0) as usize).min(n - 1);
        let mut cx = clamp((px - self.x0) / CELL, self.nx);
        let mut cy = clamp((py - self.y0) / CELL, self.ny);
        if let (Some(k), Some(right)) = (self.split_x, sides.right) {
            cx = if right { cx.max(k) } else { cx.min(k - 1) };
        }
        if let (Some(k), Some(above)) = (self.split_y, sides.above) {
            cy = if above { cy.min(k - 1) } else { cy.max(k) };
        }
        Some(Cell { category, cx, cy })
    }

    /// The cell's box in pixels, cut to the plotting area.
    fn rect(&self, cx: usize, cy: usize) -> (f64, f64, f64, f64) {
        let x = (self.x0 + cx as f64 * CELL).max(self.left);
        let y = (self.y0 + cy as f64 * CELL).max(self.top);
        let x1 = (self.x0 + (cx + 1) as f64 * CELL).min(self.right);
        let y1 = (self.y0 + (cy + 1) as f64 * CELL).min(self.bottom);
        (x, y, x1, y1)
    }
}

/// How the rows of a density plot fall into categories and cells.
pub struct Binning<'a> {
    pub grid: Grid,
    pub categories: Vec<Category>,
    /// A row's plotted pixel position.
    pub pixel: &'a dyn Fn(&Batch, usize) -> (f64, f64),
    /// A row's category and its sides of the splits.
    pub category: &'a dyn Fn(&Batch, usize) -> (usize, Sides),
}

impl Binning<'_> {
    /// Reads every row and gives `visit` each row's index and cell (`None`
    /// for a row left out).
    pub fn scan(&self, view: &PlotView, mut visit: impl FnMut(usize, Option<Cell>)) {
        view.rows.scan(|batch| {
            for i in 0..batch.len() {
                let (px, py) = (self.pixel)(batch, i);
                let (category, sides) = (self.category)(batch, i);
                visit(batch.first + i, self.grid.cell(px, py, category, sides));
            }
        });
    }
}

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

/// What a density drew, for the legend: count class lower bounds, and each
/// category's shades and rows counted.
pub struct Drawn {
    pub classes: Vec<usize>,
    pub shades: Vec<Vec<String>>,
    pub counts: Vec<usize>,
}

/// Counts every row into its cell while the rows are read again, then draws
/// one `rect` per occupied cell (with its count as `data-n`), category by
/// category in the given order, each in `density-class` groups by count class.
pub fn draw_density(out: &mut String, view: &PlotView, binning: &Binning) -> Drawn {
    let mut counts = Counts::new(&binning.grid, binning.categories.len());
    binning.scan(view, |_, cell| counts.add(cell));
    draw_counts(out, &binning.grid, &binning.categories, &counts)
}

/// Rows counted per cell and category, category-major.
pub struct Counts {
    cells: usize,
    nx: usize,
    n: Vec<usize>,
}

impl Counts {
    pub fn new(grid: &Grid, categories: usize) -> Counts {
        let cells = grid.nx * grid.ny;
        Counts {
            cells,
            nx: grid.nx,
            n: vec![0; cells * categories],
        }
    }

    /// Counts one row in its cell (a row without a cell is left out).
    pub fn add(&mut self, cell: Option<Cell>) {
        if let Some(c) = cell {
            self.n[c.category * self.cells + c.cy * self.nx + c.cx] += 1;
        }
    }
}

/// Draws counted cells: one `rect` per occupied cell (with its count as
/// `data-n`), category by category in the given order, each in
/// `density-class` groups by count class.
pub fn draw_counts(
    out: &mut String,
    grid: &Grid,
    categories: &[Category],
    counts: &Counts,
) -> Drawn {
    let cells = counts.cells;
    let counts = &counts.n;
    let max = counts.iter().copied().max().unwrap_or(0);
    let classes = density_classes(max.max(1));
    let mut drawn = Drawn {
        classes: classes.clone(),
        shades: Vec::new(),
        counts: Vec::new(),
    };
    out.push_str("<g class=\"density\" shape-rendering=\"crispEdges\">\n");
    for (k, category) in categories.iter().enumerate() {
        let counts = &counts[k * cells..(k + 1) * cells];
        let shades: Vec<String> = (0..classes.len())
            .map(|c| category.shade(c, classes.len()))
            .collect();
        drawn.counts.push(counts.iter().sum());
        let _ = writeln!(
            out,
            "<g class=\"density-category\" data-category=\"{}\">",
            category.name
        );
        for (c, shade) in shades.iter().enumerate() {
            let lo = classes[c];
            let hi = classes.get(c + 1).copied().unwrap_or(usize::MAX);
            let _ = writeln!(
                out,
                "<g class=\"density-class\" data-from=\"{lo}\" fill=\"{shade}\">"
            );
            for cy in 0..grid.ny {
                for cx in 0..grid.nx {
                    let n = counts[cy * grid.nx + cx];
                    if n >= lo && n < hi {
                        write_cell(out, grid.rect(cx, cy), category.inset, n);
                    }
                }
            }
            out.push_str("</g>\n");
        }
        out.push_str("</g>\n");
        drawn.shades.push(shades);
    }
    out.push_str("</g>\n");
    drawn
}

/// One cell's square (half its side, centred, when `inset`).
fn write_cell(out: &mut String, (x0, y0, x1, y1): (f64, f64, f64, f64), inset: bool, n: usize) {
    let (x0, y0, x1, y1) = if inset {
        let (qx, qy) = ((x1 - x0) / 4.0, (y1 - y0) / 4.0);
        (x0 + qx, y0 + qy, x1 - qx, y1 - qy)
    } else {
        (x0, y0, x1, y1)
    };
    let _ = writeln!(
        out,
        "<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" data-n=\"{n}\"/>",
        N(x0),
        N(y0),
        N(x1 - x0),
        N(y1 - y0)
    );
}

#[cfg(test)]
mod tests {
    use super::*;

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
