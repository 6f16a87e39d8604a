//! The density of the rows not drawn one by one: a grid of fixed cells, each
//! shaded by its count class.

use super::selection::PointSelection;
use crate::outputs::plots::frame::Panel;
use crate::outputs::plots::svg::{N, blend};
use crate::outputs::view::PlotView;
use crate::row_results::Batch;
use std::fmt::Write;

/// Side of a density cell in pixels.
pub const CELL: f64 = 8.0;

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
    sel: &PointSelection,
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
