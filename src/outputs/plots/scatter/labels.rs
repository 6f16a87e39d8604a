//! Point labels: each id is placed at the first free spot around its point, so
//! labels overlap neither each other nor what is drawn. The scatter plots and
//! the arrows place theirs strictly ([`place_apart`]): a label with no free
//! spot is left out and named in the caption instead.

use super::MARK;
use super::selection::{Point, PointSelection};
use crate::outputs::plots::frame::{LABEL_SIZE, Panel};
use crate::outputs::plots::svg::{self, Anchor, INK, N, text, text_width};
use std::fmt::Write;

/// A box in pixels.
#[derive(Clone, Copy, Debug)]
pub struct Box2 {
    pub x0: f64,
    pub y0: f64,
    pub x1: f64,
    pub y1: f64,
}

impl Box2 {
    pub fn overlaps(&self, o: &Box2) -> bool {
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
    pub fn bounds(&self, width: f64) -> Box2 {
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

/// A label given its place: where its text goes and the box it takes.
#[derive(Clone, Debug)]
pub struct Placed {
    pub spot: Spot,
    pub text: String,
    pub bounds: Box2,
}

/// What strict placement gives: the labels placed, and the full texts of those
/// left out for want of a free spot (in the order given).
#[derive(Clone, Debug, Default)]
pub struct Placements {
    pub placed: Vec<Placed>,
    pub left_out: Vec<String>,
}

impl Placements {
    /// The boxes the placed labels take.
    pub fn boxes(&self) -> Vec<Box2> {
        self.placed.iter().map(|p| p.bounds).collect()
    }
}

/// Places labels one after another in the given order (so the result is
/// deterministic and earlier labels win room), each at the spot that stays
/// inside `bounds`, overlaps no label already placed nor any box in `taken`,
/// and covers the fewest `obstacles`; ties go to the earlier spot. A label
/// with no such spot is left out.
pub fn place_apart(
    items: &[Placement],
    obstacles: &[Box2],
    taken: &[Box2],
    bounds: (f64, f64, f64, f64),
) -> Placements {
    let (bx0, by0, bx1, by1) = bounds;
    let mut out = Placements::default();
    let mut placed: Vec<Box2> = taken.to_vec();
    for item in items {
        let label = svg::clip_text(&item.text, 24);
        let w = text_width(&label, LABEL_SIZE);
        let mut best: Option<(usize, Spot, Box2)> = None;
        for spot in &item.spots {
            let b = spot.bounds(w);
            let outside = b.x0 < bx0 || b.x1 > bx1 || b.y0 < by0 || b.y1 > by1;
            if outside || placed.iter().any(|p| p.overlaps(&b)) {
                continue;
            }
            let cost = obstacles.iter().filter(|p| p.overlaps(&b)).count();
            if best.as_ref().is_none_or(|(c, _, _)| cost < *c) {
                best = Some((cost, *spot, b));
            }
            if cost == 0 {
                break;
            }
        }
        match best {
            Some((_, spot, bounds)) => {
                placed.push(bounds);
                out.placed.push(Placed {
                    spot,
                    text: label,
                    bounds,
                });
            }
            None => out.left_out.push(item.text.clone()),
        }
    }
    out
}

/// Writes placed labels in a group of class `class` (nothing when none is placed).
pub fn write_labels(out: &mut String, class: &str, colour: &str, labels: &Placements) {
    if labels.placed.is_empty() {
        return;
    }
    let _ = writeln!(
        out,
        "<g class=\"{class}\" font-size=\"{}\" fill=\"{colour}\" {HALO}>",
        N(LABEL_SIZE)
    );
    for p in &labels.placed {
        text(out, p.spot.x, p.spot.y, p.spot.anchor, &p.text, "");
    }
    out.push_str("</g>\n");
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

/// Places the ids of the labelled rows beside their markers, clear of each
/// other and of `taken` (labels placed before), the most severe first.
pub fn place_rows(panel: &Panel, sel: &PointSelection, taken: &[Box2]) -> Placements {
    let at = |p: &Point| (panel.px(p.x), panel.py(p.y));
    let items: Vec<Placement> = sel
        .labelled
        .iter()
        .map(|&k| {
            let (x, y) = at(&sel.points[k]);
            Placement {
                text: sel.points[k].label.clone(),
                spots: spots_around(x, y),
            }
        })
        .collect();
    let obstacles: Vec<Box2> = sel
        .points
        .iter()
        .map(|p| {
            let (x, y) = at(p);
            Box2::around(x, y, MARK)
        })
        .collect();
    place_apart(
        &items,
        &obstacles,
        taken,
        (panel.left, panel.top, panel.right, panel.bottom),
    )
}
