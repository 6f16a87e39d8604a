//! The input table: its header, and each column either as numbers or as text.
//!
//! Missing cells are `NaN` inside numeric columns; a real `NaN` or infinity in the
//! file is never accepted as data, so `NaN` always means "missing" here.

pub mod number;
pub mod parallel;
pub mod read;
mod scan;

pub use parallel::read_table_parallel;
pub use read::{ReadOptions, read_header, read_table};

/// The header row of a table, in file order.
#[derive(Debug, Clone)]
pub struct Header {
    pub names: Vec<String>,
}

/// A parsed table. Row `i` came from line `lines[i]` of the file.
#[derive(Debug, Clone)]
pub struct Table {
    /// The path as shown in messages (relative to the recipe, as written there).
    pub display: String,
    pub columns: Vec<Column>,
    /// Empty, with the columns' cells, when the passes engine keeps the rows
    /// in its store.
    pub lines: Vec<u64>,
    /// The number of rows.
    pub rows: usize,
}

impl Table {
    /// Assembles a table from its header names and, per column, the texts (for
    /// text columns) or the numbers (for the others).
    pub fn from_parts(
        display: &str,
        names: Vec<String>,
        texts: Vec<Vec<String>>,
        numbers: Vec<NumericColumn>,
        is_text: &[bool],
        lines: Vec<u64>,
    ) -> Table {
        let columns = names
            .into_iter()
            .zip(texts.into_iter().zip(numbers))
            .zip(is_text)
            .map(|((name, (text, number)), &text_kind)| Column {
                name,
                data: if text_kind {
                    ColumnData::Text(std::sync::Arc::new(text))
                } else {
                    ColumnData::Numeric(number)
                },
            })
            .collect();
        Table {
            display: display.to_string(),
            columns,
            rows: lines.len(),
            lines,
        }
    }

    pub fn n_rows(&self) -> usize {
        self.rows
    }

    pub fn column(&self, name: &str) -> Option<&Column> {
        self.columns.iter().find(|c| c.name == name)
    }
}

/// One column of the table.
#[derive(Debug, Clone)]
pub struct Column {
    pub name: String,
    pub data: ColumnData,
}

/// A column's cells, kept as text for id and group columns and as numbers otherwise.
#[derive(Debug, Clone)]
pub enum ColumnData {
    /// Shared, so that the views figures are drawn from can refer to a column
    /// of millions of labels instead of copying it.
    Text(std::sync::Arc<Vec<String>>),
    Numeric(NumericColumn),
}

/// A column read as numbers, with the count of cells that were not numbers.
#[derive(Debug, Clone, Default)]
pub struct NumericColumn {
    /// One value per row; `NaN` where the cell was missing or not a number.
    pub values: Vec<f64>,
    /// Cells that matched a missing-value text.
    pub missing: usize,
    /// Cells that were neither missing nor a finite number.
    pub bad: usize,
    /// The first such cell: its line and text.
    pub first_bad: Option<(u64, String)>,
}

impl NumericColumn {
    /// A column of `rows` cells counts as text when most of its non-missing cells
    /// are not numbers; a few bad cells in a mostly numeric column are mistakes
    /// worth an error.
    pub fn looks_textual(&self, rows: usize) -> bool {
        let present = rows - self.missing;
        self.bad > 0 && 2 * self.bad > present
    }

    /// Appends the cells of the rows that follow; the first bad cell in row
    /// order stays the one reported.
    pub fn append(&mut self, next: NumericColumn) {
        self.values.extend(next.values);
        self.missing += next.missing;
        self.bad += next.bad;
        if self.first_bad.is_none() {
            self.first_bad = next.first_bad;
        }
    }
}
