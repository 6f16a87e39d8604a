//! The command line: commands, options and what each prints.

use crate::analysis::{Prepared, Preprocessed, matrix_name};
use crate::error::Error;
use crate::run::{self, RunOptions, RunSummary};
use crate::text::{count, percent_figure};
use clap::{Parser, Subcommand};
use std::fmt::Write;
use std::path::PathBuf;

/// Principal component analysis from a recipe file: deterministic results, every
/// input and output hashed, and a manifest that says how they were made.
#[derive(Debug, Parser)]
#[command(name = "sextant", version, about, long_about = None)]
#[command(
    after_help = "Exit codes: 0 success, 1 the analysis failed, 2 the recipe or an input is invalid, 130 interrupted (Ctrl-C, SIGTERM or SIGHUP; unfinished results removed)."
)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

/// How the table is held while it is analysed. Neither setting changes a
/// result: both engines give the same bytes.
#[derive(Debug, Clone, clap::Args)]
pub struct EngineArgs {
    /// Memory the table's values may use, e.g. 2GB or 512MiB; larger tables are
    /// analysed in passes over a scratch file [default: a quarter of the
    /// machine's memory].
    #[arg(long, value_name = "SIZE", value_parser = crate::stream::parse_size)]
    memory_budget: Option<u64>,
    /// Which engine analyses the table: auto (by size, budget and recipe),
    /// in-memory, or passes (the table read in chunks, each statistic a pass).
    #[arg(long, value_enum, default_value = "auto")]
    engine: EngineName,
}

#[derive(Debug, Clone, Copy, clap::ValueEnum)]
enum EngineName {
    Auto,
    InMemory,
    Passes,
}

impl EngineArgs {
    fn options(&self) -> crate::stream::EngineOptions {
        use crate::stream::Engine;
        crate::stream::EngineOptions {
            engine: match self.engine {
                EngineName::Auto => Engine::Auto,
                EngineName::InMemory => Engine::InMemory,
                EngineName::Passes => Engine::Passes,
            },
            budget: self.memory_budget,
        }
    }
}

#[derive(Debug, Subcommand)]
pub enum Command {
    /// Run a recipe and write its results folder (tables and manifest.json).
    ///
    /// Results are written to a temporary folder and moved into place only when
    /// complete. An existing results folder is replaced only if it came from the
    /// same recipe and inputs, unless --replace is given.
    Run {
        /// The recipe file (TOML). Paths inside it are relative to its folder.
        recipe: PathBuf,
        /// Replace an existing results folder made from a different recipe or input.
        #[arg(long)]
        replace: bool,
        #[command(flatten)]
        engine: EngineArgs,
    },
    /// Check a recipe and its input table without computing the analysis.
    ///
    /// Reads the table, matches the recipe's column names and patterns, checks
    /// every cell's type, and runs the missing-value, transform and scaling steps,
    /// then prints what it found: rows, features kept and dropped, missing cells.
    Check {
        /// The recipe file (TOML).
        recipe: PathBuf,
        #[command(flatten)]
        engine: EngineArgs,
    },
    /// Print the analysis a recipe describes as numbered plain sentences.
    ///
    /// Every default is spelt out, so a reviewer can read this instead of the
    /// TOML. The input table is not read.
    Explain {
        /// The recipe file (TOML).
        recipe: PathBuf,
    },
    /// Re-hash every input and output named in a results folder's manifest.
    ///
    /// Reports each file as unchanged, changed or missing, and checks the
    /// manifest's own digest. Files the manifest does not name are reported as
    /// extra; a path outside the folders a manifest may name, or a file that is
    /// not a regular file, is refused and never opened; with an edited manifest
    /// nothing outside the results folder is opened. Exit code 0 when
    /// everything matches, 1 otherwise.
    Verify {
        /// A results folder (the one holding manifest.json).
        results: PathBuf,
        /// Also recompute the recorded recipe into a scratch folder and compare
        /// every output byte for byte.
        #[arg(long)]
        rerun: bool,
    },
    /// Compare two analyses for a reviewer: settings, inputs, components, scores.
    ///
    /// Each side is a results folder, a recipe (run in memory; nothing is
    /// written), or a recipe as committed in git: `REV:PATH` (PATH from the
    /// repository's top folder, or from the current folder when it starts with
    /// ./ or ../), or --rev REV with one recipe to compare its committed version
    /// with the working file. A committed recipe's relative paths start from its
    /// own folder; its input is the file committed at REV, else the working
    /// file, else (when it is gone) the other side's input, and a note says
    /// which was read.
    ///
    /// Opens with a headline (verdict, kept components, eigenvalues, largest
    /// principal angle, largest score change, flagged rows that entered or
    /// left), then one line per recipe setting in effect that differs
    /// (`plot[2].ellipse  0.95 → 0.99`; settings without effect under the
    /// recipe's choices are left out), inputs whose hash changed, eigenvalues
    /// and shares side by side, principal angles and the features whose
    /// loadings moved most.
    ///
    /// Exit codes: 0 when the comparison was made (with --exit-code: 0 when the
    /// analyses are the same, 1 when they differ: a setting in effect other than
    /// output.folder, an input or a result); 2 when a side is not a results
    /// folder or a valid recipe, or git cannot give the recipe; 1 also when a
    /// side's analysis fails (the message says so).
    Diff {
        /// The earlier analysis: a results folder, a recipe file or REV:PATH.
        a: PathBuf,
        /// The later analysis: a results folder, a recipe file or REV:PATH.
        b: Option<PathBuf>,
        /// Compare the recipe A as committed at this git revision with the file.
        #[arg(long, value_name = "REV")]
        rev: Option<String>,
        /// Output style.
        #[arg(long, value_enum, default_value = "text")]
        format: crate::diff::DiffFormat,
        /// Exit with 1 when the analyses differ and 0 when they are the same.
        #[arg(long)]
        exit_code: bool,
    },
    /// Score new rows with the model saved in a results folder.
    ///
    /// The new table is preprocessed exactly as the analysed rows were (training
    /// fill values, centre and scale; never re-estimated), projected on the saved
    /// loadings and given T² and SPE with flags against the saved limits for new
    /// rows. Columns are matched by name; extra columns are ignored and reported.
    Apply {
        /// A results folder written by `sextant run` (it holds model.json).
        results: PathBuf,
        /// The new table (CSV or TSV with a header row).
        table: PathBuf,
        /// Where to write the scores [default: a folder beside the results folder,
        /// named RESULTS-apply-TABLE after both].
        #[arg(long, value_name = "FOLDER")]
        out: Option<PathBuf>,
        /// Replace an existing folder made from another model or table.
        #[arg(long)]
        replace: bool,
        /// The table's field delimiter (one character, or `tab`) [default: the
        /// analysis' delimiter, or another found in the header when only it
        /// gives the model's features].
        #[arg(long, value_name = "CHAR", value_parser = crate::apply::parse_delimiter)]
        delimiter: Option<u8>,
        /// The table's decimal mark, `.` or `,` [default: the analysis' own
        /// (`input.decimal`); for a point, `,` when the features' cells are
        /// written with decimal commas and no points].
        #[arg(long, value_name = "MARK", value_parser = crate::apply::parse_decimal)]
        decimal: Option<u8>,
        /// A column (a date, a time or a sequence number) that orders the rows
        /// on the report's control chart [default: file order].
        #[arg(long, value_name = "COLUMN")]
        order: Option<String>,
    },
    /// Write the input table's current SHA-256 into the recipe (input.sha256).
    ///
    /// Comments and layout of the recipe are kept. Later runs and checks refuse a
    /// table whose hash differs from the pin.
    Pin {
        /// The recipe file (TOML).
        recipe: PathBuf,
    },
    /// Inspect a table and write a commented starter recipe that passes `check`.
    ///
    /// Reads the table, gives each column a role (id, group, feature or excluded)
    /// and writes a recipe whose comments give the reason for each choice and the
    /// other choices. Prints the role of every column and the next command to run.
    /// Never overwrites an existing file without --force.
    New {
        /// The table to inspect (CSV or TSV with a header row).
        data: PathBuf,
        /// Where to write the recipe: a file, or an existing folder to put NAME.toml
        /// in, NAME being the table's file name without extension [default:
        /// NAME.toml in the current folder, so a read-only data folder is never
        /// written to].
        #[arg(short, long, value_name = "RECIPE")]
        output: Option<PathBuf>,
        /// Replace an existing recipe file.
        #[arg(long)]
        force: bool,
    },
}

/// What a command prints and the exit code it ends with.
pub struct Outcome {
    pub text: String,
    pub code: i32,
}

impl From<String> for Outcome {
    fn from(text: String) -> Self {
        Outcome {
            text,
            code: crate::error::EXIT_OK,
        }
    }
}

/// Runs the parsed command.
pub fn execute(cli: Cli) -> Result<Outcome, Error> {
    Ok(match cli.command {
        Command::Run {
            recipe,
            replace,
            engine,
        } => describe_run(&run::run(
            &recipe,
            &RunOptions {
                replace,
                engine: engine.options(),
            },
        )?)
        .into(),
        Command::Check { recipe, engine } => {
            let prepared = run::prepare_with(&recipe, &engine.options())?;
            let pre = run::preprocess(&prepared)?;
            describe_check(&prepared, &pre).into()
        }
        Command::Explain { recipe } => {
            crate::recipe::explain::render(&crate::recipe::load(&recipe)?).into()
        }
        Command::Verify { results, rerun } => {
            let report = crate::verify::verify(&results, rerun)?;
            let code = if report.passed() {
                crate::error::EXIT_OK
            } else {
                crate::error::EXIT_FAILED
            };
            Outcome {
                text: crate::verify::describe(&results, &report),
                code,
            }
        }
        Command::Diff {
            a,
            b,
            rev,
            format,
            exit_code,
        } => {
            let (sa, sb, c) = crate::diff::diff(&crate::diff::DiffRequest { a, b, rev })?;
            Outcome {
                text: crate::diff::render_comparison(&sa, &sb, &c, format),
                code: if exit_code && c.differ {
                    crate::diff::EXIT_DIFFERENT
                } else {
                    crate::error::EXIT_OK
                },
            }
        }
        Command::Apply {
            results,
            table,
            out,
            replace,
            delimiter,
            decimal,
            order,
        } => {
            let batch = crate::apply::BatchOptions {
                delimiter,
                decimal,
                order,
            };
            let s = crate::apply::apply(
                &results,
                &table,
                &crate::apply::ApplyOptions {
                    out,
                    replace,
                    batch,
                },
            )?;
            describe_apply(&s).into()
        }
        Command::Pin { recipe } => {
            let (input, pinned) = crate::pin::pin(&recipe)?;
            let text = match pinned {
                crate::pin::Pinned::Added { hash } => {
                    format!("pinned {input} to sha256 {hash} in {}\n", recipe.display())
                }
                crate::pin::Pinned::Updated { old, hash } => {
                    format!(
                        "re-pinned {input}: sha256 {old} → {hash} in {}\n",
                        recipe.display()
                    )
                }
                crate::pin::Pinned::Unchanged { hash } => {
                    format!("{input} is already pinned to sha256 {hash}\n")
                }
            };
            text.into()
        }
        Command::New {
            data,
            output,
            force,
        } => crate::new_recipe::run_new(&data, output.as_deref(), force)?.into(),
    })
}

fn describe_input(out: &mut String, prepared: &Prepared, pre: &Preprocessed) {
    let plan = &prepared.plan;
    let table = &prepared.table;
    let _ = writeln!(
        out,
        "input      {}: {} rows, {} columns, sha256 {}",
        table.display,
        table.n_rows(),
        table.columns.len(),
        prepared.input.sha256
    );
    if let Some(id) = &plan.input.id {
        let _ = writeln!(out, "id         {id}");
    }
    if !plan.input.groups.is_empty() {
        let _ = writeln!(out, "groups     {}", plan.input.groups.join(", "));
    }
    for (column, why) in &plan.unused {
        let _ = writeln!(out, "unused     {column}: {why}");
    }
    let m = &pre.missing;
    let used = pre.scaled.names.len();
    let _ = writeln!(
        out,
        "features   {} selected, {used} used",
        plan.features.len()
    );
    for f in &m.features {
        if let Some(why) = &f.dropped {
            let _ = writeln!(
                out,
                "  dropped  {}: {} missing ({} %), {why}",
                f.feature,
                f.missing,
                percent_figure(f.share)
            );
        }
    }
    for name in &pre.scaling.dropped_constant {
        let _ = writeln!(out, "  dropped  {name}: constant");
    }
    let missing_cells: usize = m
        .features
        .iter()
        .filter(|f| f.dropped.is_none())
        .map(|f| f.missing)
        .sum();
    let _ = match m.method {
        crate::recipe::raw::MissingMethod::DropRows => writeln!(
            out,
            "missing    {} in used features; {} with a missing cell dropped, {} left",
            count(missing_cells, "cell", "cells"),
            count(m.rows_dropped, "row", "rows"),
            count(pre.scaled.n_rows(), "row", "rows")
        ),
        method => {
            let how = match method {
                crate::recipe::raw::MissingMethod::Median => "with the feature median".to_string(),
                crate::recipe::raw::MissingMethod::IterativePca => match &m.iterative_pca {
                    Some(r) if r.iterations == 0 => {
                        format!(
                            "by iterative PCA ({})",
                            count(r.components, "component", "components")
                        )
                    }
                    Some(r) => format!(
                        "by iterative PCA ({}, {}, {})",
                        count(r.components, "component", "components"),
                        count(r.iterations, "iteration", "iterations"),
                        if r.converged {
                            "converged"
                        } else {
                            "NOT converged"
                        }
                    ),
                    None => "by iterative PCA".to_string(),
                },
                crate::recipe::raw::MissingMethod::Knn => match m.knn_neighbours.unwrap_or(0) {
                    1 => "from the nearest row".to_string(),
                    k => format!("from the {k} nearest rows"),
                },
                _ => "with the feature mean".to_string(),
            };
            if missing_cells == 0 {
                writeln!(
                    out,
                    "missing    none in the used features, so nothing was filled (missing cells of new rows given to `apply` are filled {how})"
                )
            } else {
                writeln!(
                    out,
                    "missing    {} in used features filled {how}",
                    count(missing_cells, "cell", "cells")
                )
            }
        }
    };
    for f in m
        .features
        .iter()
        .filter(|f| f.dropped.is_none() && f.missing > 0)
    {
        let _ = writeln!(
            out,
            "  {:<24} {:>5} missing ({} %)",
            f.feature,
            f.missing,
            percent_figure(f.share)
        );
    }
    if !pre.transforms.is_empty() {
        let list: Vec<String> = pre
            .transforms
            .iter()
            .map(|t| format!("{} {}", t.transform_name(), t.feature))
            .collect();
        let _ = writeln!(out, "transform  {}", list.join(", "));
    }
    let _ = writeln!(
        out,
        "scaling    {} ({} matrix)",
        plan.scaling.name(),
        matrix_name(plan)
    );
}

/// The text `sextant check` prints.
pub fn describe_check(prepared: &Prepared, pre: &Preprocessed) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "recipe     {}: valid", prepared.recipe.path.display());
    describe_input(&mut out, prepared, pre);
    let _ = writeln!(out, "output     {}", prepared.plan.output.display());
    out
}

/// The text `sextant run` prints.
pub fn describe_run(s: &RunSummary) -> String {
    let mut out = String::new();
    if let Some(title) = &s.prepared.plan.title {
        let _ = writeln!(out, "{title}");
    }
    describe_input(&mut out, &s.prepared, &s.pre);
    let d = &s.analysis.decomposition;
    let sel = &s.analysis.selection;
    let kept: f64 = d.eigenvalues[..sel.kept].iter().sum::<f64>() / d.total_variance;
    let _ = writeln!(
        out,
        "components {} kept of {} computed, {} % of the variance ({}: {})",
        sel.kept,
        sel.computed,
        percent_figure(kept),
        sel.rule,
        sel.reason
    );
    for l in &s.analysis.diagnostics.limits {
        let _ = writeln!(
            out,
            "flagged    at {} %: {} above the T² limit, {} above the SPE limit",
            crate::outputs::tables::level_label(l.confidence),
            l.t2_flagged,
            l.spe_flagged
        );
    }
    let _ = writeln!(
        out,
        "           {} above a limit at some level; contributions.csv says which features made them so",
        count(s.analysis.diagnostics.flagged, "row", "rows")
    );
    for note in &s.analysis.diagnostics.notes {
        let _ = writeln!(out, "  note     {note}");
    }
    for w in &s.pre.missing.warnings {
        let _ = writeln!(out, "  warning  {w}");
    }
    for a in &sel.adjustments {
        let _ = writeln!(out, "  note     {a}");
    }
    let _ = writeln!(
        out,
        "results    {} ({} files and manifest.json)",
        s.prepared.plan.output.display(),
        s.outputs.len(),
    );
    // Two digests, each under the name it has where it is stored.
    let _ = writeln!(
        out,
        "digests    manifest digest {} (manifest.json's `digest`: recipe, inputs and every file)\n           results digest {} (shown in report.html: every file but the report and manifest)",
        s.digest,
        crate::outputs::render::results_digest(&s.outputs)
    );
    let _ = writeln!(out, "time       {:.3} s", s.seconds);
    for note in &s.notes {
        let _ = writeln!(out, "note       {note}");
    }
    out
}

/// The text `sextant apply` prints.
pub fn describe_apply(s: &crate::apply::ApplySummary) -> String {
    let mut out = String::new();
    let _ = writeln!(
        out,
        "table      {}: {}, {} scored",
        s.table,
        count(s.rows_in, "row", "rows"),
        s.rows_scored
    );
    if s.filled > 0 {
        let _ = writeln!(
            out,
            "filled     {} missing cells from the training model",
            s.filled
        );
    }
    for (confidence, t2, spe) in &s.flagged {
        let _ = writeln!(
            out,
            "flagged    at {} %: {t2} above the T² limit for new rows, {spe} above the SPE limit",
            crate::outputs::tables::level_label(*confidence)
        );
    }
    for note in &s.notes {
        let _ = writeln!(out, "note       {note}");
    }
    let _ = writeln!(
        out,
        "results    {} (digest {})",
        s.folder.display(),
        s.digest
    );
    out
}
