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

//!
//! [`groups`] gives the rows their groups, colours and shapes; [`selection`]
//! reads the rows and chooses the ones drawn one by one; [`density`] bins the
//! others; [`labels`] places the ids beside points without overlap; [`legend`]
//! stacks the legend column.

mod density;
mod groups;
mod labels;
mod legend;
mod selection;

pub use density::draw_density;
pub use groups::{Colour, Groups};
pub use labels::{Box2, HALO, Placement, Spot, draw_labels, label_rows, place_labels};
pub use legend::Legend;
pub use selection::{MAX_FLAGGED_LABELS, MAX_INDIVIDUAL, PointSelection, draw_points, gather};

/// Marker "radius" in pixels.
pub const MARK: f64 = 3.6;
