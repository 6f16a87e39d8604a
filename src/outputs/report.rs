//! The self-contained HTML report (being written).

use super::view::ReportView;

/// Renders the report page.
pub fn render(view: &ReportView) -> String {
    format!(
        "<!DOCTYPE html>\n<html><head><meta charset=\"utf-8\"><title>{}</title></head><body></body></html>\n",
        view.title
    )
}
