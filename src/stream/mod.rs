//! The engine: the analysis of a table read once, in chunks (hashed and
//! parsed at the same time), into the row store ([`crate::store::Store`]);
//! then each statistic is computed in a pass over the store (see [`passes`]),
//! and the methods that need the whole matrix take a matrix view of it. The
//! module keeps its old name, `stream`.
//!
//! The two engines of the command line differ only in where the store lives
//! ([`choose`], decided before the file is read):
//! - in memory (`--engine in-memory`) for files under [`PASSES_FROM`] whose
//!   estimated need ([`IN_MEMORY_FACTOR`] × the file size) fits the budget:
//!   the whole store stays in memory;
//! - in passes for larger files, when the recipe allows it ([`cannot_stream`]):
//!   the store keeps what fits half the budget and the rest goes to a scratch
//!   file;
//! - an error when the recipe needs the whole matrix and it would pass the
//!   budget: never a silent change of method.
//!
//! Either way the same code sums every number in the same order from the same
//! start, so the results folders are byte-identical (tests/engines.rs).

pub mod ingest;
pub mod passes;
pub mod unique;

use crate::store;

use crate::recipe::raw::{DecompositionMethod, Keep, MissingMethod, RawRecipe, ScalingMethod};

/// Which engine analyses the table.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Engine {
    /// Chosen from the file's size, the budget and the recipe.
    #[default]
    Auto,
    InMemory,
    Passes,
}

/// The engine settings of a run (command-line options; they never change a
/// result, only how it is computed, so they are not part of the recipe).
#[derive(Debug, Clone, Default)]
pub struct EngineOptions {
    pub engine: Engine,
    /// Bytes of memory the table's values may use; `None`: [`default_budget`].
    pub budget: Option<u64>,
}

/// Files at least this large are analysed in passes when the recipe allows it:
/// below it the in-memory engine is as fast and needs little memory anyway.
pub const PASSES_FROM: u64 = 32 << 20;

/// A run that holds the whole store (and for some methods a matrix view of it)
/// needs up to about this many times the size of the CSV file (measured on
/// tables of numbers with 7–10 significant digits, when the engine still held
/// the parsed columns and the scaled matrix; a bound on the safe side now).
pub const IN_MEMORY_FACTOR: u64 = 4;

/// How the table will be analysed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Choice {
    InMemory,
    /// In passes; the store keeps up to this many bytes of values in memory.
    Passes {
        keep_in_memory: u64,
    },
}

/// A quarter of the machine's physical memory (4 GiB where it cannot be read).
pub fn default_budget() -> u64 {
    physical_memory().map_or(4 << 30, |m| m / 4)
}

fn physical_memory() -> Option<u64> {
    let text = std::fs::read_to_string("/proc/meminfo").ok()?;
    let line = text.lines().find(|l| l.starts_with("MemTotal:"))?;
    let kib: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kib * 1024)
}

/// Why the passes engine cannot run this recipe, if it cannot.
pub fn cannot_stream(raw: &RawRecipe) -> Option<String> {
    let missing = raw.missing.method;
    if !matches!(missing, MissingMethod::Mean | MissingMethod::DropRows) {
        return Some(format!(
            "missing.method = \"{}\" needs the whole table in memory (\"mean\" and \"drop-rows\" work in passes)",
            missing.name()
        ));
    }
    let method = raw.components.method.as_ref().map(|m| *m.get_ref());
    matrix_reason(
        raw.scaling.method,
        method.unwrap_or_default(),
        raw.components.keep.as_ref().map(|k| k.get_ref()),
    )
}

/// Why the analysis needs the scaled rows as one matrix, if it does: the rule
/// both [`cannot_stream`] (before the table is read) and the passes (which
/// also take the matrix for a table with fewer rows than features) apply.
pub fn matrix_reason(
    scaling: ScalingMethod,
    method: DecompositionMethod,
    keep: Option<&Keep>,
) -> Option<String> {
    if !scaling.centers() {
        return Some(format!(
            "scaling.method = \"{}\" needs the table in memory (every centred scaling works in passes)",
            scaling.name()
        ));
    }
    match keep {
        Some(Keep::ParallelAnalysis) => {
            return Some(
                "components.keep = \"parallel-analysis\" permutes the whole table and needs it in memory"
                    .into(),
            );
        }
        Some(Keep::CrossValidation) => {
            return Some(
                "components.keep = \"cross-validation\" refits the model on parts of the table and needs it in memory"
                    .into(),
            );
        }
        _ => {}
    }
    if method == DecompositionMethod::Randomized {
        return Some("components.method = \"randomized\" runs in memory".into());
    }
    None
}

/// Why no engine can analyse a recipe under the command line's options.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Refusal {
    /// `--engine passes` with a recipe that needs the table in memory (the
    /// reason from [`cannot_stream`]).
    PassesNeedMemory(String),
    /// The in-memory engine would pass the budget and the recipe needs it.
    OverBudget(String),
}

impl Refusal {
    /// The error, naming the table.
    pub fn at(self, path: String) -> crate::error::EngineError {
        use crate::error::EngineError;
        match self {
            Refusal::PassesNeedMemory(reason) => EngineError::PassesNeedMemory { path, reason },
            Refusal::OverBudget(reason) => EngineError::OverBudget { path, reason },
        }
    }
}

/// Chooses the engine for a file of `size` bytes; `Err` says why the recipe
/// cannot be analysed with these options. Both refusals are the user's to fix
/// (an option or the recipe), and come before anything is read.
pub fn choose(raw: &RawRecipe, size: u64, options: &EngineOptions) -> Result<Choice, Refusal> {
    let budget = options.budget.unwrap_or_else(default_budget);
    // Half the budget for the values; the rest for scores, labels and outputs.
    let passes = Choice::Passes {
        keep_in_memory: budget / 2,
    };
    let need = size.saturating_mul(IN_MEMORY_FACTOR);
    match (options.engine, cannot_stream(raw)) {
        (Engine::InMemory, _) => Ok(Choice::InMemory),
        (Engine::Passes, None) => Ok(passes),
        (Engine::Passes, Some(why)) => Err(Refusal::PassesNeedMemory(why)),
        (Engine::Auto, None) if size >= PASSES_FROM || need > budget => Ok(passes),
        (Engine::Auto, Some(why)) if need > budget => Err(Refusal::OverBudget(format!(
            "the table needs about {} in memory, above the memory budget of {}, and it cannot be analysed in passes: {why}; raise --memory-budget or change the recipe",
            show_size(need),
            show_size(budget)
        ))),
        (Engine::Auto, _) => Ok(Choice::InMemory),
    }
}

/// Bytes of ids the check of the id column holds at most before it sorts them
/// into a scratch file: an eighth of the memory budget, between 1 and 64 MB.
fn id_run_bytes(store: &store::Store) -> usize {
    (store.limit() / 8).clamp(1 << 20, 64 << 20) as usize
}

/// Ids present and unique, checked on the ids kept in the store, in memory bounded by an eighth of the budget (an external merge sort,
/// [`unique`]); the first problem in row order is reported with its lines.
pub fn check_ids(
    table: &crate::table::Table,
    store: &store::Store,
    text_columns: &[usize],
    id: &str,
    scratch: &std::path::Path,
) -> Result<(), crate::error::Error> {
    use crate::error::{InputError, OutputError};
    let Some(c) = table.columns.iter().position(|c| c.name == id) else {
        return Ok(());
    };
    let Some(at) = text_columns.iter().position(|&t| t == c) else {
        return Ok(());
    };
    let texts = store.text_width();
    let io = |e| OutputError::io(scratch, e);
    let mut check = unique::IdCheck::new(scratch, id_run_bytes(store));
    store
        .pass(|chunk: &store::Chunk| {
            check.push((0..chunk.rows).map(|r| chunk.texts[r * texts + at].as_str()))
        })
        .map_err(io)?;
    let Some(problem) = check.finish().map_err(io)? else {
        return Ok(());
    };
    // The lines (and the repeated id) of the rows the problem names.
    let (row, first) = match problem {
        unique::IdProblem::Empty { row } => (row, row),
        unique::IdProblem::Repeat { row, first } => (row, first),
    };
    let (mut line, mut first_line, mut text) = (0, 0, String::new());
    let mut start = 0;
    store
        .pass(|chunk: &store::Chunk| -> std::io::Result<()> {
            if (start..start + chunk.rows).contains(&row) {
                line = chunk.lines[row - start];
                text = chunk.texts[(row - start) * texts + at].clone();
            }
            if (start..start + chunk.rows).contains(&first) {
                first_line = chunk.lines[first - start];
            }
            start += chunk.rows;
            Ok(())
        })
        .map_err(io)?;
    let path = table.display.clone();
    Err(match problem {
        unique::IdProblem::Empty { .. } => InputError::MissingId {
            path,
            line,
            column: id.into(),
        },
        unique::IdProblem::Repeat { .. } => InputError::DuplicateId {
            path,
            line,
            column: id.into(),
            id: text,
            first_line,
        },
    }
    .into())
}

/// Reads a size such as `512MB`, `2GB`, `1.5GiB`, `64KB` or a count of bytes
/// (KB, MB, GB are powers of 1,000; KiB, MiB, GiB of 1,024).
pub fn parse_size(text: &str) -> Result<u64, String> {
    let t = text.trim();
    let split = t
        .find(|c: char| !(c.is_ascii_digit() || c == '.'))
        .unwrap_or(t.len());
    let (number, unit) = t.split_at(split);
    let value: f64 = number
        .parse()
        .map_err(|_| format!("`{text}` is not a size such as 512MB or 2GiB"))?;
    let scale: f64 = match unit.trim().to_ascii_lowercase().as_str() {
        "" | "b" => 1.0,
        "kb" | "k" => 1e3,
        "mb" | "m" => 1e6,
        "gb" | "g" => 1e9,
        "tb" | "t" => 1e12,
        "kib" => 1024.0,
        "mib" => 1024.0 * 1024.0,
        "gib" => 1024.0 * 1024.0 * 1024.0,
        "tib" => 1024.0 * 1024.0 * 1024.0 * 1024.0,
        other => {
            return Err(format!(
                "unknown unit `{other}` in `{text}` (use B, KB, MB, GB, TB, KiB, MiB, GiB or TiB)"
            ));
        }
    };
    Ok((value * scale).round() as u64)
}

/// A byte count in readable units.
pub fn show_size(bytes: u64) -> String {
    let b = bytes as f64;
    if b >= 1e9 {
        format!("{:.1} GB", b / 1e9)
    } else if b >= 1e6 {
        format!("{:.0} MB", b / 1e6)
    } else {
        format!("{:.0} KB", b / 1e3)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sizes_read_both_kinds_of_unit() {
        assert_eq!(parse_size("512MB"), Ok(512_000_000));
        assert_eq!(parse_size("2 GiB"), Ok(2 << 30));
        assert_eq!(parse_size("1.5gb"), Ok(1_500_000_000));
        assert_eq!(parse_size("4096"), Ok(4096));
        assert!(parse_size("lots").is_err());
        assert!(parse_size("3 parsecs").is_err());
    }
}
