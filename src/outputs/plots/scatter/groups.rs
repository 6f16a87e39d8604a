//! The groups of a scatter plot: counted while the rows are read, ordered
//! naturally by name, each with its colour and shape.

use crate::outputs::plots::svg::{NEUTRAL, OKABE_ITO, SHAPES, Shape};
use crate::outputs::view::PlotView;
use crate::row_results::Batch;
use std::cmp::Ordering;
use std::collections::BTreeMap;

/// The groups of a colour column, in natural order of their names, or one
/// anonymous group when there is no colour.
pub struct Groups {
    /// The column's name, `None` when points are not coloured.
    pub column: Option<String>,
    pub names: Vec<String>,
    /// Rows in each group (all rows, drawn or not).
    pub counts: Vec<usize>,
    /// Index of the group of rows with an empty value, if any (drawn grey).
    pub missing: Option<usize>,
}

/// Name shown for rows whose group cell is empty.
pub const MISSING_GROUP: &str = "(empty)";

/// Where the rows' groups come from.
pub enum Colour<'a> {
    /// No colour: one anonymous group of all rows.
    None,
    /// The values of the rows' group column `g`, called `name`.
    Column { g: usize, name: String },
    /// Fixed groups named in order (shown under the heading `column`), and the
    /// group of each row.
    Kinds {
        column: &'a str,
        names: &'a [&'a str],
        of: &'a dyn Fn(&Batch, usize) -> u32,
    },
}

impl Colour<'_> {
    /// The group column `color` of the view's rows; no colour when there is
    /// none or the rows have no such column.
    pub fn of(view: &PlotView, color: Option<&str>) -> Colour<'static> {
        match color.and_then(|c| view.rows.group_index(c).map(|g| (g, c))) {
            Some((g, name)) => Colour::Column {
                g,
                name: name.to_string(),
            },
            None => Colour::None,
        }
    }
}

/// Counts the groups while the rows are read: a column's distinct values get
/// a provisional number in the order they are first met, renumbered in natural
/// order of their names at the end (the number of rows never matters).
pub(super) struct GroupCount<'a> {
    colour: Colour<'a>,
    /// Column values: (rows, provisional number).
    seen: BTreeMap<String, (usize, u32)>,
    /// Rows per group for no colour (one) and for fixed kinds.
    counts: Vec<usize>,
}

impl<'a> GroupCount<'a> {
    pub(super) fn new(colour: Colour<'a>) -> GroupCount<'a> {
        let counts = match &colour {
            Colour::Kinds { names, .. } => vec![0; names.len()],
            _ => vec![0],
        };
        GroupCount {
            colour,
            seen: BTreeMap::new(),
            counts,
        }
    }

    /// Counts row `i` of the batch and gives its (provisional) group.
    pub(super) fn add(&mut self, batch: &Batch, i: usize) -> u32 {
        match &self.colour {
            Colour::None => {
                self.counts[0] += 1;
                0
            }
            Colour::Kinds { of, .. } => {
                let k = of(batch, i);
                self.counts[k as usize] += 1;
                k
            }
            Colour::Column { g, .. } => {
                let value = batch.group(*g, i);
                let next = self.seen.len() as u32;
                if let Some((count, id)) = self.seen.get_mut(value) {
                    *count += 1;
                    return *id;
                }
                self.seen.insert(value.to_string(), (1, next));
                next
            }
        }
    }

    /// The groups, and for each provisional number its final group.
    pub(super) fn finish(self) -> (Groups, Vec<u32>) {
        let (name, seen) = match self.colour {
            Colour::None => {
                let groups = Groups {
                    column: None,
                    names: vec!["all rows".into()],
                    counts: self.counts,
                    missing: None,
                };
                return (groups, vec![0]);
            }
            Colour::Kinds { column, names, .. } => {
                let groups = Groups {
                    column: Some(column.to_string()),
                    names: names.iter().map(|s| s.to_string()).collect(),
                    counts: self.counts,
                    missing: None,
                };
                let same = (0..names.len() as u32).collect();
                return (groups, same);
            }
            Colour::Column { name, .. } => (name, self.seen),
        };
        let mut names: Vec<&str> = seen
            .keys()
            .map(String::as_str)
            .filter(|s| !s.is_empty())
            .collect();
        names.sort_by(|a, b| natural_cmp(a, b));
        let missing_index = names.len() as u32;
        let mut remap = vec![missing_index; seen.len()];
        let mut counts = vec![0; names.len()];
        for (g, s) in names.iter().enumerate() {
            let (count, id) = seen[*s];
            remap[id as usize] = g as u32;
            counts[g] = count;
        }
        let mut out_names: Vec<String> = names.iter().map(|s| s.to_string()).collect();
        let missing = seen.get("").map(|&(count, _)| {
            out_names.push(MISSING_GROUP.into());
            counts.push(count);
            out_names.len() - 1
        });
        let groups = Groups {
            column: Some(name),
            names: out_names,
            counts,
            missing,
        };
        (groups, remap)
    }
}

impl Groups {
    /// Colour and shape of group `g`: Okabe & Ito colours in turn, shapes in
    /// turn, so beyond eight groups the shape still tells them apart (56
    /// distinct pairs before any repeats).
    pub fn style(&self, g: usize) -> (&'static str, Shape) {
        if self.column.is_none() || Some(g) == self.missing {
            (NEUTRAL, Shape::Circle)
        } else {
            (OKABE_ITO[g % OKABE_ITO.len()], SHAPES[g % SHAPES.len()])
        }
    }
}

/// Orders names with digit runs compared by value ("batch 2" before "batch 10"),
/// then by bytes, so the order is total and never depends on the rows.
pub fn natural_cmp(a: &str, b: &str) -> Ordering {
    let (mut x, mut y) = (a.as_bytes(), b.as_bytes());
    loop {
        match (x.first(), y.first()) {
            (None, None) => return a.cmp(b),
            (None, Some(_)) => return Ordering::Less,
            (Some(_), None) => return Ordering::Greater,
            (Some(c), Some(d)) if c.is_ascii_digit() && d.is_ascii_digit() => {
                let lx = x.iter().take_while(|c| c.is_ascii_digit()).count();
                let ly = y.iter().take_while(|c| c.is_ascii_digit()).count();
                let (dx, dy) = (&x[..lx], &y[..ly]);
                let tx = &dx[dx.iter().take_while(|&&c| c == b'0').count()..];
                let ty = &dy[dy.iter().take_while(|&&c| c == b'0').count()..];
                let o = tx.len().cmp(&ty.len()).then_with(|| tx.cmp(ty));
                if o != Ordering::Equal {
                    return o;
                }
                x = &x[lx..];
                y = &y[ly..];
            }
            (Some(c), Some(d)) => {
                if c != d {
                    return c.cmp(d);
                }
                x = &x[1..];
                y = &y[1..];
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn natural_order() {
        let mut v = vec!["b10", "b2", "a", "b02", "B1"];
        v.sort_by(|a, b| natural_cmp(a, b));
        assert_eq!(v, ["B1", "a", "b02", "b2", "b10"]);
    }
}
