//! Deterministic SVG figures (being written).

use super::view::PlotView;
use crate::recipe::plots::PlotPlan;

/// Draws one plot as an SVG document.
pub fn render(_plan: &PlotPlan, _view: &PlotView) -> String {
    String::from("<svg xmlns=\"http://www.w3.org/2000/svg\"/>\n")
}

/// A caption in plain words for the report.
pub fn caption(plan: &PlotPlan, _view: &PlotView) -> String {
    plan.title
        .clone()
        .unwrap_or_else(|| plan.kind.name().to_string())
}
