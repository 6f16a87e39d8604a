//! What the scatter plots (scores, biplot, outlier map) share: groups with their
//! colours and shapes, the choice of which rows are drawn one by one and which
//! are binned into a density, point labels, and the legend column.
//!
//! The rows are read only through [`crate::row_results::RowResults::scan`] (they may
//! be in a scratch file): one reading ([`gather`]) counts the groups, folds the
//! axis ranges and keeps the rows drawn one by one; a second
//! ([`draw_density`]) counts every row into a grid of fixed size. Neither holds
//! anything per row beyond the drawn points, so memory does not grow with the
//! number of rows.

//!
//! [`groups`] gives the rows their groups, colours and shapes; [`selection`]
//! reads the rows and chooses the ones drawn one by one; [`density`] bins
//! every row by category; [`layers`] tells each row's layer for checks;
//! [`labels`] places the ids beside points without overlap; [`legend`]
//! stacks the legend column.

mod density;
mod groups;
mod labels;
mod layers;
mod legend;
mod selection;

pub use density::{Binning, Category, Cell, Counts, Drawn, Grid, Sides, draw_counts, draw_density};
pub use groups::{Colour, Groups};
pub use labels::{
    Box2, HALO, Placement, Placements, Spot, draw_labels, place_apart, place_rows, write_labels,
};
pub use layers::{RowLayers, flag_categories, flag_category, row_layers};
pub use legend::Legend;
pub use selection::{Labelling, PointSelection, draw_points, gather};

/// Marker "radius" in pixels.
pub const MARK: f64 = 3.6;
