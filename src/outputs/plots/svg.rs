//! Writing SVG elements by hand, with fixed number formatting.
//!
//! Every number in our own elements goes through [`N`]: rounded to tenths of a
//! pixel and written from an integer, so the bytes depend on nothing but the
//! value (no `-0`, no exponent, no platform formatting). Transcendental functions
//! come from the `libm` crate, as elsewhere in sextant, so coordinates agree
//! bit for bit on every machine.

use std::fmt::{self, Display, Write};

/// Canvas size in pixels.
pub const WIDTH: u32 = 720;
pub const HEIGHT: u32 = 540;

/// Okabe & Ito (2008), "Color Universal Design": eight colours told apart by
/// readers with the common forms of colour-vision deficiency.
pub const OKABE_ITO: [&str; 8] = [
    "#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7", "#000000",
];
/// Points without a group colour.
pub const NEUTRAL: &str = "#8C8C8C";
/// Text and outlines.
pub const INK: &str = "#222222";
/// Secondary text and reference rules.
pub const MUTED: &str = "#5A5A5A";

/// A number written with at most one decimal (tenths of a pixel).
#[derive(Clone, Copy)]
pub struct N(pub f64);

impl Display for N {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let v = if self.0.is_finite() {
            self.0.clamp(-1e9, 1e9)
        } else {
            0.0
        };
        let tenths = (v * 10.0).round() as i64;
        if tenths < 0 {
            f.write_char('-')?;
        }
        let a = tenths.unsigned_abs();
        if a.is_multiple_of(10) {
            write!(f, "{}", a / 10)
        } else {
            write!(f, "{}.{}", a / 10, a % 10)
        }
    }
}

/// Escapes text for an SVG attribute or text node.
pub fn esc(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '&' => out.push_str("&amp;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&apos;"),
            c if (c as u32) < 0x20 && c != '\t' => out.push(' '),
            c => out.push(c),
        }
    }
    out
}

/// Shortens a text to at most `max` characters, ending in "…" when cut.
pub fn clip_text(text: &str, max: usize) -> String {
    if text.chars().count() <= max {
        text.to_string()
    } else {
        let mut s: String = text.chars().take(max.saturating_sub(1)).collect();
        s.push('…');
        s
    }
}

/// Estimated width in pixels of a text in a sans-serif font of `size` pixels
/// (SVG has no text metrics; this errs on the wide side).
pub fn text_width(text: &str, size: f64) -> f64 {
    0.58 * size * text.chars().count() as f64
}

/// Where a text is anchored horizontally.
#[derive(Clone, Copy, PartialEq, Eq, Debug)]
pub enum Anchor {
    Start,
    Middle,
    End,
}

impl Anchor {
    fn attr(self) -> &'static str {
        match self {
            Anchor::Start => "start",
            Anchor::Middle => "middle",
            Anchor::End => "end",
        }
    }
}

/// A text element; `y` is the baseline. `extra` is written verbatim (attributes).
pub fn text(out: &mut String, x: f64, y: f64, anchor: Anchor, content: &str, extra: &str) {
    let _ = write!(out, "<text x=\"{}\" y=\"{}\"", N(x), N(y));
    if anchor != Anchor::Start {
        let _ = write!(out, " text-anchor=\"{}\"", anchor.attr());
    }
    if !extra.is_empty() {
        out.push(' ');
        out.push_str(extra);
    }
    let _ = writeln!(out, ">{}</text>", esc(content));
}

/// A straight line.
pub fn line(out: &mut String, x1: f64, y1: f64, x2: f64, y2: f64, extra: &str) {
    let _ = write!(
        out,
        "<line x1=\"{}\" y1=\"{}\" x2=\"{}\" y2=\"{}\"",
        N(x1),
        N(y1),
        N(x2),
        N(y2)
    );
    if !extra.is_empty() {
        out.push(' ');
        out.push_str(extra);
    }
    out.push_str("/>\n");
}

/// A rectangle given by two corners (in any order).
pub fn rect(out: &mut String, x1: f64, y1: f64, x2: f64, y2: f64, extra: &str) {
    let (x, w) = (x1.min(x2), (x2 - x1).abs());
    let (y, h) = (y1.min(y2), (y2 - y1).abs());
    let _ = write!(
        out,
        "<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\"",
        N(x),
        N(y),
        N(w),
        N(h)
    );
    if !extra.is_empty() {
        out.push(' ');
        out.push_str(extra);
    }
    out.push_str("/>\n");
}

/// A polyline through pixel points.
pub fn polyline(out: &mut String, points: &[(f64, f64)], extra: &str) {
    out.push_str("<polyline points=\"");
    for (i, (x, y)) in points.iter().enumerate() {
        if i > 0 {
            out.push(' ');
        }
        let _ = write!(out, "{},{}", N(*x), N(*y));
    }
    out.push('"');
    if !extra.is_empty() {
        out.push(' ');
        out.push_str(extra);
    }
    out.push_str("/>\n");
}

/// Marker shapes: the second cue for groups, besides colour.
#[derive(Clone, Copy, PartialEq, Eq, Debug)]
pub enum Shape {
    Circle,
    Square,
    TriangleUp,
    Diamond,
    TriangleDown,
    Plus,
    Cross,
}

/// The shapes in the order groups take them.
pub const SHAPES: [Shape; 7] = [
    Shape::Circle,
    Shape::Square,
    Shape::TriangleUp,
    Shape::Diamond,
    Shape::TriangleDown,
    Shape::Plus,
    Shape::Cross,
];

/// Writes one marker of "radius" `r` centred on (x, y), filled by the enclosing
/// group. `extra` is written verbatim (e.g. a class and an outline).
pub fn marker(out: &mut String, shape: Shape, x: f64, y: f64, r: f64, extra: &str) {
    let tail = |out: &mut String| {
        if !extra.is_empty() {
            out.push(' ');
            out.push_str(extra);
        }
        out.push_str("/>\n");
    };
    match shape {
        Shape::Circle => {
            let _ = write!(
                out,
                "<circle cx=\"{}\" cy=\"{}\" r=\"{}\"",
                N(x),
                N(y),
                N(r)
            );
            tail(out);
        }
        Shape::Square => {
            let h = r * 0.89;
            let _ = write!(
                out,
                "<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\"",
                N(x - h),
                N(y - h),
                N(2.0 * h),
                N(2.0 * h)
            );
            tail(out);
        }
        _ => {
            // Vertices in units of r, relative to the centre.
            const TRIANGLE_UP: [(f64, f64); 3] = [(0.0, -1.25), (1.1, 0.65), (-1.1, 0.65)];
            const TRIANGLE_DOWN: [(f64, f64); 3] = [(0.0, 1.25), (1.1, -0.65), (-1.1, -0.65)];
            const DIAMOND: [(f64, f64); 4] = [(0.0, -1.25), (1.25, 0.0), (0.0, 1.25), (-1.25, 0.0)];
            const PLUS: [(f64, f64); 12] = [
                (-0.35, -1.2),
                (0.35, -1.2),
                (0.35, -0.35),
                (1.2, -0.35),
                (1.2, 0.35),
                (0.35, 0.35),
                (0.35, 1.2),
                (-0.35, 1.2),
                (-0.35, 0.35),
                (-1.2, 0.35),
                (-1.2, -0.35),
                (-0.35, -0.35),
            ];
            // √½, for the plus turned by 45° (a fixed constant, no trigonometry).
            const H: f64 = std::f64::consts::FRAC_1_SQRT_2;
            let turned: Vec<(f64, f64)>;
            let vertices: &[(f64, f64)] = match shape {
                Shape::TriangleUp => &TRIANGLE_UP,
                Shape::TriangleDown => &TRIANGLE_DOWN,
                Shape::Diamond => &DIAMOND,
                Shape::Plus => &PLUS,
                _ => {
                    turned = PLUS
                        .iter()
                        .map(|&(a, b)| ((a - b) * H, (a + b) * H))
                        .collect();
                    &turned
                }
            };
            // Absolute positions rounded to tenths; the path steps between them
            // relatively (shorter), from the rounded values so nothing drifts.
            let at = |(a, _): (f64, f64)| ((x + a * r) * 10.0).round() / 10.0;
            let bt = |(_, b): (f64, f64)| ((y + b * r) * 10.0).round() / 10.0;
            let (mut px, mut py) = (at(vertices[0]), bt(vertices[0]));
            let _ = write!(out, "<path d=\"M{} {}", N(px), N(py));
            for &v in &vertices[1..] {
                let (nx, ny) = (at(v), bt(v));
                let _ = write!(out, "l{} {}", N(nx - px), N(ny - py));
                (px, py) = (nx, ny);
            }
            out.push_str("z\"");
            tail(out);
        }
    }
}

/// An arrow from (x1, y1) to (x2, y2) as one open path: shaft and head.
pub fn arrow(out: &mut String, x1: f64, y1: f64, x2: f64, y2: f64, head: f64, extra: &str) {
    let (dx, dy) = (x2 - x1, y2 - y1);
    let len = (dx * dx + dy * dy).sqrt();
    let _ = write!(out, "<path d=\"M{} {}L{} {}", N(x1), N(y1), N(x2), N(y2));
    if len > 1e-9 {
        let (ux, uy) = (dx / len, dy / len);
        let h = head.min(0.6 * len);
        // The head's two strokes point back at ±25° from the shaft
        // (cos 25° ≈ 0.9063, sin 25° ≈ 0.4226; fixed constants, no trigonometry).
        let (c, s) = (0.906_307_787_036_649_9, 0.422_618_261_740_699_4);
        let (ax, ay) = (-(ux * c - uy * s) * h, -(uy * c + ux * s) * h);
        let (bx, by) = (-(ux * c + uy * s) * h, -(uy * c - ux * s) * h);
        let _ = write!(
            out,
            "M{} {}L{} {}L{} {}",
            N(x2 + ax),
            N(y2 + ay),
            N(x2),
            N(y2),
            N(x2 + bx),
            N(y2 + by)
        );
    }
    out.push('"');
    if !extra.is_empty() {
        out.push(' ');
        out.push_str(extra);
    }
    out.push_str("/>\n");
}

/// Linear blend of two "#RRGGBB" colours, `t` from 0 (a) to 1 (b).
pub fn blend(a: &str, b: &str, t: f64) -> String {
    let parse = |c: &str| {
        let v = u32::from_str_radix(c.trim_start_matches('#'), 16).unwrap_or(0);
        [(v >> 16) & 255, (v >> 8) & 255, v & 255]
    };
    let (ca, cb) = (parse(a), parse(b));
    let mut out = String::from("#");
    for i in 0..3 {
        let v = f64::from(ca[i]) + (f64::from(cb[i]) - f64::from(ca[i])) * t.clamp(0.0, 1.0);
        let _ = write!(out, "{:02X}", v.round() as u32);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_are_tenths_without_negative_zero() {
        assert_eq!(N(1.25).to_string(), "1.3");
        assert_eq!(N(-0.04).to_string(), "0");
        assert_eq!(N(-3.0).to_string(), "-3");
        assert_eq!(N(12.345).to_string(), "12.3");
        assert_eq!(N(f64::NAN).to_string(), "0");
    }

    #[test]
    fn blends_colours() {
        assert_eq!(blend("#000000", "#FFFFFF", 0.5), "#808080");
    }
}
