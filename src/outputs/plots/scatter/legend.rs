//! The legend column of a plot: entries stacked from the top, cut with a note
//! when the column is full.

use super::MARK;
use super::density::Drawn;
use super::groups::Groups;
use crate::outputs::plots::svg::{self, Anchor, INK, MUTED, N, Shape, text};
use std::fmt::Write;

/// The legend column: entries stacked from the top.
pub struct Legend {
    pub x: f64,
    pub y: f64,
    pub bottom: f64,
    pub body: String,
}

pub const LEGEND_ROW: f64 = 17.0;

/// Legend text size in pixels.
pub const LEGEND_SIZE: f64 = 10.5;

/// How many legend characters fit after a key in a column starting at `x`.
fn legend_chars(x: f64) -> usize {
    let room = f64::from(svg::WIDTH) - 6.0 - (x + 18.0);
    (room / (0.58 * LEGEND_SIZE)).max(4.0) as usize
}

impl Legend {
    pub fn new(x: f64, y: f64, bottom: f64) -> Legend {
        let mut body = String::new();
        let _ = writeln!(
            body,
            "<g class=\"legend\" font-size=\"{}\" fill=\"{INK}\">",
            N(LEGEND_SIZE)
        );
        Legend { x, y, bottom, body }
    }

    /// How many characters fit after a key, up to the canvas edge.
    pub fn chars(&self) -> usize {
        legend_chars(self.x)
    }

    pub fn rows_left(&self) -> usize {
        ((self.bottom - self.y) / LEGEND_ROW).max(0.0) as usize
    }

    pub fn heading(&mut self, title: &str) {
        text(
            &mut self.body,
            self.x,
            self.y + 10.8,
            Anchor::Start,
            &svg::clip_text(title, legend_chars(self.x) + 1),
            "font-weight=\"bold\"",
        );
        self.y += LEGEND_ROW + 1.0;
    }

    pub fn note(&mut self, note: &str) {
        text(
            &mut self.body,
            self.x,
            self.y + 10.8,
            Anchor::Start,
            &svg::clip_text(note, legend_chars(self.x) + 3),
            &format!("fill=\"{MUTED}\""),
        );
        self.y += LEGEND_ROW;
    }

    /// An entry with a marker of the given colour and shape.
    pub fn marker(&mut self, colour: &str, shape: Shape, outline: bool, label: &str) {
        let extra = if outline {
            format!("fill=\"{colour}\" stroke=\"#000000\" stroke-width=\"1.4\"")
        } else {
            format!("fill=\"{colour}\"")
        };
        svg::marker(
            &mut self.body,
            shape,
            self.x + 6.0,
            self.y + 7.0,
            MARK * 1.1,
            &extra,
        );
        self.entry_label(label);
    }

    /// The text of an entry beside its sample, then the next row.
    fn entry_label(&mut self, label: &str) {
        text(
            &mut self.body,
            self.x + 18.0,
            self.y + 10.8,
            Anchor::Start,
            &svg::clip_text(label, legend_chars(self.x)),
            "",
        );
        self.y += LEGEND_ROW;
    }

    /// A marker entry "name (count)": the count is never cut, a long name is.
    pub fn counted(&mut self, colour: &str, shape: Shape, name: &str, count: usize) {
        let count = format!(" ({count})");
        let room = self.chars().saturating_sub(count.chars().count()).max(3);
        let label = format!("{}{count}", svg::clip_text(name, room));
        self.marker(colour, shape, false, &label);
    }

    /// An entry with a short line sample (for rules and curves).
    pub fn rule(&mut self, colour: &str, dash: Option<&str>, width: f64, label: &str) {
        let dash = dash.map_or(String::new(), |d| format!(" stroke-dasharray=\"{d}\""));
        svg::line(
            &mut self.body,
            self.x,
            self.y + 7.0,
            self.x + 14.0,
            self.y + 7.0,
            &format!("stroke=\"{colour}\" stroke-width=\"{}\"{dash}", N(width)),
        );
        self.entry_label(label);
    }

    /// An entry with a filled square.
    pub fn swatch(&mut self, colour: &str, label: &str) {
        svg::rect(
            &mut self.body,
            self.x + 1.0,
            self.y + 2.0,
            self.x + 11.0,
            self.y + 12.0,
            &format!("fill=\"{colour}\""),
        );
        self.entry_label(label);
    }

    pub fn gap(&mut self) {
        self.y += LEGEND_ROW * 0.6;
    }

    /// The groups (as many as fit, keeping `reserve` rows for what follows).
    pub fn groups(&mut self, groups: &Groups, reserve: usize) {
        let Some(column) = &groups.column else {
            return;
        };
        self.heading(column);
        let room = self.rows_left().saturating_sub(reserve).max(2);
        let total = groups.names.len();
        let shown = if total <= room { total } else { room - 1 };
        for g in 0..shown {
            let (colour, shape) = groups.style(g);
            self.counted(colour, shape, &groups.names[g], groups.counts[g]);
        }
        if shown < total {
            self.note(&format!("… and {} more groups", total - shown));
        }
        self.gap();
    }

    /// The density: each category with its rows (a middle shade) when there
    /// are several, then the count classes, one swatch per category a line.
    pub fn density(&mut self, drawn: &Drawn, names: &[&str]) {
        let mid = drawn.classes.len() / 2;
        if names.len() > 1 {
            self.heading("rows (squares)");
            for (k, name) in names.iter().enumerate() {
                self.swatch(
                    &drawn.shades[k][mid],
                    &format!("{name} ({})", drawn.counts[k]),
                );
            }
            self.gap();
        }
        self.heading("rows per square");
        let classes = &drawn.classes;
        for (c, &lo) in classes.iter().enumerate() {
            let label = match classes.get(c + 1) {
                Some(&next) if next - 1 > lo => format!("{lo}–{}", next - 1),
                Some(_) => format!("{lo}"),
                None => format!("{lo} or more"),
            };
            let colours: Vec<&str> = drawn.shades.iter().map(|s| s[c].as_str()).collect();
            self.swatches(&colours, &label);
        }
        self.gap();
    }

    /// An entry with filled squares side by side, then its text.
    fn swatches(&mut self, colours: &[&str], label: &str) {
        for (k, colour) in colours.iter().enumerate() {
            let x = self.x + 1.0 + 12.0 * k as f64;
            svg::rect(
                &mut self.body,
                x,
                self.y + 2.0,
                x + 10.0,
                self.y + 12.0,
                &format!("fill=\"{colour}\""),
            );
        }
        let shift = 12.0 * colours.len().saturating_sub(1) as f64;
        text(
            &mut self.body,
            self.x + 18.0 + shift,
            self.y + 10.8,
            Anchor::Start,
            &svg::clip_text(label, legend_chars(self.x + shift)),
            "",
        );
        self.y += LEGEND_ROW;
    }

    pub fn finish(mut self) -> String {
        self.body.push_str("</g>\n");
        self.body
    }
}
