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
    #[error(transparent)]
    Engine(#[from] EngineError),
}

impl Error {
    /// The documented exit code: 2 for a bad recipe or input (including a refused
    /// output folder), 1 when the computation or writing failed.
    pub fn exit_code(&self) -> i32 {
        match self {
            Error::Recipe(_) | Error::Input(_) | Error::Engine(_) => EXIT_INVALID,
            Error::Output(OutputError::Refused { .. } | OutputError::PinnedSince { .. }) => {
                EXIT_INVALID
            }
            // The recipe asks more of the table than it can give: a bad input.
            Error::Analysis(AnalysisError::ImputationComponents { .. }) => EXIT_INVALID,
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
                // The quoted line is shown as the terminal will show it, and
                // the caret counted on that text, so an escaped control
                // character before the column does not shift it.
                let before: String = at.line_text.chars().take(at.column - 1).collect();
                let col = terminal_safe(&before).chars().count() + 1;
                writeln!(f, "{:gutter$} |", "")?;
                writeln!(f, "{} | {}", at.line, terminal_safe(&at.line_text))?;
                write!(f, "{:gutter$} | {:>col$}", "", "^")
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
    #[error(
        "the recipe is not UTF-8 text (byte 0x{byte:02x} here); save it as UTF-8, as TOML requires"
    )]
    NotUtf8 { byte: u8 },
    #[error("{0}")]
    Syntax(String),
    #[error(
        "`[[{name}]]` starts an array of tables, but [{name}] is a single table: write [{name}] (only [[plot]] repeats)"
    )]
    ArrayOfTables { name: String },
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
        "{setting} has no effect because {key} is {value}{}: {setting} applies only with {key} = {needed}; set {key} accordingly or remove the {what}",
        if *.default { " (the default)" } else { "" }
    )]
    SettingHasNoEffect {
        setting: String,
        key: String,
        value: String,
        default: bool,
        needed: String,
        what: &'static str,
    },
    #[error(
        "output folder `{folder}` cannot be created: `{link}` is a symbolic link to `{target}`, which does not exist; create the link's target or point output.folder elsewhere"
    )]
    OutputDanglingLink {
        folder: String,
        link: String,
        target: String,
    },
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
    #[error("cannot add the pin: {reason}")]
    CannotPin { reason: String },
    #[error(
        "input.sha256 pins {path} to {expected}, but the file now hashes to {found}; if the change is intended, update the pin"
    )]
    PinMismatch {
        path: String,
        expected: String,
        found: String,
    },
    #[error(
        "input.{key} = \"{mark}\" is also the field delimiter, so a cell such as {example} would be split in two; {fix}"
    )]
    MarkIsDelimiter {
        key: &'static str,
        mark: char,
        example: &'static str,
        fix: &'static str,
    },
    #[error(
        "input.thousands and input.decimal are both \"{mark}\"; a number such as 1.234,5 needs two different marks"
    )]
    ThousandsIsDecimal { mark: char },
    #[error(
        "`{key}` is defined twice; its first definition is on line {first}: {}",
        if .key.starts_with('[') { "move these settings under the first header and remove this one" } else { "keep one of the two" }
    )]
    DefinedTwice { key: String, first: usize },
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
    #[error(
        "{path}:1: the file is UTF-16 text (it starts with a UTF-16 byte-order mark); save it as UTF-8 (a CSV export \"UTF-8\" option), which is what sextant reads"
    )]
    Utf16 { path: String },
    #[error(
        "{path}: the lines end with a carriage return alone (old Mac style), so the whole file reads as one line; save it with LF or CRLF line ends"
    )]
    CarriageReturnsOnly { path: String },
    #[error("{path}:{line}: {message}")]
    Csv {
        path: String,
        line: u64,
        message: String,
    },
    #[error(
        "{path}:{line}: a quote opened at line {line} is never closed, so the rest of the file would be one field; close the quote (write a quote inside a quoted field as \"\")"
    )]
    UnclosedQuote { path: String, line: u64 },
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
        "{path}:{line}: column `{column}` has `{text}`, a number beyond the range of double precision (about ±1.8e308); rescale the column (a change of unit) or fix the cell"
    )]
    OutOfRange {
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
    #[error("{path}: {}{why}; at least 2 are needed", counted(.rows, "usable row", "usable rows"))]
    TooFewRows {
        path: String,
        rows: usize,
        why: String,
    },
    #[error(
        "{path}: no row can be scored: the table has no data rows, or every row misses cells the model cannot fill; one scorable row is enough"
    )]
    NoRowsToScore { path: String },
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
    #[error(
        "{path}: none of the model's {features} is in the table's header; read with the delimiter {delimiter}, the header gives {fields}. The delimiter may be wrong: pass --delimiter (for example --delimiter \";\")"
    )]
    NoModelFeatures {
        path: String,
        /// "18 features", from `text::count`.
        features: String,
        /// "`,`" or "tab".
        delimiter: String,
        /// The header's fields as read, quoted and cut short.
        fields: String,
    },
    #[error(
        "{path}:{line}: column `{column}` has `{text}`, which is not a number written with the decimal mark `{decimal}` the batch is read with; pass --decimal with the mark the file uses, or fix the cell"
    )]
    DecimalMark {
        path: String,
        line: u64,
        column: String,
        text: String,
        decimal: char,
    },
    #[error(
        "{path}: the order column `{column}` is not in the table's header (it has {names}); pass --order with one of them"
    )]
    NoOrderColumn {
        path: String,
        column: String,
        names: String,
    },
    #[error("{spec}: {reason}")]
    GitRevision { spec: String, reason: String },
}

impl InputError {
    /// The error for a cell of a numeric column that is not a finite number:
    /// `NonFinite` for texts such as "inf", `NotNumeric` otherwise.
    pub fn bad_cell(path: &str, line: u64, column: &str, text: String) -> InputError {
        let (path, column) = (path.to_string(), column.to_string());
        let spelt = text.trim_start_matches(['+', '-']).to_ascii_lowercase();
        let named = spelt.starts_with("inf") || spelt.starts_with("nan");
        // A finite number here is bad only in the table's number format (a
        // point under a decimal comma, say): `describe_cell` says so.
        let overflow = text.parse::<f64>().is_ok_and(f64::is_infinite);
        if overflow && !named {
            InputError::OutOfRange {
                path,
                line,
                column,
                text,
            }
        } else if named && text.parse::<f64>().is_ok() {
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
    } else if text.chars().any(|c| c.is_numeric() && !c.is_ascii_digit())
        && text.chars().all(|c| c.is_numeric() || ".,+-".contains(c))
    {
        format!(
            "a non-numeric cell `{text}`: its digits are not the ASCII digits 0–9, the only ones sextant reads; convert the column"
        )
    } else if text.contains(',') && text.replace(',', ".").parse::<f64>().is_ok() {
        format!(
            "a non-numeric cell `{text}` (it looks like a decimal comma: set input.decimal = \",\" to read the table's numbers that way)"
        )
    } else if text.parse::<f64>().is_ok_and(f64::is_finite) {
        format!(
            "a non-numeric cell `{text}`: not a number in the table's format (input.decimal and input.thousands); fix the cell, or add it to input.missing if it means missing"
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
    #[error(
        "missing cells cannot be filled: iterative PCA with {} needs fewer components than both the features ({features}) and the rows minus one ({rows_less_one}), and leaving residual degrees of freedom; set a lower missing.iterative_pca.components or another missing.method",
        counted(.components, "component", "components")
    )]
    ImputationComponents {
        components: usize,
        features: usize,
        rows_less_one: usize,
    },
    #[error("cross-validation cannot run: {reason}")]
    CrossValidation { reason: String },
    #[error(
        "{path}: feature `{column}` has values too large for double precision: {} overflows; {}",
        .what.words(),
        overflow_hint(*.what, .scaling, *.bounded)
    )]
    Overflow {
        path: String,
        column: String,
        what: OverflowPart,
        /// The name of the scaling in effect, and whether it bounds the
        /// scaled values; they decide the hint.
        scaling: &'static str,
        bounded: bool,
    },
    #[error(
        "{path}: feature `{column}` varies too little for double precision: its values run from {min} to {max}, and the squares of their deviations underflow to zero, so its {spread} cannot be computed; rescale it (a change of unit, such as multiplying it by 1e200)"
    )]
    Underflow {
        path: String,
        column: String,
        min: String,
        max: String,
        spread: &'static str,
    },
    #[error(
        "the eigendecomposition did not produce finite values; the scaled data may be degenerate"
    )]
    NotFinite,
    #[error(
        "the eigenvalues did not converge within {sweeps} QL sweeps per eigenvalue; the scaled data may be degenerate"
    )]
    NoConvergence { sweeps: usize },
    #[error(
        "the singular values did not converge within {sweeps} Jacobi sweeps; the scaled data may be degenerate"
    )]
    JacobiNoConvergence { sweeps: usize },
}

/// What overflowed in [`AnalysisError::Overflow`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum OverflowPart {
    Sum,
    Spread,
    ScaledSquares,
}

impl OverflowPart {
    fn words(self) -> &'static str {
        match self {
            OverflowPart::Sum => "the sum of its values",
            OverflowPart::Spread => "its spread",
            OverflowPart::ScaledSquares => "the sum of squares of its scaled values",
        }
    }
}

/// Dividing by the standard deviation bounds the scaled values, so it helps
/// only when their squares overflowed under a scaling that does not already
/// divide by a spread; the sum and the spread overflow whatever the scaling.
fn overflow_hint(what: OverflowPart, scaling: &str, bounded: bool) -> String {
    let rescale = "rescale it (a change of unit)";
    if what == OverflowPart::ScaledSquares && !bounded {
        format!("{rescale}, or use scaling.method = \"unit-variance\" instead of \"{scaling}\"")
    } else {
        format!("{rescale}; the scaling (\"{scaling}\") cannot help here")
    }
}

/// The engine options of the command line cannot analyse this recipe or table.
#[derive(Debug, thiserror::Error)]
pub enum EngineError {
    #[error(
        "{path}: --engine passes cannot analyse this recipe: {reason}; use --engine auto or --engine in-memory, or change the recipe"
    )]
    PassesNeedMemory { path: String, reason: String },
    #[error(
        "{path}: the table has fewer rows ({rows}) than features ({features}); such tables are analysed in memory (their n × n matrix of row products){}",
        if *.forced { ": use --engine auto or --engine in-memory" } else { ", and its values do not fit the memory budget: use --engine in-memory or a larger --memory-budget" }
    )]
    TooWideForPasses {
        path: String,
        rows: usize,
        features: usize,
        forced: bool,
    },
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
    #[error(
        "{path}: holds the results of this recipe from before `sextant pin` added input.sha256: the same analysis of the same input, recorded without the pin; pass --replace to replace them with results that record the pin"
    )]
    PinnedSince { path: String },
}

impl OutputError {
    pub fn io(path: &std::path::Path, source: std::io::Error) -> Self {
        OutputError::Io {
            path: path.display().to_string(),
            source,
        }
    }
}

/// Text from the user (a cell, a column name, a recipe line) as it may be
/// shown on a terminal: control characters (C0, DEL, C1) and the invisible
/// characters that reorder or hide text (bidirectional overrides and
/// isolates, line and paragraph separators) become `\u{…}` escapes, so an
/// error message can neither drive the terminal nor show text in another
/// order than it has. Newlines and tabs stay: our own messages use them, and
/// they cannot change what the rest of a message looks like.
pub fn terminal_safe(text: &str) -> std::borrow::Cow<'_, str> {
    if !text.chars().any(needs_escape) {
        return std::borrow::Cow::Borrowed(text);
    }
    let mut out = String::with_capacity(text.len() + 8);
    for c in text.chars() {
        if needs_escape(c) {
            out.push_str(&format!("\\u{{{:x}}}", c as u32));
        } else {
            out.push(c);
        }
    }
    std::borrow::Cow::Owned(out)
}

fn needs_escape(c: char) -> bool {
    (c.is_control() && c != '\n' && c != '\t')
        || matches!(
            c,
            '\u{061c}' | '\u{200e}' | '\u{200f}' | '\u{2028}' | '\u{2029}' | '\u{202a}'
                ..='\u{202e}' | '\u{2066}'..='\u{2069}' | '\u{feff}'
        )
}

/// Only the scratch store's passes convert an I/O error with `?` (their
/// closures are generic over the error): reading back or writing our own
/// scratch file failed, which is a failure of the run (exit 1), not a bad
/// input. A user's file that cannot be read is [`InputError::Io`], always
/// built explicitly with its path.
impl From<std::io::Error> for Error {
    fn from(source: std::io::Error) -> Error {
        OutputError::Io {
            path: "the scratch file of the table's values".into(),
            source,
        }
        .into()
    }
}

/// A count and its noun for a message field (thiserror passes fields by
/// reference); the same rule as `text::count`, which sits on this floor.
fn counted(n: &usize, singular: &str, plural: &str) -> String {
    if *n == 1 {
        format!("1 {singular}")
    } else {
        format!("{n} {plural}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn control_and_reordering_characters_are_escaped() {
        assert_eq!(terminal_safe("plain, ok\n\tnext"), "plain, ok\n\tnext");
        assert_eq!(terminal_safe("a\u{1b}[31mb"), "a\\u{1b}[31mb");
        assert_eq!(terminal_safe("x\ry\u{7f}\u{9b}"), "x\\u{d}y\\u{7f}\\u{9b}");
        assert_eq!(terminal_safe("abc\u{202e}fed"), "abc\\u{202e}fed");
        // Escaping twice changes nothing more.
        let once = terminal_safe("\u{1b}\u{2066}").into_owned();
        assert_eq!(terminal_safe(&once), once);
    }

    #[test]
    fn the_caret_stays_under_the_column_after_escapes() {
        let err = RecipeError {
            file: "r.toml".into(),
            at: Some(Position::locate("id = \"\u{1b}x\" = 3\n", 10)),
            problem: RecipeProblem::Syntax("bad".into()),
        };
        let text = err.to_string();
        let lines: Vec<&str> = text.lines().collect();
        let code = lines[2].find("| ").unwrap() + 2;
        let caret = lines[3].find('^').unwrap();
        assert_eq!(&lines[2][caret..caret + 1], "=", "{text}");
        assert!(caret > code);
    }
}
