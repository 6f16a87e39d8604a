//! Axes and the chart frame: background, title, grid, ticks, tick labels and
//! axis titles, drawn by `plotters` through its SVG backend.
//!
//! Why the axes are our own [`Axis`] type rather than a plotters range: plotters
//! chooses tick values with `f64::powf` and `f64::log`, which call the
//! platform's maths library and may differ in the last bit between systems, and
//! it formats them with `{:?}`-style output. Our axes pick "nice" steps (1, 2 or
//! 5 × 10ᵉ) with multiplications and divisions only, and write each tick label
//! from an integer, so the labels are the same bytes everywhere. Plotters then
//! draws whatever ticks the axis reports.
//!
//! Plotters' SVG backend writes integer pixel positions, fixed colours and no
//! ids, so its part of the document is deterministic. Its only awkward number is
//! the font size (the requested size divided by 1.24, written in full); we
//! round it to tenths afterwards in [`finish`]. The marks themselves are written
//! by our own code (see `svg.rs`), since plotters cannot group them under a
//! class or write sub-pixel positions.

use super::svg::{self, HEIGHT, N, WIDTH, esc};
pub use crate::text::pow10;
use plotters::coord::ranged1d::{KeyPointHint, NoDefaultFormatting, Ranged, ValueFormatter};
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use std::ops::Range;

/// Plotters shrinks font sizes by this factor when writing SVG.
const PLOTTERS_FONT_FACTOR: f64 = 1.24;

/// Sizes of text, in pixels.
pub const TITLE_SIZE: f64 = 16.0;
pub const AXIS_TITLE_SIZE: f64 = 12.5;
pub const TICK_SIZE: f64 = 11.0;
pub const LABEL_SIZE: f64 = 10.0;

/// Top of the area below the title.
pub const TOP: i32 = 44;
/// Grid lines and the plotting area's outline.
const GRID: RGBColor = RGBColor(0xE4, 0xE4, 0xE4);
const AXIS_COLOUR: RGBColor = RGBColor(0x59, 0x59, 0x59);
const TEXT_COLOUR: RGBColor = RGBColor(0x22, 0x22, 0x22);

/// A step of 1, 2 or 5 (or 25 for 2.5) times a power of ten.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Step {
    /// 1, 2, 5 or 25 (2.5 is written as 25 × 10^(e−1)).
    pub mantissa: i64,
    pub exponent: i32,
}

/// Dashed lines through the origin of a panel, in their own `origin` group.
pub fn origin_lines(body: &mut String, panel: &Panel) {
    let zero = format!(
        "stroke=\"{}\" stroke-width=\"0.8\" stroke-dasharray=\"3 3\"",
        svg::MUTED
    );
    body.push_str("<g class=\"origin\">\n");
    svg::line(
        body,
        panel.px(0.0),
        panel.top,
        panel.px(0.0),
        panel.bottom,
        &zero,
    );
    svg::line(
        body,
        panel.left,
        panel.py(0.0),
        panel.right,
        panel.py(0.0),
        &zero,
    );
    body.push_str("</g>\n");
}

/// `raw` made usable (positive, finite, clamped) and the exponent e with
/// 10ᵉ ≤ raw < 10ᵉ⁺¹.
fn decade(raw: f64) -> (f64, i32) {
    let raw = if raw.is_finite() && raw > 0.0 {
        raw.clamp(1e-250, 1e250)
    } else {
        1.0
    };
    let mut e = 0;
    while pow10(e) > raw {
        e -= 1;
    }
    while pow10(e + 1) <= raw {
        e += 1;
    }
    (raw, e)
}

impl Step {
    pub fn value(self) -> f64 {
        self.mantissa as f64 * pow10(self.exponent)
    }

    /// The smallest step of 1, 2 or 5 × 10ᵉ that is at least `raw`.
    pub fn at_least(raw: f64) -> Step {
        let (raw, e) = decade(raw);
        for m in [1, 2, 5] {
            let s = Step {
                mantissa: m,
                exponent: e,
            };
            if s.value() >= raw {
                return s;
            }
        }
        Step {
            mantissa: 1,
            exponent: e + 1,
        }
    }

    /// The largest of 1, 2, 2.5 or 5 × 10ᵉ that is at most `raw` (for scale
    /// factors; 2.5 included so a factor is never far below what fits).
    pub fn at_most(raw: f64) -> Step {
        let (raw, e) = decade(raw);
        let candidates = [
            Step {
                mantissa: 5,
                exponent: e,
            },
            Step {
                mantissa: 25,
                exponent: e - 1,
            },
            Step {
                mantissa: 2,
                exponent: e,
            },
        ];
        candidates
            .into_iter()
            .find(|s| s.value() <= raw)
            .unwrap_or(Step {
                mantissa: 1,
                exponent: e,
            })
    }

    /// The multiple `i` of this step, written exactly from integers.
    pub fn label(self, i: i64) -> String {
        decimal(i.saturating_mul(self.mantissa), self.exponent)
    }
}

/// Writes j × 10ᵉ exactly: plain decimals for moderate exponents, otherwise
/// a mantissa and exponent ("1.5e9").
pub fn decimal(j: i64, e: i32) -> String {
    if j == 0 {
        return "0".into();
    }
    let sign = if j < 0 { "-" } else { "" };
    let digits = j.unsigned_abs().to_string();
    // Strip trailing zeros into the exponent so "50 × 10⁻¹" reads "5".
    let trimmed = digits.trim_end_matches('0');
    let e = e + (digits.len() - trimmed.len()) as i32;
    let digits = trimmed;
    if (0..=6).contains(&e) {
        format!("{sign}{digits}{}", "0".repeat(e as usize))
    } else if (-6..0).contains(&e) {
        let places = (-e) as usize;
        if digits.len() > places {
            let (a, b) = digits.split_at(digits.len() - places);
            format!("{sign}{a}.{b}")
        } else {
            format!("{sign}0.{}{digits}", "0".repeat(places - digits.len()))
        }
    } else {
        let n = e + digits.len() as i32 - 1;
        let (first, rest) = digits.split_at(1);
        if rest.is_empty() {
            format!("{sign}{first}e{n}")
        } else {
            format!("{sign}{first}.{rest}e{n}")
        }
    }
}

/// One axis: the value range shown and its ticks with their labels.
#[derive(Clone, Debug)]
pub struct Axis {
    pub lo: f64,
    pub hi: f64,
    pub ticks: Vec<(f64, String)>,
}

impl Axis {
    /// An axis over `lo..hi` with ticks every `step`.
    pub fn with_step(lo: f64, hi: f64, step: Step) -> Axis {
        let (lo, hi) = sane_range(lo, hi);
        let s = step.value();
        let first = (lo / s).ceil() as i64;
        let last = (hi / s).floor() as i64;
        let ticks = if last >= first && last - first <= 200 {
            (first..=last)
                .map(|i| (i as f64 * s, step.label(i)))
                .collect()
        } else {
            Vec::new()
        };
        Axis { lo, hi, ticks }
    }

    /// An axis over `lo..hi` with about `target` ticks.
    pub fn nice(lo: f64, hi: f64, target: f64) -> Axis {
        let (lo, hi) = sane_range(lo, hi);
        Axis::with_step(lo, hi, Step::at_least((hi - lo) / target.max(1.0)))
    }

    /// An axis with ticks given by the caller (possibly none).
    pub fn fixed(lo: f64, hi: f64, ticks: Vec<(f64, String)>) -> Axis {
        let (lo, hi) = sane_range(lo, hi);
        Axis { lo, hi, ticks }
    }

    /// The fraction of the way from `lo` to `hi`.
    pub fn frac(&self, v: f64) -> f64 {
        (v - self.lo) / (self.hi - self.lo)
    }
}

/// A finite, non-empty range.
pub fn sane_range(lo: f64, hi: f64) -> (f64, f64) {
    let (lo, hi) = match (lo.is_finite(), hi.is_finite()) {
        (true, true) => (lo.min(hi), lo.max(hi)),
        (true, false) => (lo, lo + 1.0),
        (false, true) => (hi - 1.0, hi),
        (false, false) => (0.0, 1.0),
    };
    if hi - lo > 1e-300 * lo.abs().max(hi.abs()).max(1.0) && hi > lo {
        (lo, hi)
    } else {
        let pad = if lo == 0.0 { 1.0 } else { lo.abs() * 0.1 };
        (lo - pad, hi + pad)
    }
}

/// A padded range around the finite values, with `include` forced in.
pub fn padded_range(values: impl Iterator<Item = f64>, include: &[f64], pad: f64) -> (f64, f64) {
    let mut extent = Extent::default();
    values.for_each(|v| extent.add(v));
    extent.padded(include, pad)
}

/// The smallest and largest finite value seen so far, folded in the order the
/// values come (so a range built while reading rows run by run is the range
/// [`padded_range`] gives over all of them at once, bit for bit).
#[derive(Clone, Copy, Debug)]
pub struct Extent {
    pub lo: f64,
    pub hi: f64,
}

impl Default for Extent {
    fn default() -> Extent {
        Extent {
            lo: f64::INFINITY,
            hi: f64::NEG_INFINITY,
        }
    }
}

impl Extent {
    /// Takes in a value (ignored when not finite).
    pub fn add(&mut self, v: f64) {
        if v.is_finite() {
            self.lo = self.lo.min(v);
            self.hi = self.hi.max(v);
        }
    }

    /// The range with `include` forced in, padded by `pad` of its width on
    /// each side; (-1, 1) when nothing finite was seen.
    pub fn padded(mut self, include: &[f64], pad: f64) -> (f64, f64) {
        include.iter().for_each(|&v| self.add(v));
        let (lo, hi) = (self.lo, self.hi);
        if !lo.is_finite() {
            return (-1.0, 1.0);
        }
        let (lo, hi) = sane_range(lo, hi);
        let p = (hi - lo) * pad;
        (lo - p, hi + p)
    }

    /// The largest absolute value seen, at least 0.
    pub fn reach(&self) -> f64 {
        if self.lo.is_finite() {
            0.0f64.max(self.lo.abs()).max(self.hi.abs())
        } else {
            0.0
        }
    }
}

impl Ranged for Axis {
    type FormatOption = NoDefaultFormatting;
    type ValueType = f64;

    fn map(&self, v: &f64, limit: (i32, i32)) -> i32 {
        let t = self.frac(*v);
        let t = if t.is_finite() {
            t.clamp(-10.0, 10.0)
        } else {
            0.0
        };
        limit.0 + (f64::from(limit.1 - limit.0) * t).round() as i32
    }

    fn key_points<H: KeyPointHint>(&self, _hint: H) -> Vec<f64> {
        self.ticks.iter().map(|t| t.0).collect()
    }

    fn range(&self) -> Range<f64> {
        self.lo..self.hi
    }
}

impl ValueFormatter<f64> for Axis {
    fn format_ext(&self, value: &f64) -> String {
        self.ticks
            .iter()
            .min_by(|a, b| (a.0 - value).abs().total_cmp(&(b.0 - value).abs()))
            .map(|t| t.1.clone())
            .unwrap_or_default()
    }
}

/// The plotting area of one panel in pixels, with its axes: maps data to pixels.
#[derive(Clone, Debug)]
pub struct Panel {
    pub left: f64,
    pub top: f64,
    pub right: f64,
    pub bottom: f64,
    pub x: Axis,
    pub y: Axis,
}

impl Panel {
    pub fn px(&self, v: f64) -> f64 {
        self.left + self.x.frac(v) * (self.right - self.left)
    }
    pub fn py(&self, v: f64) -> f64 {
        self.bottom - self.y.frac(v) * (self.bottom - self.top)
    }
    pub fn width(&self) -> f64 {
        self.right - self.left
    }
    pub fn height(&self) -> f64 {
        self.bottom - self.top
    }
    /// Pixels per data unit along x.
    pub fn x_scale(&self) -> f64 {
        self.width() / (self.x.hi - self.x.lo)
    }
    pub fn y_scale(&self) -> f64 {
        self.height() / (self.y.hi - self.y.lo)
    }
}

/// Where a chart goes and how big its label areas are, in pixels.
#[derive(Clone, Copy, Debug)]
pub struct Layout {
    /// The chart's outer box, label areas included: x0, y0, x1, y1.
    pub x0: i32,
    pub y0: i32,
    pub x1: i32,
    pub y1: i32,
    pub left: i32,
    pub bottom: i32,
    pub right: i32,
}

impl Layout {
    /// The plotting area's pixel box, the way plotters computes it (the last
    /// pixel row and column belong to the area).
    pub fn plot_box(&self) -> (f64, f64, f64, f64) {
        (
            f64::from(self.x0 + self.left),
            f64::from(self.y0),
            f64::from(self.x1 - self.right - 1),
            f64::from(self.y1 - self.bottom - 1),
        )
    }

    pub fn plot_width(&self) -> f64 {
        let (l, _, r, _) = self.plot_box();
        r - l
    }

    pub fn plot_height(&self) -> f64 {
        let (_, t, _, b) = self.plot_box();
        b - t
    }

    pub fn panel(&self, x: Axis, y: Axis) -> Panel {
        let (left, top, right, bottom) = self.plot_box();
        Panel {
            left,
            top,
            right,
            bottom,
            x,
            y,
        }
    }
}

/// One chart frame for plotters to draw.
pub struct Frame {
    pub layout: Layout,
    pub x: Axis,
    pub y: Axis,
    pub x_title: String,
    pub y_title: String,
    /// A second vertical axis on the right: its axis and title.
    pub right_axis: Option<(Axis, String)>,
    pub x_grid: bool,
    pub y_grid: bool,
}

impl Frame {
    pub fn new(layout: Layout, panel: &Panel, x_title: String, y_title: String) -> Frame {
        Frame {
            layout,
            x: panel.x.clone(),
            y: panel.y.clone(),
            x_title,
            y_title,
            right_axis: None,
            x_grid: true,
            y_grid: true,
        }
    }
}

fn font(size: f64) -> TextStyle<'static> {
    TextStyle::from(("sans-serif", size * PLOTTERS_FONT_FACTOR).into_font()).color(&TEXT_COLOUR)
}

/// Draws the background, the title and every frame with plotters; returns the
/// SVG document so far (closed).
pub fn backdrop(title: &str, frames: &[Frame]) -> String {
    let mut buf = String::new();
    {
        let root = SVGBackend::with_string(&mut buf, (WIDTH, HEIGHT)).into_drawing_area();
        let _ = root.fill(&WHITE);
        let title_style = TextStyle::from(
            (
                "sans-serif",
                TITLE_SIZE * PLOTTERS_FONT_FACTOR,
                FontStyle::Bold,
            )
                .into_font(),
        )
        .color(&TEXT_COLOUR)
        .pos(Pos::new(HPos::Center, VPos::Center));
        let _ = root.draw_text(
            &svg::clip_text(title, 78),
            &title_style,
            (WIDTH as i32 / 2, 22),
        );
        for f in frames {
            draw_frame(&root, f);
        }
        let _ = root.present();
    }
    buf
}

fn draw_frame<DB: DrawingBackend>(root: &DrawingArea<DB, plotters::coord::Shift>, f: &Frame) {
    let l = f.layout;
    let area = root
        .clone()
        .shrink((l.x0, l.y0), ((l.x1 - l.x0) as u32, (l.y1 - l.y0) as u32));
    let mut builder = ChartBuilder::on(&area);
    builder
        .x_label_area_size(l.bottom as u32)
        .y_label_area_size(l.left as u32);
    if l.right > 0 {
        builder.right_y_label_area_size(l.right as u32);
    }
    let Ok(chart) = builder.build_cartesian_2d(f.x.clone(), f.y.clone()) else {
        return;
    };
    let grid = ShapeStyle::from(&GRID).stroke_width(1);
    let axis = ShapeStyle::from(&AXIS_COLOUR).stroke_width(1);
    match &f.right_axis {
        None => {
            let mut chart = chart;
            let mut mesh = chart.configure_mesh();
            configure(&mut mesh, f, grid, axis);
            let _ = mesh.draw();
        }
        Some((right, right_title)) => {
            let blank = Axis::fixed(f.x.lo, f.x.hi, Vec::new());
            let mut chart = chart.set_secondary_coord(blank, right.clone());
            {
                let mut mesh = chart.configure_mesh();
                configure(&mut mesh, f, grid, axis);
                let _ = mesh.draw();
            }
            let _ = chart
                .configure_secondary_axes()
                .y_labels(right.ticks.len())
                .axis_style(axis)
                .label_style(font(TICK_SIZE))
                .axis_desc_style(font(AXIS_TITLE_SIZE))
                .y_desc(right_title.as_str())
                .draw();
        }
    }
}

fn configure<DB: DrawingBackend>(
    mesh: &mut plotters::chart::MeshStyle<'_, '_, Axis, Axis, DB>,
    f: &Frame,
    grid: ShapeStyle,
    axis: ShapeStyle,
) {
    mesh.x_labels(f.x.ticks.len())
        .y_labels(f.y.ticks.len())
        .bold_line_style(grid)
        .light_line_style(TRANSPARENT)
        .axis_style(axis)
        .label_style(font(TICK_SIZE))
        .axis_desc_style(font(AXIS_TITLE_SIZE));
    if !f.x_title.is_empty() {
        mesh.x_desc(f.x_title.as_str());
    }
    if !f.y_title.is_empty() {
        mesh.y_desc(f.y_title.as_str());
    }
    if !f.x_grid {
        mesh.disable_x_mesh();
    }
    if !f.y_grid {
        mesh.disable_y_mesh();
    }
}

/// Completes the document: a `<title>` and `<desc>` for screen readers, the
/// font sizes rounded, our own marks (`body`) after plotters' frame, and a
/// generic font family on the root.
pub fn finish(backdrop: String, title: &str, desc: &str, body: &str) -> String {
    let mut doc = round_font_sizes(&backdrop);
    let trimmed_len = doc.trim_end().len();
    doc.truncate(trimmed_len);
    if doc.ends_with("</svg>") {
        doc.truncate(doc.len() - "</svg>".len());
    }
    // Insert the title and description right after the root element's start tag.
    if let Some(end) = doc.find(">\n") {
        let head = format!(
            " font-family=\"sans-serif\">\n<title>{}</title>\n<desc>{}</desc>\n",
            esc(title),
            esc(desc)
        );
        doc.replace_range(end..end + 2, &head);
    }
    doc.push_str(body);
    doc.push_str("</svg>\n");
    doc
}

/// Rewrites every `font-size="…"` plotters wrote with tenths of a pixel.
fn round_font_sizes(doc: &str) -> String {
    const KEY: &str = "font-size=\"";
    let mut out = String::with_capacity(doc.len());
    let mut rest = doc;
    while let Some(i) = rest.find(KEY) {
        out.push_str(&rest[..i + KEY.len()]);
        rest = &rest[i + KEY.len()..];
        let end = rest.find('"').unwrap_or(rest.len());
        match rest[..end].parse::<f64>() {
            Ok(v) => out.push_str(&N(v).to_string()),
            Err(_) => out.push_str(&rest[..end]),
        }
        rest = &rest[end..];
    }
    out.push_str(rest);
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn steps_are_one_two_five() {
        assert_eq!(
            Step::at_least(0.37),
            Step {
                mantissa: 5,
                exponent: -1
            }
        );
        assert_eq!(
            Step::at_least(1.0),
            Step {
                mantissa: 1,
                exponent: 0
            }
        );
        assert_eq!(
            Step::at_least(120.0),
            Step {
                mantissa: 2,
                exponent: 2
            }
        );
        assert_eq!(Step::at_most(2.7).value(), 2.5);
        assert_eq!(Step::at_most(0.09).value(), 0.05);
    }

    #[test]
    fn decimals_are_exact() {
        assert_eq!(decimal(5, -1), "0.5");
        assert_eq!(decimal(-15, -1), "-1.5");
        assert_eq!(decimal(25, -3), "0.025");
        assert_eq!(decimal(3, 2), "300");
        assert_eq!(decimal(50, -1), "5");
        assert_eq!(decimal(15, 8), "1.5e9");
        assert_eq!(decimal(2, -8), "2e-8");
        assert_eq!(decimal(0, 4), "0");
    }

    #[test]
    fn axis_ticks_lie_inside() {
        let a = Axis::nice(-0.93, 2.4, 8.0);
        assert!(a.ticks.iter().all(|t| t.0 >= a.lo && t.0 <= a.hi));
        let labels: Vec<&str> = a.ticks.iter().map(|t| t.1.as_str()).collect();
        assert_eq!(labels, ["-0.5", "0", "0.5", "1", "1.5", "2"]);
    }
}
