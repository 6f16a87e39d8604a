//! The figure's data, for checks and tests: in which layer each row of a
//! scatter plot is drawn. In density mode every finite row is counted in
//! exactly one density cell of exactly one category; the rows drawn as points
//! (the labelled ones) are drawn on top of their cells, never instead of
//! them. The same `Binning` draws the density, so what this reports is what
//! the figure shows.

use super::density::{Binning, Category, Cell, DENSITY_DARK, DENSITY_LIGHT, Sides};
use super::selection::PointSelection;
use crate::outputs::view::PlotView;
use crate::row_results::Batch;

/// Each row's layer in a density plot.
#[derive(Clone, Debug, Default)]
pub struct RowLayers {
    /// The density's categories, in drawing order.
    pub categories: Vec<String>,
    /// Each row's cell, in row order (`None`: left out for a coordinate that
    /// is not a finite number).
    pub cells: Vec<Option<Cell>>,
    /// The rows also drawn as points on top of their cells, ascending.
    pub points: Vec<usize>,
}

/// Reads the rows once more and records each row's cell.
pub fn row_layers(view: &PlotView, binning: &Binning, sel: &PointSelection) -> RowLayers {
    let mut cells = Vec::new();
    binning.scan(view, |row, cell| {
        debug_assert_eq!(row, cells.len());
        cells.push(cell);
    });
    let mut points: Vec<usize> = sel.points.iter().map(|p| p.row).collect();
    points.sort_unstable();
    RowLayers {
        categories: binning
            .categories
            .iter()
            .map(|c| c.name.to_string())
            .collect(),
        cells,
        points,
    }
}

/// Colour of the rows above a limit in the density of a score plot or biplot
/// (Okabe & Ito's vermilion, as the outlier map's rows above the SPE limit).
pub const ABOVE: &str = "#D55E00";

/// The two categories of a score plot's or biplot's density: rows within
/// the limits in grey-blue, rows above a limit in vermilion as smaller
/// squares in their cells' middle, so the grey cell under them stays visible.
pub fn flag_categories() -> Vec<Category> {
    vec![
        Category {
            name: "within the limits",
            light: DENSITY_LIGHT.into(),
            dark: DENSITY_DARK.into(),
            inset: false,
        },
        Category::tinted("above a limit", ABOVE, true),
    ]
}

/// A row's category among [`flag_categories`]: above a T² or SPE limit or not.
pub fn flag_category(view: &PlotView) -> impl Fn(&Batch, usize) -> (usize, Sides) + '_ {
    move |batch: &Batch, i: usize| {
        let flagged = view.is_flagged(batch.t2(i), batch.spe(i));
        (usize::from(flagged), Sides::default())
    }
}
