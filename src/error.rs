//! Error types for every layer, and the one place that maps them to exit codes.
//!
//! All wording lives in `Display`; variants carry the facts (file, line, column,
//! offending text) so a message can name the thing, the rule and the fix.

use std::fmt;
use std::path::PathBuf;

/// Exit code for success.
pub const EXIT_OK: i32 = 0;
/// Exit code when the analysis or a verification failed.
pub const EXIT_FAILED: i32 = 1;
/// Exit code when the recipe or an input is invalid.
pub const EXIT_INVALID: i32 = 2;

/// Any error sextant reports to the user.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    #[error(transparent)]
    Recipe(#[from] RecipeError),
    #[error(transparent)]
    Input(#[from] InputError),
    #[error(transparent)]
    Analysis(#[from] AnalysisError),
    #[error(transparent)]
    Output(#[from] OutputError),
}

impl Error {
    /// The documented exit code: 2 for a bad recipe or input (including a refused
    /// output folder), 1 when the computation or writing failed.
    pub fn exit_code(&self) -> i32 {
        match self {
            Error::Recipe(_) | Error::Input(_) => EXIT_INVALID,
            Error::Output(OutputError::Refused { .. }) => EXIT_INVALID,
            Error::Analysis(_) | Error::Output(_) => EXIT_FAILED,
        }
    }
}

/// A place in a text file, 1-based, with the text of that line for context.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Position {
    pub line: usize,
    pub column: usize,
    pub line_text: String,
}

impl Position {
    /// Locates byte offset `offset` in `text`. Columns count characters, not bytes.
    pub fn locate(text: &str, offset: usize) -> Position {
        let offset = offset.min(text.len());
        let before = &text[..offset];
        let line = before.matches('\n').count() + 1;
        let line_start = before.rfind('\n').map_or(0, |i| i + 1);
        let column = text[line_start..offset].chars().count() + 1;
        let line_text = text[line_start..]
            .split('\n')
            .next()
            .unwrap_or("")
            .trim_end_matches('\r')
            .to_string();
        Position {
            line,
            column,
            line_text,
        }
    }
}

/// A mistake in the recipe file, with its position when one is known.
#[derive(Debug)]
pub struct RecipeError {
    pub file: PathBuf,
    pub at: Option<Position>,
    pub problem: RecipeProblem,
}

impl std::error::Error for RecipeError {}

impl fmt::Display for RecipeError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let file = self.file.display();
        match &self.at {
            Some(at) => {
                writeln!(f, "{file}:{}:{}: {}", at.line, at.column, self.problem)?;
                let gutter = at.line.to_string().len();
                writeln!(f, "{:gutter$} |", "")?;
                writeln!(f, "{} | {}", at.line, at.line_text)?;
                write!(f, "{:gutter$} | {:>col$}", "", "^", col = at.column)
            }
            None => write!(f, "{file}: {}", self.problem),
        }
    }
}

/// What is wrong with a recipe.
#[derive(Debug, thiserror::Error)]
pub enum RecipeProblem {
    #[error("cannot read the recipe: {0}")]
    Read(std::io::Error),
    #[error("{0}")]
    Syntax(String),
    #[error("recipe format {found} is not supported; this version of sextant reads format = 1")]
    Format { found: i64 },
    #[error("`{key}` does not apply to a `{kind}` plot")]
    PlotKeyNotApplicable {
        key: &'static str,
        kind: &'static str,
    },
    #[error(
        "component {index} is beyond compute = {compute}; raise components.compute or choose a lower component"
    )]
    PlotComponentBeyondCompute { index: usize, compute: usize },
    #[error("component {index} is beyond the {available} components this data gives (its rank)")]
    PlotComponentBeyondRank { index: usize, available: usize },
    #[error("a loadings plot takes either `component` (bars) or `x` and `y` (scatter), not both")]
    PlotAxesAndComponent,
    #[error("x and y are both component {index}; choose two different components")]
    PlotSameAxes { index: usize },
    #[error(
        "color = `{column}` is not a group column; the groups are: {groups} (add it to input.groups)"
    )]
    PlotColorNotGroup { column: String, groups: String },
    #[error(
        "plot file `{file}` must be a plain file name ending in .svg (letters, digits, '-', '_', '.'); plots are written inside the results folder's plots/"
    )]
    PlotFileName { file: String },
    #[error("two plots would write plots/{file}; give one of them its own `file`")]
    PlotFileTwice { file: String },
    #[error("{key} is empty; give a name")]
    EmptyName { key: &'static str },
    #[error("output folder `{folder}` cannot be created: `{file}` is a file, not a folder")]
    OutputBlocked { folder: String, file: String },
    #[error("column `{name}` is not in the header of {table}{}", did_you_mean(.suggestion))]
    UnknownColumn {
        name: String,
        table: String,
        suggestion: Option<String>,
    },
    #[error("pattern `{pattern}` matches no column of {table}{}", did_you_mean(.suggestion))]
    NoMatch {
        pattern: String,
        table: String,
        suggestion: Option<String>,
    },
    #[error(
        "column `{name}` is used twice: as {first} and as {second}; a column can have one role"
    )]
    TwoRoles {
        name: String,
        first: &'static str,
        second: &'static str,
    },
    #[error(
        "feature `{name}` is given two transforms (`{first}` and `{second}`); choose one per feature"
    )]
    TwoTransforms {
        name: String,
        first: &'static str,
        second: &'static str,
    },
    #[error("transform `{transform}` names `{name}`, which is not a feature of this analysis")]
    TransformNotFeature {
        name: String,
        transform: &'static str,
    },
    #[error(
        "keep = {keep} asks for more components than compute = {compute}; raise compute or lower keep"
    )]
    KeepAboveCompute { keep: usize, compute: usize },
    #[error(
        "keep = {rule} {why}, but components.method = \"randomized\" computes only the leading components; give keep as a count such as 3, or use method = \"exact\""
    )]
    RandomizedNeedsCount { rule: String, why: &'static str },
    #[error(
        "components.method = \"randomized\" computes only the leading eigenvalues, so the SPE limit can only be Box's approximation (it needs the sum and the sum of squares of the dropped eigenvalues, both known exactly; Jackson–Mudholkar also needs their cubes): set diagnostics.spe_limit = \"box\", or use method = \"exact\""
    )]
    RandomizedNeedsBox,
    #[error(
        "[components.randomized] applies only with components.method = \"randomized\"; set the method or remove the table"
    )]
    RandomizedSettingsUnused,
    #[error(
        "keep = {keep}{} asks for more components than the data can give: at most {available} ({reason}); set components.keep",
        if *.default { " (the default)" } else { "" }
    )]
    KeepAboveRank {
        keep: usize,
        default: bool,
        available: usize,
        reason: String,
    },
    #[error(
        "output folder `{folder}` would contain {what} `{path}`; results are written into a folder of their own, which a rerun replaces"
    )]
    OutputContains {
        folder: String,
        what: &'static str,
        path: String,
    },
    #[error(
        "input.sha256 pins {path} to {expected}, but the file now hashes to {found}; if the change is intended, update the pin"
    )]
    PinMismatch {
        path: String,
        expected: String,
        found: String,
    },
}

fn did_you_mean(suggestion: &Option<String>) -> String {
    match suggestion {
        Some(s) => format!("; did you mean `{s}`?"),
        None => String::new(),
    }
}

/// A problem with an input table.
#[derive(Debug, thiserror::Error)]
pub enum InputError {
    #[error("{path}: cannot read the file: {source}")]
    Io {
        path: String,
        source: std::io::Error,
    },
    #[error(
        "{path}: the model's feature(s) {names} are not in the table's header; every feature the model was made with is needed"
    )]
    MissingFeatures { path: String, names: String },
    #[error("{path}: not a sextant results folder: {reason}")]
    NotResults { path: String, reason: String },
    #[error(
        "{path}: model.json cannot be used: `{field}` {problem}; rerun the analysis to write the model again"
    )]
    BadModel {
        path: String,
        field: String,
        problem: String,
    },
    #[error("{path}:{line}: {problem}; this is not a table sextant wrote (rerun the analysis)")]
    BadResultsTable {
        path: String,
        line: u64,
        problem: String,
    },
    #[error("{path}: the file is empty; expected a header row and data rows")]
    Empty { path: String },
    #[error("{path}:{line}: {message}")]
    Csv {
        path: String,
        line: u64,
        message: String,
    },
    #[error("{path}:{line}: the row has {found} fields but the header has {expected}")]
    Ragged {
        path: String,
        line: u64,
        expected: usize,
        found: usize,
    },
    #[error("{path}:1: header column {column} has no name; every column needs a name")]
    EmptyColumnName { path: String, column: usize },
    #[error(
        "{path}:1: column name `{name}` appears twice (columns {first} and {second}); names must be unique"
    )]
    DuplicateColumn {
        path: String,
        name: String,
        first: usize,
        second: usize,
    },
    #[error("{path}:{line}: column `{column}` has {}", describe_cell(.text))]
    NotNumeric {
        path: String,
        line: u64,
        column: String,
        text: String,
    },
    #[error(
        "{path}:{line}: column `{column}` has the non-finite value `{text}`; mark it as missing in input.missing or fix the cell"
    )]
    NonFinite {
        path: String,
        line: u64,
        column: String,
        text: String,
    },
    #[error("{path}:{line}: the id column `{column}` is empty; every row needs an id")]
    MissingId {
        path: String,
        line: u64,
        column: String,
    },
    #[error(
        "{path}:{line}: id `{id}` in column `{column}` already appeared at line {first_line}; ids must be unique"
    )]
    DuplicateId {
        path: String,
        line: u64,
        column: String,
        id: String,
        first_line: u64,
    },
    #[error("{path}: {rows} usable row(s){why}; at least 2 are needed")]
    TooFewRows {
        path: String,
        rows: usize,
        why: String,
    },
    #[error("{path}: no usable features{why}")]
    NoFeatures { path: String, why: String },
    #[error(
        "{path}:{line}: column `{column}` has the value {value} where `{transform}` needs {need}"
    )]
    BadTransformValue {
        path: String,
        line: u64,
        column: String,
        value: String,
        transform: &'static str,
        need: &'static str,
    },
    #[error(
        "{path}: feature `{column}` is constant ({value}), so `{scaling}` scaling would divide by zero; set scaling.constant_features = \"drop\" or exclude it"
    )]
    ConstantFeature {
        path: String,
        column: String,
        value: String,
        scaling: &'static str,
    },
}

impl InputError {
    /// The error for a cell of a numeric column that is not a finite number:
    /// `NonFinite` for texts such as "inf", `NotNumeric` otherwise.
    pub fn bad_cell(path: &str, line: u64, column: &str, text: String) -> InputError {
        let (path, column) = (path.to_string(), column.to_string());
        if text.parse::<f64>().is_ok() {
            InputError::NonFinite {
                path,
                line,
                column,
                text,
            }
        } else {
            InputError::NotNumeric {
                path,
                line,
                column,
                text,
            }
        }
    }
}

fn describe_cell(text: &str) -> String {
    if text.is_empty() {
        "an empty cell; add \"\" to input.missing if empty cells mean missing".into()
    } else if text.contains(',') && text.replace(',', ".").parse::<f64>().is_ok() {
        format!(
            "a non-numeric cell `{text}` (it looks like a decimal comma: sextant reads a point as the decimal mark)"
        )
    } else {
        format!(
            "a non-numeric cell `{text}`; add it to input.missing if it means missing, or exclude the column"
        )
    }
}

/// The computation could not produce a trustworthy answer.
#[derive(Debug, thiserror::Error)]
pub enum AnalysisError {
    #[error("missing cells cannot be filled: {reason}")]
    Imputation { reason: String },
    #[error("cross-validation cannot run: {reason}")]
    CrossValidation { reason: String },
    #[error(
        "{path}: feature `{column}` has values too large for double precision: {what} overflows; rescale it (a change of unit) or use unit-variance scaling"
    )]
    Overflow {
        path: String,
        column: String,
        what: &'static str,
    },
    #[error(
        "the eigendecomposition did not produce finite values; the scaled data may be degenerate"
    )]
    NotFinite,
    #[error(
        "the eigenvalues did not converge within {sweeps} QL sweeps per eigenvalue; the scaled data may be degenerate"
    )]
    NoConvergence { sweeps: usize },
    #[error("{path}: {reason}")]
    OverBudget { path: String, reason: String },
}

/// Writing results failed or was refused.
#[derive(Debug, thiserror::Error)]
pub enum OutputError {
    #[error("{path}: {source}")]
    Io {
        path: String,
        source: std::io::Error,
    },
    #[error("{path}: {reason}")]
    Refused { path: String, reason: String },
}

impl OutputError {
    pub fn io(path: &std::path::Path, source: std::io::Error) -> Self {
        OutputError::Io {
            path: path.display().to_string(),
            source,
        }
    }
}

/// A scratch file of the passes engine failed (its values are read back once per pass).
impl From<std::io::Error> for Error {
    fn from(source: std::io::Error) -> Error {
        InputError::Io {
            path: "the scratch file of the table's values".into(),
            source,
        }
        .into()
    }
}
