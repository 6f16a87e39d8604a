//! The bad-input catalogue: one table of recipes and tables that must be
//! refused well, each case a recipe and its data side by side.
//!
//! Every case runs the real binary (`sextant check` and/or `sextant run`) in a
//! fresh temporary folder and checks
//!
//! * the exit code (2 for a bad recipe or input; the few accepted oddities are
//!   pinned with 0, the computations that fail with 1);
//! * that standard error names the file and, where one applies, the line and
//!   column (`at`, such as `recipe.toml:12:11:` or `data.csv:7:`);
//! * that it says what would be valid (`says`), and nothing it must not
//!   (`not`: raw control characters, Rust type names);
//! * that no panic text appears;
//! * that nothing was written: no results folder and no new entry beside it
//!   (staging folders, scratch files, lock files; see [`may_remain`]).
//!
//! Every mismatch is printed, then a summary line with the counts, before the
//! test fails; `cargo test --release --test catalogue -- --nocapture` prints the
//! summary of a passing run too.
//!
//! Adding a case: copy one below, change what differs from [`BAD`].
//! The base recipe's lines, for reading the positions:
//!
//! ```text
//!  1 format = 1
//!  2
//!  3 [input]
//!  4 file = "data.csv"
//!  5 id = "sample"
//!  6 groups = ["group"]
//!  7                      <- `Input(…)` lines start here
//!  8 [output]
//!  9 folder = "out"
//! 10
//! 11                      <- `Section(…)` starts here (its first key on line 12)
//! ```

use std::collections::BTreeSet;
use std::path::{Path, PathBuf};
use std::process::Command;

/// A small valid table: an id, a group and three numeric features.
const DATA: &str = "\
sample,group,a,b,c
s1,x,1.5,2.0,3.5
s2,x,2.0,1.5,4.0
s3,y,3.0,3.5,2.0
s4,y,4.5,2.5,1.0
s5,z,2.5,4.0,3.0
";

/// A valid recipe for [`DATA`].
const BASE: &str = "\
format = 1

[input]
file = \"data.csv\"
id = \"sample\"
groups = [\"group\"]

[output]
folder = \"out\"
";

/// The recipe of a case.
#[derive(Clone, Copy)]
enum Recipe {
    /// [`BASE`] as it is.
    Base,
    /// [`BASE`] with a section appended (from line 11).
    Section(&'static str),
    /// [`BASE`] with lines added to `[input]` (from line 7).
    Input(&'static str),
    /// [`BASE`] with one text replaced (it must occur).
    Replace(&'static str, &'static str),
    /// A recipe of its own.
    Whole(&'static str),
    /// A recipe of its own, as bytes (not UTF-8, say).
    Bytes(&'static [u8]),
}

/// The `data.csv` beside the recipe.
#[derive(Clone, Copy)]
enum Data {
    Base,
    Text(&'static str),
    Bytes(&'static [u8]),
    /// No data file.
    Absent,
}

/// Which commands run.
#[derive(Clone, Copy, PartialEq)]
enum Cmd {
    Check,
    Run,
    /// `check`, then `run`: both must give the code and the message.
    Both,
    /// A whole command line of its own (`apply`, `verify`, `run --replace`).
    Line(&'static [&'static str]),
}

struct Case {
    name: &'static str,
    recipe: Recipe,
    data: Data,
    cmd: Cmd,
    /// Options after the command, before the recipe (such as `--engine passes`).
    args: &'static [&'static str],
    /// Further files (path, text) and symbolic links (path, target), relative
    /// to the temporary folder.
    files: &'static [(&'static str, &'static str)],
    links: &'static [(&'static str, &'static str)],
    /// Made first: a genuine results folder `res` of the base recipe (its
    /// recipe is `made.toml`), before `files` and `links` are added.
    results: bool,
    code: i32,
    /// The file and position the message must name: `recipe.toml:12:11:`,
    /// `data.csv:7:`, or only `data.csv:` where no line applies.
    at: &'static str,
    /// Fragments saying what is wrong and what would be valid.
    says: &'static [&'static str],
    /// Fragments that must not appear.
    not: &'static [&'static str],
}

/// The defaults of a case: the base recipe and table, both commands, exit 2.
const BAD: Case = Case {
    name: "",
    recipe: Recipe::Base,
    data: Data::Base,
    cmd: Cmd::Both,
    args: &[],
    files: &[],
    links: &[],
    results: false,
    code: 2,
    at: "",
    says: &[],
    not: &[],
};

use Recipe::{Bytes, Input, Replace, Section, Whole};

const CASES: &[Case] = &[
    // -----------------------------------------------------------------------
    // Recipe syntax
    // -----------------------------------------------------------------------
    Case {
        name: "unclosed table header",
        recipe: Whole("format = 1\n\n[input\nfile = \"data.csv\"\n"),
        at: "recipe.toml:3:7:",
        says: &["expected `]`"],
        ..BAD
    },
    Case {
        name: "unterminated string",
        recipe: Replace("file = \"data.csv\"", "file = \"data.csv"),
        at: "recipe.toml:4:",
        says: &["expected `\"`"],
        ..BAD
    },
    Case {
        name: "bare word where a string goes",
        recipe: Replace("file = \"data.csv\"", "file = data.csv"),
        at: "recipe.toml:4:8:",
        says: &["string values must be quoted"],
        ..BAD
    },
    Case {
        name: "typographic quotes",
        recipe: Replace("id = \"sample\"", "id = \u{201c}sample\u{201d}"),
        at: "recipe.toml:5:6:",
        says: &["must be quoted"],
        ..BAD
    },
    Case {
        name: "single quotes are literal strings and fine",
        recipe: Replace("id = \"sample\"", "id = 'sample'"),
        cmd: Cmd::Check,
        code: 0,
        ..BAD
    },
    Case {
        name: "duplicate key",
        recipe: Input("id = \"sample\""),
        at: "recipe.toml:7:1:",
        says: &["`input.id` is defined twice; its first definition is on line 5"],
        ..BAD
    },
    Case {
        name: "duplicate table",
        recipe: Section("[output]\nfolder = \"other\""),
        at: "recipe.toml:11:",
        says: &["`[output]` is defined twice; its first definition is on line 8"],
        ..BAD
    },
    Case {
        name: "key without a value",
        recipe: Section("[components]\nkeep ="),
        at: "recipe.toml:12:",
        says: &["expected"],
        ..BAD
    },
    Case {
        name: "two values for one key",
        recipe: Section("[components]\nkeep = 3 4"),
        at: "recipe.toml:12:",
        says: &["expected"],
        ..BAD
    },
    Case {
        name: "a line that is not TOML",
        recipe: Section("this is not toml"),
        at: "recipe.toml:11:",
        says: &["expected `=`"],
        ..BAD
    },
    Case {
        name: "equals sign in a table header",
        recipe: Section("[components = 1]"),
        at: "recipe.toml:11:",
        says: &["expected `]`"],
        ..BAD
    },
    Case {
        name: "unclosed array",
        recipe: Replace("groups = [\"group\"]", "groups = [\"group\""),
        at: "recipe.toml:",
        says: &["expected"],
        ..BAD
    },
    Case {
        name: "empty recipe",
        recipe: Whole(""),
        at: "recipe.toml:1:1:",
        says: &["missing field `format`", "recipe reference"],
        ..BAD
    },
    Case {
        name: "no format line",
        recipe: Replace("format = 1\n", ""),
        at: "recipe.toml:1:1:",
        says: &["missing field `format`"],
        ..BAD
    },
    Case {
        name: "no [input] table",
        recipe: Whole("format = 1\n\n[output]\nfolder = \"out\"\n"),
        at: "recipe.toml:1:1:",
        says: &["missing field `input`"],
        ..BAD
    },
    Case {
        name: "no input.file",
        recipe: Replace("file = \"data.csv\"\n", ""),
        at: "recipe.toml:3:1:",
        says: &["missing field `file`"],
        ..BAD
    },
    Case {
        name: "format 2",
        recipe: Replace("format = 1", "format = 2"),
        at: "recipe.toml:1:10:",
        says: &["format 2 is not supported", "format = 1"],
        ..BAD
    },
    Case {
        name: "recipe that is not UTF-8",
        recipe: Bytes(b"format = 1\n\n[input]\nfile = \"data.csv\"\ntitle = \"caf\xe9\"\n"),
        at: "recipe.toml:5:",
        says: &["not UTF-8", "save it as UTF-8"],
        ..BAD
    },
    Case {
        name: "recipe with carriage returns only",
        recipe: Whole("format = 1\r[input]\rfile = \"data.csv\"\r[output]\rfolder = \"out\"\r"),
        at: "recipe.toml:1:",
        says: &["carriage return must be followed by newline"],
        not: &["\r"],
        ..BAD
    },
    Case {
        name: "recipe with a byte-order mark is fine",
        recipe: Whole(
            "\u{feff}format = 1\n[input]\nfile = \"data.csv\"\nid = \"sample\"\ngroups = [\"group\"]\n[output]\nfolder = \"out\"\n",
        ),
        cmd: Cmd::Check,
        code: 0,
        ..BAD
    },
    Case {
        name: "recipe file not found",
        recipe: Replace("data.csv", "data.csv"),
        args: &["nothere.toml"],
        at: "nothere.toml:",
        says: &["cannot read the recipe"],
        ..BAD
    },
    // -----------------------------------------------------------------------
    // Types
    // -----------------------------------------------------------------------
    Case {
        name: "float for a count",
        recipe: Section("[components]\ncompute = 1e3"),
        at: "recipe.toml:12:11:",
        says: &[
            "written as a decimal number",
            "a positive whole number",
            "write it as 1000",
        ],
        ..BAD
    },
    Case {
        name: "whole float for a count",
        recipe: Section("[components]\ncompute = 10.0"),
        at: "recipe.toml:12:11:",
        says: &["written as a decimal number", "write it as 10"],
        ..BAD
    },
    Case {
        name: "string for a count",
        recipe: Section("[components]\ncompute = \"ten\""),
        at: "recipe.toml:12:11:",
        says: &["a positive whole number"],
        not: &["usize", "i64"],
        ..BAD
    },
    Case {
        name: "negative count",
        recipe: Section("[components]\ncompute = -1"),
        at: "recipe.toml:12:11:",
        says: &["-1 is not a positive whole number"],
        ..BAD
    },
    Case {
        name: "float for the format",
        recipe: Replace("format = 1", "format = 1.0"),
        at: "recipe.toml:1:10:",
        says: &["a whole number such as 1"],
        ..BAD
    },
    Case {
        name: "string for the format",
        recipe: Replace("format = 1", "format = \"1\""),
        at: "recipe.toml:1:10:",
        says: &["a whole number such as 1"],
        not: &["i64"],
        ..BAD
    },
    Case {
        name: "fractional keep",
        recipe: Section("[components]\nkeep = 2.5"),
        at: "recipe.toml:12:8:",
        says: &["a component count such as 3"],
        ..BAD
    },
    Case {
        name: "negative keep",
        recipe: Section("[components]\nkeep = -2"),
        at: "recipe.toml:12:8:",
        says: &["not a positive count"],
        ..BAD
    },
    Case {
        name: "boolean keep",
        recipe: Section("[components]\nkeep = true"),
        at: "recipe.toml:12:8:",
        says: &["a component count such as 3", "\"kaiser\""],
        ..BAD
    },
    Case {
        name: "array where keep takes one value",
        recipe: Section("[components]\nkeep = [2]"),
        at: "recipe.toml:12:8:",
        says: &["an array", "a component count such as 3"],
        ..BAD
    },
    Case {
        name: "text for a share",
        recipe: Section("[missing]\nmax_feature_missing = \"half\""),
        at: "recipe.toml:12:23:",
        says: &["a number from 0 to 1"],
        not: &["f64"],
        ..BAD
    },
    Case {
        name: "array for a share",
        recipe: Section("[missing]\nmax_feature_missing = [0.3]"),
        at: "recipe.toml:12:23:",
        says: &["a number from 0 to 1"],
        ..BAD
    },
    Case {
        name: "text for a confidence level",
        recipe: Section("[diagnostics]\nconfidence = \"95%\""),
        at: "recipe.toml:12:14:",
        says: &["a confidence level such as 0.95"],
        ..BAD
    },
    Case {
        name: "string where the groups array goes",
        recipe: Replace("groups = [\"group\"]", "groups = \"group\""),
        at: "recipe.toml:6:10:",
        says: &["expected an array"],
        ..BAD
    },
    Case {
        name: "string where the features array goes",
        recipe: Input("features = \"a\""),
        at: "recipe.toml:7:12:",
        says: &["expected an array"],
        ..BAD
    },
    Case {
        name: "string where the missing texts go",
        recipe: Input("missing = \"NA\""),
        at: "recipe.toml:7:11:",
        says: &["expected an array"],
        ..BAD
    },
    Case {
        name: "string where the [input] table goes",
        recipe: Whole("format = 1\ninput = \"data.csv\"\n\n[output]\nfolder = \"out\"\n"),
        at: "recipe.toml:2:9:",
        says: &["a table, [input]"],
        not: &["struct", "Raw"],
        ..BAD
    },
    Case {
        name: "string where the [scaling] table goes",
        recipe: Replace("format = 1\n", "format = 1\nscaling = \"center\"\n"),
        at: "recipe.toml:2:11:",
        says: &["a table, [scaling]"],
        not: &["struct", "Raw"],
        ..BAD
    },
    Case {
        name: "array of tables where one table goes",
        recipe: Section("[[missing]]\nmethod = \"mean\""),
        at: "recipe.toml:11:1:",
        says: &["`[[missing]]`", "write [missing]"],
        not: &["struct", "Raw"],
        ..BAD
    },
    Case {
        name: "number for the title",
        recipe: Replace("format = 1\n", "format = 1\ntitle = 3\n"),
        at: "recipe.toml:2:9:",
        says: &["expected a string"],
        ..BAD
    },
    Case {
        name: "float for max_iterations",
        recipe: Section(
            "[missing]\nmethod = \"iterative-pca\"\n\n[missing.iterative_pca]\nmax_iterations = 1.5",
        ),
        at: "recipe.toml:15:18:",
        says: &["whole number"],
        ..BAD
    },
    Case {
        name: "text for the tolerance",
        recipe: Section(
            "[missing]\nmethod = \"iterative-pca\"\n\n[missing.iterative_pca]\ntolerance = \"small\"",
        ),
        at: "recipe.toml:15:13:",
        says: &["a small positive number such as 1e-12"],
        ..BAD
    },
    Case {
        name: "text for allow_unconverged",
        recipe: Section(
            "[missing]\nmethod = \"iterative-pca\"\n\n[missing.iterative_pca]\nallow_unconverged = \"yes\"",
        ),
        at: "recipe.toml:15:21:",
        says: &["a boolean"],
        ..BAD
    },
    Case {
        name: "negative seed",
        recipe: Section(
            "[components]\nkeep = \"parallel-analysis\"\n\n[components.parallel_analysis]\nseed = -1",
        ),
        at: "recipe.toml:15:8:",
        says: &["not a seed", "whole number from 0"],
        not: &["u64"],
        ..BAD
    },
    Case {
        name: "float seed",
        recipe: Section(
            "[components]\nkeep = \"parallel-analysis\"\n\n[components.parallel_analysis]\nseed = 1.5",
        ),
        at: "recipe.toml:15:8:",
        says: &["whole number"],
        not: &["u64"],
        ..BAD
    },
    Case {
        name: "float for oversampling",
        recipe: Section(
            "[components]\nmethod = \"randomized\"\nkeep = 2\n\n[components.randomized]\noversampling = 2.0\n\n[diagnostics]\nspe_limit = \"box\"",
        ),
        at: "recipe.toml:16:16:",
        says: &["a whole number from 0 to 1000"],
        ..BAD
    },
    Case {
        name: "negative oversampling",
        recipe: Section(
            "[components]\nmethod = \"randomized\"\nkeep = 2\n\n[components.randomized]\noversampling = -1\n\n[diagnostics]\nspe_limit = \"box\"",
        ),
        at: "recipe.toml:16:16:",
        says: &["-1 is not a whole number from 0 to 1000"],
        ..BAD
    },
    Case {
        name: "text for the delimiter's one character",
        recipe: Input("delimiter = \";;\""),
        at: "recipe.toml:7:13:",
        says: &["not one ASCII character"],
        ..BAD
    },
    Case {
        name: "empty delimiter",
        recipe: Input("delimiter = \"\""),
        at: "recipe.toml:7:13:",
        says: &["not one ASCII character"],
        ..BAD
    },
    Case {
        name: "quote as the delimiter",
        recipe: Input("delimiter = '\"'"),
        at: "recipe.toml:7:13:",
        says: &["not one ASCII character", "\";\""],
        ..BAD
    },
    Case {
        name: "pin that is not a digest",
        recipe: Input("sha256 = \"abc\""),
        at: "recipe.toml:7:10:",
        says: &["64 hexadecimal digits"],
        ..BAD
    },
    Case {
        name: "number for a plot component",
        recipe: Section("[[plot]]\nkind = \"loadings\"\ncomponent = \"first\""),
        at: "recipe.toml:13:13:",
        says: &["a positive whole number"],
        ..BAD
    },
    // -----------------------------------------------------------------------
    // Unknown keys, one in every table of the recipe
    // -----------------------------------------------------------------------
    Case {
        name: "unknown top-level key",
        recipe: Replace("format = 1\n", "format = 1\ncolour = \"blue\"\n"),
        at: "recipe.toml:2:1:",
        says: &["`colour`", "expected one of `format`"],
        ..BAD
    },
    Case {
        name: "unknown top-level table",
        recipe: Section("[outputs]\nfolder = \"x\""),
        at: "recipe.toml:11:",
        says: &["`outputs`", "`output`"],
        ..BAD
    },
    Case {
        name: "unknown key in [input]",
        recipe: Input("ids = \"sample\""),
        at: "recipe.toml:7:1:",
        says: &["unknown field `ids`", "`id`", "`delimiter`"],
        ..BAD
    },
    Case {
        name: "unknown table under [input]",
        recipe: Section("[input.x]\ny = 1"),
        at: "recipe.toml:11:",
        says: &["unknown field `x`", "`file`"],
        ..BAD
    },
    Case {
        name: "unknown key in [missing]",
        recipe: Section("[missing]\nmethd = \"mean\""),
        at: "recipe.toml:12:1:",
        says: &["unknown field `methd`", "`method`", "`max_feature_missing`"],
        ..BAD
    },
    Case {
        name: "unknown key in [missing.iterative_pca]",
        recipe: Section(
            "[missing]\nmethod = \"iterative-pca\"\n\n[missing.iterative_pca]\niterations = 5",
        ),
        at: "recipe.toml:15:1:",
        says: &["unknown field `iterations`", "`max_iterations`"],
        ..BAD
    },
    Case {
        name: "unknown key in [missing.knn]",
        recipe: Section("[missing]\nmethod = \"knn\"\n\n[missing.knn]\nk = 3"),
        at: "recipe.toml:15:1:",
        says: &["unknown field `k`", "`neighbours`"],
        ..BAD
    },
    Case {
        name: "unknown key in [transform]",
        recipe: Section("[transform]\nlog = [\"a\"]"),
        at: "recipe.toml:12:1:",
        says: &["unknown field `log`", "`log10`", "`ln`", "`sqrt`"],
        ..BAD
    },
    Case {
        name: "unknown key in [scaling]",
        recipe: Section("[scaling]\ncentre = true"),
        at: "recipe.toml:12:1:",
        says: &["unknown field `centre`", "`method`", "`constant_features`"],
        ..BAD
    },
    Case {
        name: "unknown key in [components]",
        recipe: Section("[components]\nkep = 3"),
        at: "recipe.toml:12:1:",
        says: &["unknown field `kep`", "`keep`", "`compute`"],
        ..BAD
    },
    Case {
        name: "unknown key in [components.randomized]",
        recipe: Section(
            "[components]\nmethod = \"randomized\"\nkeep = 2\n\n[components.randomized]\noversample = 5\n\n[diagnostics]\nspe_limit = \"box\"",
        ),
        at: "recipe.toml:16:1:",
        says: &["unknown field `oversample`", "`oversampling`"],
        ..BAD
    },
    Case {
        name: "unknown key in [components.parallel_analysis]",
        recipe: Section(
            "[components]\nkeep = \"parallel-analysis\"\n\n[components.parallel_analysis]\nreplicate = 50",
        ),
        at: "recipe.toml:15:1:",
        says: &["unknown field `replicate`", "`replicates`"],
        ..BAD
    },
    Case {
        name: "unknown key in [components.cross_validation]",
        recipe: Section(
            "[components]\nkeep = \"cross-validation\"\n\n[components.cross_validation]\nfold = 5",
        ),
        at: "recipe.toml:15:1:",
        says: &["unknown field `fold`", "`folds`"],
        ..BAD
    },
    Case {
        name: "unknown key in [diagnostics]",
        recipe: Section("[diagnostics]\nconfidence_level = 0.95"),
        at: "recipe.toml:12:1:",
        says: &["unknown field `confidence_level`", "`confidence`"],
        ..BAD
    },
    Case {
        name: "unknown key in [[plot]]",
        recipe: Section("[[plot]]\nkind = \"scores\"\ncolour = \"group\""),
        at: "recipe.toml:13:1:",
        says: &["unknown field `colour`", "`color`"],
        ..BAD
    },
    Case {
        name: "unknown key in [output]",
        recipe: Replace("folder = \"out\"", "folder = \"out\"\npath = \"x\""),
        at: "recipe.toml:10:1:",
        says: &["unknown field `path`", "`folder`"],
        ..BAD
    },
    Case {
        name: "unknown key in the keep table",
        recipe: Section("[components]\nkeep = { share = 0.9 }"),
        at: "recipe.toml:12:8:",
        says: &["unknown key `share`", "{ variance = 0.9 }"],
        ..BAD
    },
    // -----------------------------------------------------------------------
    // Ranges and choices
    // -----------------------------------------------------------------------
    Case {
        name: "share above 1",
        recipe: Section("[missing]\nmax_feature_missing = 1.5"),
        at: "recipe.toml:12:23:",
        says: &["1.5 is not a share", "from 0 to 1"],
        ..BAD
    },
    Case {
        name: "negative share",
        recipe: Section("[missing]\nmax_feature_missing = -0.1"),
        at: "recipe.toml:12:23:",
        says: &["-0.1 is not a share"],
        ..BAD
    },
    Case {
        name: "variance share of zero",
        recipe: Section("[components]\nkeep = { variance = 0 }"),
        at: "recipe.toml:12:8:",
        says: &["would keep no component", "above 0 and at most 1"],
        ..BAD
    },
    Case {
        name: "variance share above 1",
        recipe: Section("[components]\nkeep = { variance = 1.2 }"),
        at: "recipe.toml:12:21:",
        says: &["1.2 is not a share"],
        ..BAD
    },
    Case {
        name: "confidence of 1",
        recipe: Section("[diagnostics]\nconfidence = 1"),
        at: "recipe.toml:12:14:",
        says: &["between 0 and 1"],
        ..BAD
    },
    Case {
        name: "confidence of 0",
        recipe: Section("[diagnostics]\nconfidence = 0.0"),
        at: "recipe.toml:12:14:",
        says: &["between 0 and 1"],
        ..BAD
    },
    Case {
        name: "confidence above 1 in a list",
        recipe: Section("[diagnostics]\nconfidence = [0.95, 1.5]"),
        at: "recipe.toml:12:14:",
        says: &["1.5 is not a confidence level"],
        ..BAD
    },
    Case {
        name: "empty list of confidence levels",
        recipe: Section("[diagnostics]\nconfidence = []"),
        at: "recipe.toml:12:14:",
        says: &["the list of confidence levels is empty"],
        ..BAD
    },
    Case {
        name: "confidence levels out of order",
        recipe: Section("[diagnostics]\nconfidence = [0.99, 0.95]"),
        at: "recipe.toml:12:14:",
        says: &["lowest first"],
        ..BAD
    },
    Case {
        name: "ellipse confidence of 1",
        recipe: Section("[[plot]]\nkind = \"scores\"\nellipse = 1.0"),
        at: "recipe.toml:13:11:",
        says: &["between 0 and 1"],
        ..BAD
    },
    Case {
        name: "keep of zero",
        recipe: Section("[components]\nkeep = 0"),
        at: "recipe.toml:12:8:",
        says: &["keep = 0 is not a positive count"],
        ..BAD
    },
    Case {
        name: "compute of zero",
        recipe: Section("[components]\ncompute = 0"),
        at: "recipe.toml:12:11:",
        says: &["0 is not a positive whole number"],
        ..BAD
    },
    Case {
        name: "zero neighbours",
        recipe: Section("[missing]\nmethod = \"knn\"\n\n[missing.knn]\nneighbours = 0"),
        at: "recipe.toml:15:14:",
        says: &["not a positive whole number"],
        ..BAD
    },
    Case {
        name: "zero replicates",
        recipe: Section(
            "[components]\nkeep = \"parallel-analysis\"\n\n[components.parallel_analysis]\nreplicates = 0",
        ),
        at: "recipe.toml:15:14:",
        says: &["not a positive whole number"],
        ..BAD
    },
    Case {
        name: "percentile of 100",
        recipe: Section(
            "[components]\nkeep = \"parallel-analysis\"\n\n[components.parallel_analysis]\npercentile = 100",
        ),
        at: "recipe.toml:15:14:",
        says: &["between 0 and 100"],
        ..BAD
    },
    Case {
        name: "one fold",
        recipe: Section(
            "[components]\nkeep = \"cross-validation\"\n\n[components.cross_validation]\nfolds = 1",
        ),
        at: "recipe.toml:15:9:",
        says: &["folds = 1", "at least 2"],
        ..BAD
    },
    Case {
        name: "zero folds",
        recipe: Section(
            "[components]\nkeep = \"cross-validation\"\n\n[components.cross_validation]\nfolds = 0",
        ),
        at: "recipe.toml:15:9:",
        says: &["at least 2"],
        ..BAD
    },
    Case {
        name: "zero tolerance",
        recipe: Section(
            "[missing]\nmethod = \"iterative-pca\"\n\n[missing.iterative_pca]\ntolerance = 0",
        ),
        at: "recipe.toml:15:13:",
        says: &["from 1e-15", "up to 1"],
        ..BAD
    },
    // A tolerance below rounding would make every fill run to max_iterations
    // and fail; it is refused where it is written.
    Case {
        name: "tolerance below rounding",
        recipe: Section(
            "[missing]\nmethod = \"iterative-pca\"\n\n[missing.iterative_pca]\ntolerance = 1e-24",
        ),
        at: "recipe.toml:15:13:",
        says: &["1e-24 is not a tolerance", "from 1e-15"],
        ..BAD
    },
    Case {
        name: "power iterations above 1000",
        recipe: Section(
            "[components]\nmethod = \"randomized\"\nkeep = 2\n\n[components.randomized]\npower_iterations = 1001\n\n[diagnostics]\nspe_limit = \"box\"",
        ),
        at: "recipe.toml:16:20:",
        says: &["from 0 to 1000"],
        ..BAD
    },
    Case {
        name: "zero contributions rows",
        recipe: Section("[diagnostics]\ncontributions_max_rows = 0"),
        at: "recipe.toml:12:26:",
        says: &["not a positive whole number"],
        ..BAD
    },
    Case {
        name: "plot component zero",
        recipe: Section("[[plot]]\nkind = \"scores\"\nx = 0"),
        at: "recipe.toml:13:5:",
        says: &["not a positive whole number"],
        ..BAD
    },
    Case {
        name: "unknown scaling method",
        recipe: Section("[scaling]\nmethod = \"zscore\""),
        at: "recipe.toml:12:10:",
        says: &["unknown choice `zscore`", "`unit-variance`"],
        ..BAD
    },
    Case {
        name: "unknown missing method",
        recipe: Section("[missing]\nmethod = \"zero\""),
        at: "recipe.toml:12:10:",
        says: &["unknown choice `zero`", "`drop-rows`", "`knn`"],
        ..BAD
    },
    Case {
        name: "unknown keep rule",
        recipe: Section("[components]\nkeep = \"elbow\""),
        at: "recipe.toml:12:8:",
        says: &["unknown rule `elbow`", "\"broken-stick\""],
        ..BAD
    },
    Case {
        name: "unknown plot kind",
        recipe: Section("[[plot]]\nkind = \"pie\""),
        at: "recipe.toml:12:8:",
        says: &["unknown choice `pie`", "`scree`"],
        ..BAD
    },
    // -----------------------------------------------------------------------
    // Conflicts
    // -----------------------------------------------------------------------
    Case {
        name: "keep above compute",
        recipe: Section("[components]\nkeep = 5\ncompute = 3"),
        at: "recipe.toml:12:8:",
        says: &["keep = 5", "compute = 3", "raise compute or lower keep"],
        ..BAD
    },
    Case {
        name: "id also a group",
        recipe: Replace("[\"group\"]", "[\"group\", \"sample\"]"),
        at: "recipe.toml:6:20:",
        says: &["column `sample` is used twice", "one role"],
        ..BAD
    },
    Case {
        name: "group listed twice",
        recipe: Replace("[\"group\"]", "[\"group\", \"group\"]"),
        at: "recipe.toml:6:20:",
        says: &["column `group` is used twice", "one role"],
        ..BAD
    },
    Case {
        name: "id also a listed feature",
        recipe: Input("features = [\"a\", \"sample\"]"),
        at: "recipe.toml:7:18:",
        says: &["used twice", "a feature"],
        ..BAD
    },
    Case {
        name: "two transforms for one feature",
        recipe: Section("[transform]\nlog10 = [\"a\"]\nsqrt = [\"a\"]"),
        at: "recipe.toml:13:9:",
        says: &["two transforms", "choose one per feature"],
        ..BAD
    },
    Case {
        name: "transform of a group column",
        recipe: Section("[transform]\nln = [\"group\"]"),
        at: "recipe.toml:12:7:",
        says: &["not a feature of this analysis"],
        ..BAD
    },
    Case {
        name: "randomized method with a rule for keep",
        recipe: Section(
            "[components]\nmethod = \"randomized\"\nkeep = \"kaiser\"\n\n[diagnostics]\nspe_limit = \"box\"",
        ),
        at: "recipe.toml:13:8:",
        says: &["give keep as a count such as 3"],
        ..BAD
    },
    Case {
        name: "randomized method without Box's limit",
        recipe: Section("[components]\nmethod = \"randomized\"\nkeep = 2"),
        at: "recipe.toml:12:10:",
        says: &["spe_limit = \"box\""],
        ..BAD
    },
    Case {
        name: "plot colour that is not a group",
        recipe: Section("[[plot]]\nkind = \"scores\"\ncolor = \"a\""),
        at: "recipe.toml:13:9:",
        says: &["not a group column", "input.groups"],
        ..BAD
    },
    Case {
        name: "plot with one component on both axes",
        recipe: Section("[[plot]]\nkind = \"scores\"\nx = 2\ny = 2"),
        at: "recipe.toml:",
        says: &["choose two different components"],
        ..BAD
    },
    Case {
        name: "loadings plot with component and axes",
        recipe: Section("[[plot]]\nkind = \"loadings\"\ncomponent = 1\nx = 1\ny = 2"),
        at: "recipe.toml:",
        says: &["either `component`", "not both"],
        ..BAD
    },
    Case {
        name: "two plots on one file",
        recipe: Section("[[plot]]\nkind = \"scree\"\n\n[[plot]]\nkind = \"scree\""),
        at: "recipe.toml:14:1:",
        says: &["give one of them its own `file`"],
        ..BAD
    },
    Case {
        name: "plot key that does not apply to its kind",
        recipe: Section("[[plot]]\nkind = \"scree\"\nellipse = 0.95"),
        at: "recipe.toml:13:11:",
        says: &["does not apply to a `scree` plot"],
        ..BAD
    },
    Case {
        name: "plot component beyond compute",
        recipe: Section(
            "[components]\ncompute = 3\n\n[[plot]]\nkind = \"loadings\"\ncomponent = 4",
        ),
        at: "recipe.toml:16:13:",
        says: &["beyond compute = 3"],
        ..BAD
    },
    Case {
        name: "output folder holds the recipe",
        recipe: Replace("folder = \"out\"", "folder = \".\""),
        at: "recipe.toml:9:10:",
        says: &["would contain the recipe"],
        ..BAD
    },
    Case {
        name: "output folder below a file",
        recipe: Replace("folder = \"out\"", "folder = \"blocker/out\""),
        files: &[("blocker", "a file\n")],
        at: "recipe.toml:9:10:",
        says: &["is a file, not a folder"],
        ..BAD
    },
    Case {
        name: "empty output folder name",
        recipe: Replace("folder = \"out\"", "folder = \"\""),
        at: "recipe.toml:9:10:",
        says: &["output.folder is empty"],
        ..BAD
    },
    Case {
        name: "empty id name",
        recipe: Replace("id = \"sample\"", "id = \"\""),
        at: "recipe.toml:5:6:",
        says: &["is empty; give a name"],
        ..BAD
    },
    Case {
        name: "id column misspelt",
        recipe: Replace("id = \"sample\"", "id = \"sampel\""),
        at: "recipe.toml:5:6:",
        says: &["not in the header of data.csv", "did you mean `sample`?"],
        ..BAD
    },
    Case {
        name: "feature pattern that matches nothing",
        recipe: Input("features = [\"*_pct\"]"),
        at: "recipe.toml:7:13:",
        says: &["matches no column"],
        ..BAD
    },
    Case {
        name: "keep above the rows' bound",
        recipe: Section("[components]\nkeep = 3"),
        data: Data::Text("sample,group,a,b,c\ns1,x,1.5,2,3\ns2,x,2.5,1,7\ns3,y,3,4,1\n"),
        at: "recipe.toml:12:8:",
        says: &["at most 2", "set components.keep"],
        ..BAD
    },
    // -----------------------------------------------------------------------
    // Settings that would have no effect, and options that cannot work
    // -----------------------------------------------------------------------
    Case {
        name: "knn settings under the mean fill",
        recipe: Section("[missing]\nmethod = \"mean\"\n\n[missing.knn]\nneighbours = 3"),
        at: "recipe.toml:14:1:",
        says: &[
            "[missing.knn] has no effect because missing.method is \"mean\"",
            "missing.method = \"knn\"",
        ],
        ..BAD
    },
    Case {
        name: "knn settings under the default fill",
        recipe: Section("[missing.knn]\nneighbours = 3"),
        at: "recipe.toml:11:1:",
        says: &["has no effect", "missing.method = \"knn\""],
        ..BAD
    },
    Case {
        name: "knn settings inline under the median fill",
        recipe: Section("[missing]\nmethod = \"median\"\nknn = { neighbours = 3 }"),
        at: "recipe.toml:13:7:",
        says: &["[missing.knn] has no effect because missing.method is \"median\""],
        ..BAD
    },
    Case {
        name: "iterative PCA settings under the knn fill",
        recipe: Section("[missing]\nmethod = \"knn\"\n\n[missing.iterative_pca]\ncomponents = 2"),
        at: "recipe.toml:14:1:",
        says: &[
            "[missing.iterative_pca] has no effect",
            "missing.method = \"iterative-pca\"",
        ],
        ..BAD
    },
    Case {
        name: "parallel-analysis settings with a fixed keep",
        recipe: Section(
            "[components]\nkeep = 3\n\n[components.parallel_analysis]\nreplicates = 50",
        ),
        at: "recipe.toml:14:1:",
        says: &[
            "[components.parallel_analysis] has no effect because components.keep is 3",
            "components.keep = \"parallel-analysis\"",
        ],
        ..BAD
    },
    Case {
        name: "parallel-analysis settings with the default keep",
        recipe: Section("[components.parallel_analysis]\nseed = 5"),
        at: "recipe.toml:11:1:",
        says: &["components.keep is 2 (the default)"],
        ..BAD
    },
    Case {
        name: "parallel-analysis settings under cross-validation",
        recipe: Section(
            "[components]\nkeep = \"cross-validation\"\n\n[components.parallel_analysis]\nseed = 5",
        ),
        at: "recipe.toml:14:1:",
        says: &["components.keep is \"cross-validation\""],
        ..BAD
    },
    Case {
        name: "cross-validation settings under kaiser",
        recipe: Section(
            "[components]\nkeep = \"kaiser\"\n\n[components.cross_validation]\nfolds = 5",
        ),
        at: "recipe.toml:14:1:",
        says: &[
            "[components.cross_validation] has no effect",
            "components.keep = \"cross-validation\"",
        ],
        ..BAD
    },
    Case {
        name: "randomized settings under the exact method",
        recipe: Section("[components.randomized]\nseed = 3"),
        at: "recipe.toml:11:1:",
        says: &[
            "[components.randomized] has no effect",
            "components.method = \"randomized\"",
        ],
        ..BAD
    },
    Case {
        name: "constant-feature policy under centring only",
        recipe: Section("[scaling]\nmethod = \"center\"\nconstant_features = \"drop\""),
        at: "recipe.toml:13:21:",
        says: &[
            "scaling.constant_features has no effect because scaling.method is \"center\"",
            "\"unit-variance\", \"pareto\" or \"range\"",
        ],
        ..BAD
    },
    Case {
        name: "constant-feature policy without scaling",
        recipe: Section("[scaling]\nmethod = \"none\"\nconstant_features = \"error\""),
        at: "recipe.toml:13:21:",
        says: &["has no effect because scaling.method is \"none\""],
        ..BAD
    },
    Case {
        name: "output folder through a dangling link",
        recipe: Replace("folder = \"out\"", "folder = \"gone/out\""),
        links: &[("gone", "nowhere/at/all")],
        at: "recipe.toml:9:10:",
        says: &["symbolic link", "does not exist", "nowhere/at/all"],
        ..BAD
    },
    Case {
        name: "output folder is a dangling link",
        recipe: Recipe::Base,
        links: &[("out", "missing-target")],
        at: "recipe.toml:9:10:",
        says: &["symbolic link", "missing-target", "does not exist"],
        ..BAD
    },
    Case {
        name: "passes engine with a median fill",
        recipe: Section("[missing]\nmethod = \"median\""),
        args: &["--engine", "passes"],
        at: "data.csv:",
        says: &[
            "--engine passes cannot analyse this recipe",
            "missing.method = \"median\"",
            "--engine auto",
        ],
        ..BAD
    },
    Case {
        name: "passes engine with parallel analysis",
        recipe: Section("[components]\nkeep = \"parallel-analysis\""),
        args: &["--engine", "passes"],
        at: "data.csv:",
        says: &[
            "--engine passes cannot analyse this recipe",
            "--engine in-memory",
        ],
        ..BAD
    },
    Case {
        name: "passes engine with fewer rows than features",
        data: Data::Text(
            "sample,group,a,b,c,d,e,f\ns1,x,1,2,3,1,2,3\ns2,x,2,1,4,4,5,6\ns3,y,3,4,2,1,1,2\n",
        ),
        args: &["--engine", "passes"],
        at: "data.csv:",
        says: &["fewer rows (3) than features (6)", "--engine in-memory"],
        ..BAD
    },
    // -----------------------------------------------------------------------
    // Input tables: encodings, line ends, quoting, shape
    // -----------------------------------------------------------------------
    Case {
        name: "UTF-16 table",
        data: Data::Bytes(
            b"\xff\xfes\x00a\x00m\x00p\x00l\x00e\x00,\x00g\x00r\x00o\x00u\x00p\x00\n\x00",
        ),
        at: "data.csv:1:",
        says: &["UTF-16", "save it as UTF-8"],
        ..BAD
    },
    Case {
        name: "UTF-8 byte-order mark is fine",
        data: Data::Text("\u{feff}sample,group,a,b,c\ns1,x,1,2,3\ns2,x,2,1,4\ns3,y,3,4,2\n"),
        cmd: Cmd::Check,
        code: 0,
        ..BAD
    },
    Case {
        name: "Latin-1 byte in a group cell",
        data: Data::Bytes(b"sample,group,a,b,c\ns1,x,1,2,3\ns2,caf\xe9,2,1,4\ns3,y,3,4,2\n"),
        at: "data.csv:3:",
        says: &["not valid UTF-8"],
        ..BAD
    },
    Case {
        name: "Latin-1 byte in the header",
        data: Data::Bytes(b"sample,group,a,b,\xb5g\ns1,x,1,2,3\ns2,x,2,1,4\ns3,y,3,4,2\n"),
        at: "data.csv:1:",
        says: &["not valid UTF-8"],
        ..BAD
    },
    Case {
        name: "carriage returns alone as line ends",
        data: Data::Text("sample,group,a,b,c\rs1,x,1,2,3\rs2,x,2,1,4\rs3,y,3,4,2\r"),
        at: "data.csv:",
        says: &["carriage return alone", "LF or CRLF"],
        ..BAD
    },
    Case {
        name: "CRLF line ends are fine",
        data: Data::Text("sample,group,a,b,c\r\ns1,x,1,2,3\r\ns2,x,2,1,4\r\ns3,y,3,4,2\r\n"),
        cmd: Cmd::Check,
        code: 0,
        ..BAD
    },
    Case {
        name: "mixed line ends are fine",
        data: Data::Text("sample,group,a,b,c\r\ns1,x,1,2,3\ns2,x,2,1,4\r\ns3,y,3,4,2\n"),
        cmd: Cmd::Check,
        code: 0,
        ..BAD
    },
    Case {
        name: "quote never closed",
        data: Data::Text(
            "sample,group,a,b,c\ns1,x,1,2,3\ns2,x,2,1,4\ns3,\"y,3,4,2\ns4,y,3,4,2\ns5,z,1,1,1\n",
        ),
        at: "data.csv:4:",
        says: &["a quote opened at line 4 is never closed"],
        not: &["fields"],
        ..BAD
    },
    Case {
        name: "quote never closed on the last line",
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,3\ns2,x,2,1,4\ns3,y,3,4,\"2\n"),
        at: "data.csv:4:",
        says: &["a quote opened at line 4 is never closed"],
        ..BAD
    },
    Case {
        name: "quote never closed in the header",
        data: Data::Text("sample,\"group,a,b,c\ns1,x,1,2,3\ns2,x,2,1,4\n"),
        at: "data.csv:1:",
        says: &["a quote opened at line 1 is never closed"],
        ..BAD
    },
    Case {
        name: "quote never closed, in passes",
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,3\ns2,x,2,1,4\ns3,\"y,3,4,2\ns4,y,3,4,2\n"),
        args: &["--engine", "passes"],
        at: "data.csv:4:",
        says: &["a quote opened at line 4 is never closed"],
        ..BAD
    },
    Case {
        name: "quoted cells with escaped quotes are fine",
        data: Data::Text(
            "sample,group,a,b,c\n\"s\"\"1\",x,1,2,3\ns2,\"x, or \"\"y\"\"\",2,1,4\ns3,y,\"3\",4,2\n",
        ),
        cmd: Cmd::Check,
        code: 0,
        ..BAD
    },
    Case {
        name: "row with too many fields",
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,3\ns2,x,2,1,4,9\ns3,y,3,4,2\n"),
        at: "data.csv:3:",
        says: &["the row has 6 fields but the header has 5"],
        ..BAD
    },
    Case {
        name: "row with too few fields",
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,3\ns2,x,2,1\ns3,y,3,4,2\n"),
        at: "data.csv:3:",
        says: &["the row has 4 fields but the header has 5"],
        ..BAD
    },
    Case {
        name: "empty table file",
        data: Data::Text(""),
        at: "data.csv:",
        says: &["the file is empty", "a header row and data rows"],
        ..BAD
    },
    Case {
        name: "table of blank lines",
        data: Data::Text("\n\n  \n"),
        at: "data.csv:",
        says: &["the file is empty"],
        ..BAD
    },
    Case {
        name: "header only",
        data: Data::Text("sample,group,a,b,c\n"),
        at: "data.csv:",
        says: &["0 usable rows", "at least 2"],
        ..BAD
    },
    Case {
        name: "one data row",
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,3\n"),
        at: "data.csv:",
        says: &["1 usable row", "at least 2"],
        ..BAD
    },
    Case {
        name: "table file not found",
        data: Data::Absent,
        at: "data.csv:",
        says: &["cannot read the file"],
        ..BAD
    },
    Case {
        name: "table path is a folder",
        data: Data::Absent,
        files: &[("data.csv/inside.txt", "x\n")],
        at: "data.csv:",
        says: &["cannot read"],
        ..BAD
    },
    Case {
        name: "semicolon table read with commas",
        data: Data::Text("sample;group;a;b;c\ns1;x;1;2;3\ns2;x;2;1;4\n"),
        recipe: Section(""),
        at: "recipe.toml:5:6:",
        says: &["column `sample` is not in the header"],
        ..BAD
    },
    Case {
        name: "semicolon table without id or groups",
        recipe: Whole("format = 1\n[input]\nfile = \"data.csv\"\n[output]\nfolder = \"out\"\n"),
        data: Data::Text("a;b;c\n1;2;3\n2;1;4\n3;4;2\n"),
        at: "data.csv:",
        says: &["no usable features", "set input.delimiter"],
        ..BAD
    },
    Case {
        name: "duplicate column names",
        data: Data::Text("sample,group,a,b,b\ns1,x,1,2,3\ns2,x,2,1,4\ns3,y,3,4,2\n"),
        at: "data.csv:1:",
        says: &["column name `b` appears twice", "columns 4 and 5", "unique"],
        ..BAD
    },
    Case {
        name: "empty column name",
        data: Data::Text("sample,group,,b,c\ns1,x,1,2,3\ns2,x,2,1,4\ns3,y,3,4,2\n"),
        at: "data.csv:1:",
        says: &["header column 3 has no name"],
        ..BAD
    },
    Case {
        name: "column name of spaces",
        data: Data::Text("sample,group,a,  ,c\ns1,x,1,2,3\ns2,x,2,1,4\ns3,y,3,4,2\n"),
        at: "data.csv:1:",
        says: &["header column 4 has no name"],
        ..BAD
    },
    Case {
        name: "duplicate ids",
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,3\ns2,x,2,1,4\ns1,y,3,4,2\n"),
        at: "data.csv:4:",
        says: &[
            "id `s1`",
            "already appeared at line 2",
            "ids must be unique",
        ],
        ..BAD
    },
    Case {
        name: "empty id",
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,3\n,x,2,1,4\ns3,y,3,4,2\n"),
        at: "data.csv:3:",
        says: &["the id column `sample` is empty", "every row needs an id"],
        ..BAD
    },
    Case {
        name: "id of spaces",
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,3\n   ,x,2,1,4\ns3,y,3,4,2\n"),
        at: "data.csv:3:",
        says: &["the id column `sample` is empty"],
        ..BAD
    },
    Case {
        name: "duplicate ids in passes",
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,3\ns2,x,2,1,4\ns1,y,3,4,2\n"),
        args: &["--engine", "passes"],
        at: "data.csv:4:",
        says: &["already appeared at line 2"],
        ..BAD
    },
    // -----------------------------------------------------------------------
    // Odd numbers
    // -----------------------------------------------------------------------
    Case {
        name: "number beyond double precision",
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,3\ns2,x,1e400,1,4\ns3,y,3,4,2\n"),
        at: "data.csv:3:",
        says: &["`1e400`", "beyond the range of double precision"],
        not: &["non-finite"],
        ..BAD
    },
    Case {
        name: "nan as a value",
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,3\ns2,x,nan,1,4\ns3,y,3,4,2\n"),
        at: "data.csv:3:",
        says: &["non-finite value `nan`", "input.missing"],
        ..BAD
    },
    Case {
        name: "inf as a value",
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,3\ns2,x,2,-inf,4\ns3,y,3,4,2\n"),
        at: "data.csv:3:",
        says: &["non-finite value `-inf`"],
        ..BAD
    },
    Case {
        name: "Infinity spelt out",
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,3\ns2,x,2,1,Infinity\ns3,y,3,4,2\n"),
        at: "data.csv:3:",
        says: &["non-finite value `Infinity`"],
        ..BAD
    },
    Case {
        name: "hexadecimal number",
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,3\ns2,x,0x10,1,4\ns3,y,3,4,2\n"),
        at: "data.csv:3:",
        says: &["non-numeric cell `0x10`", "input.missing"],
        ..BAD
    },
    Case {
        name: "decimal comma",
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,3\ns2,x,\"1,5\",1,4\ns3,y,3,4,2\n"),
        at: "data.csv:3:",
        says: &["`1,5`", "decimal comma"],
        ..BAD
    },
    Case {
        name: "Arabic-Indic digits",
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,3\ns2,x,\u{661}\u{662},1,4\ns3,y,3,4,2\n"),
        at: "data.csv:3:",
        says: &["not the ASCII digits 0–9"],
        ..BAD
    },
    Case {
        name: "subnormal value among normal ones is fine",
        data: Data::Text("sample,group,a,b,c\ns1,x,1e-310,2,3\ns2,x,2,1,4\ns3,y,3,4,2\n"),
        cmd: Cmd::Check,
        code: 0,
        ..BAD
    },
    Case {
        name: "feature whose spread underflows",
        data: Data::Text("sample,group,a,b,c\ns1,x,1e-310,2,3\ns2,x,2e-310,1,4\ns3,y,3e-310,4,2\n"),
        code: 1,
        at: "data.csv:",
        says: &[
            "feature `a` varies too little for double precision",
            "rescale it",
        ],
        not: &["too large"],
        ..BAD
    },
    Case {
        name: "plus sign before a bare fraction is fine",
        data: Data::Text("sample,group,a,b,c\ns1,x,+.5,2,3\ns2,x,2,1,4\ns3,y,3,4,2\n"),
        cmd: Cmd::Check,
        code: 0,
        ..BAD
    },
    Case {
        name: "double minus",
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,3\ns2,x,--1,1,4\ns3,y,3,4,2\n"),
        at: "data.csv:3:",
        says: &["non-numeric cell `--1`"],
        ..BAD
    },
    Case {
        name: "two decimal points",
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,3\ns2,x,1.2.3,1,4\ns3,y,3,4,2\n"),
        at: "data.csv:3:",
        says: &["non-numeric cell `1.2.3`"],
        ..BAD
    },
    Case {
        name: "number with a unit",
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,3\ns2,x,2,1,4 mg\ns3,y,3,4,2\n"),
        at: "data.csv:3:",
        says: &["non-numeric cell `4 mg`", "exclude the column"],
        ..BAD
    },
    Case {
        name: "empty cell not listed as missing",
        recipe: Input("missing = [\"NA\"]"),
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,3\ns2,x,,1,4\ns3,y,3,4,2\n"),
        at: "data.csv:3:",
        says: &["an empty cell", "add \"\" to input.missing"],
        ..BAD
    },
    Case {
        name: "spaces around numbers are fine",
        data: Data::Text("sample,group,a,b,c\ns1,x, 1 ,2,3\ns2,x,2,1,4\ns3,y,3,4,2\n"),
        cmd: Cmd::Check,
        code: 0,
        ..BAD
    },
    Case {
        name: "NUL byte in a cell",
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,3\ns2,x,2\u{0},1,4\ns3,y,3,4,2\n"),
        at: "data.csv:3:",
        says: &["non-numeric cell `2\\u{0}`"],
        not: &["\u{0}"],
        ..BAD
    },
    // -----------------------------------------------------------------------
    // Columns that cannot be analysed
    // -----------------------------------------------------------------------
    Case {
        name: "all-missing column is dropped and reported",
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,NA\ns2,x,2,1,NA\ns3,y,3,4,NA\n"),
        cmd: Cmd::Check,
        code: 0,
        ..BAD
    },
    Case {
        name: "every column missing",
        data: Data::Text("sample,group,a,b\ns1,x,NA,NA\ns2,x,NA,NA\ns3,y,NA,NA\n"),
        at: "data.csv:",
        says: &["no usable features", "max_feature_missing"],
        ..BAD
    },
    Case {
        name: "constant column",
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,7\ns2,x,2,1,7\ns3,y,3,4,7\n"),
        at: "data.csv:",
        says: &[
            "feature `c` is constant (7)",
            "constant_features = \"drop\"",
        ],
        ..BAD
    },
    Case {
        name: "every column constant and dropped",
        recipe: Section("[scaling]\nconstant_features = \"drop\""),
        data: Data::Text("sample,group,a,b\ns1,x,1,7\ns2,x,1,7\ns3,y,1,7\n"),
        at: "data.csv:",
        says: &["no usable features", "every feature is constant"],
        ..BAD
    },
    Case {
        name: "log of zero",
        recipe: Section("[transform]\nlog10 = [\"b\"]"),
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,3\ns2,x,2,0,4\ns3,y,3,4,2\n"),
        at: "data.csv:3:",
        says: &["column `b` has the value 0", "`log10` needs a value > 0"],
        ..BAD
    },
    Case {
        name: "log of a negative value",
        recipe: Section("[transform]\nln = [\"c\"]"),
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,3\ns2,x,2,1,-4\ns3,y,3,4,2\n"),
        at: "data.csv:3:",
        says: &["-4", "`ln` needs a value > 0"],
        ..BAD
    },
    Case {
        name: "square root of a negative value",
        recipe: Section("[transform]\nsqrt = [\"a\"]"),
        data: Data::Text("sample,group,a,b,c\ns1,x,-1,2,3\ns2,x,2,1,4\ns3,y,3,4,2\n"),
        at: "data.csv:2:",
        says: &["`sqrt` needs a value ≥ 0"],
        ..BAD
    },
    Case {
        name: "log of zero in passes",
        recipe: Section("[transform]\nlog10 = [\"b\"]"),
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,3\ns2,x,2,0,4\ns3,y,3,4,2\n"),
        args: &["--engine", "passes"],
        at: "data.csv:3:",
        says: &["`log10` needs a value > 0"],
        ..BAD
    },
    Case {
        name: "listed feature with text cells",
        recipe: Input("features = [\"a\", \"b\"]"),
        data: Data::Text("sample,group,a,b,c\ns1,x,1,low,3\ns2,x,2,high,4\ns3,y,3,mid,2\n"),
        at: "data.csv:2:",
        says: &["column `b`", "non-numeric cell `low`"],
        ..BAD
    },
    Case {
        name: "stray text in a numeric column",
        data: Data::Text("sample,group,a,b,c\ns1,x,1,2,3\ns2,x,2,n/d,4\ns3,y,3,4,2\ns4,y,3,4,2\n"),
        at: "data.csv:3:",
        says: &["`n/d`", "add it to input.missing"],
        ..BAD
    },
    Case {
        name: "sums of squares overflow without centring",
        recipe: Section("[scaling]\nmethod = \"none\""),
        data: Data::Text("sample,group,a,b\ns1,x,2e154,2\ns2,x,2.1e154,1\ns3,y,2.2e154,4\n"),
        cmd: Cmd::Run,
        code: 1,
        at: "data.csv:",
        says: &[
            "feature `a`",
            "scaling.method = \"unit-variance\" instead of \"none\"",
        ],
        ..BAD
    },
    Case {
        name: "spread overflows under unit variance",
        data: Data::Text("sample,group,a,b\ns1,x,1e300,2\ns2,x,-1e300,1\ns3,y,1.7e308,4\n"),
        cmd: Cmd::Run,
        code: 1,
        at: "data.csv:",
        says: &["feature `a`", "rescale it", "cannot help"],
        not: &[
            "use scaling.method = \"unit-variance\"",
            "or use unit-variance",
        ],
        ..BAD
    },
    // -----------------------------------------------------------------------
    // Hostile text: shown escaped, never sent raw to the terminal
    // -----------------------------------------------------------------------
    Case {
        name: "escape sequence in a cell",
        data: Data::Text(
            "sample,group,a,b,c\ns1,x,1,2,3\ns2,x,2,\u{1b}[2J\u{1b}[31mowned,4\ns3,y,3,4,2\ns4,y,3,4,2\n",
        ),
        at: "data.csv:3:",
        says: &["\\u{1b}[2J\\u{1b}[31mowned"],
        not: &["\u{1b}"],
        ..BAD
    },
    Case {
        name: "escape sequence in a column name",
        recipe: Input("features = [\"a\", \"b*\"]"),
        data: Data::Text(
            "sample,group,a,b\u{1b}]0;title\u{7},c\ns1,x,1,2,3\ns2,x,2,bad,4\ns3,y,3,4,2\n",
        ),
        at: "data.csv:3:",
        says: &["column `b\\u{1b}]0;title\\u{7}`"],
        not: &["\u{1b}", "\u{7}"],
        ..BAD
    },
    Case {
        name: "right-to-left override in a cell",
        data: Data::Text(
            "sample,group,a,b,c\ns1,x,1,2,3\ns2,x,2,\u{202e}1.5,4\ns3,y,3,4,2\ns4,y,3,4,2\n",
        ),
        at: "data.csv:3:",
        says: &["\\u{202e}1.5"],
        not: &["\u{202e}"],
        ..BAD
    },
    Case {
        name: "C1 control character in a cell",
        data: Data::Text(
            "sample,group,a,b,c\ns1,x,1,2,3\ns2,x,2,\u{9b}31m,4\ns3,y,3,4,2\ns4,y,3,4,2\n",
        ),
        at: "data.csv:3:",
        says: &["\\u{9b}31m"],
        not: &["\u{9b}"],
        ..BAD
    },
    Case {
        name: "escape sequence in a recipe string",
        recipe: Replace("id = \"sample\"", "id = \"\\u001b[31msample\""),
        at: "recipe.toml:5:6:",
        says: &["column `\\u{1b}[31msample` is not in the header"],
        not: &["\u{1b}"],
        ..BAD
    },
    Case {
        name: "raw control character in a recipe line",
        recipe: Replace("format = 1\n", "format = 1\ntitle = \"a\u{1b}b\"\n"),
        at: "recipe.toml:2:",
        not: &["\u{1b}"],
        says: &["\\u{1b}"],
        ..BAD
    },
    Case {
        name: "escape sequence in a duplicate id",
        data: Data::Text(
            "sample,group,a,b,c\n\u{1b}[1ms1,x,1,2,3\ns2,x,2,1,4\n\u{1b}[1ms1,y,3,4,2\n",
        ),
        at: "data.csv:4:",
        says: &["id `\\u{1b}[1ms1`"],
        not: &["\u{1b}"],
        ..BAD
    },
    Case {
        name: "iterative PCA with more components than the table allows",
        recipe: Section(
            "[missing]\nmethod = \"iterative-pca\"\n[missing.iterative_pca]\ncomponents = 3",
        ),
        cmd: Cmd::Run,
        says: &[
            "iterative PCA with 3 components needs fewer components than both the features (3)",
            "set a lower missing.iterative_pca.components",
        ],
        ..BAD
    },
    // -----------------------------------------------------------------------
    // Paths: overlaps through links, existing folders, what --replace may remove.
    Case {
        name: "output folder is the parent folder",
        recipe: Replace("folder = \"out\"", "folder = \"..\""),
        at: "recipe.toml:9:10:",
        says: &["would contain the recipe"],
        ..BAD
    },
    Case {
        name: "output folder is a link to the recipe's folder",
        recipe: Replace("folder = \"out\"", "folder = \"here\""),
        links: &[("here", ".")],
        at: "recipe.toml:9:10:",
        says: &["would contain the recipe"],
        ..BAD
    },
    Case {
        name: "input reached through a link into the output folder",
        data: Data::Absent,
        files: &[(
            "out/kept.csv",
            "sample,group,a,b,c\ns1,x,1,2,3\ns2,y,2,1,4\ns3,x,3,3,1\n",
        )],
        links: &[("data.csv", "out/kept.csv")],
        at: "recipe.toml:9:10:",
        says: &["would contain the input table"],
        ..BAD
    },
    Case {
        name: "recipe reached through a link into the output folder",
        recipe: Replace("file = \"data.csv\"", "file = \"data.csv\""),
        files: &[(
            "out/real.toml",
            "format = 1\n[input]\nfile = \"data.csv\"\n[output]\nfolder = \"out\"\n",
        )],
        links: &[("linked.toml", "out/real.toml")],
        args: &["linked.toml"],
        at: "linked.toml:5:10:",
        says: &["would contain the recipe"],
        ..BAD
    },
    Case {
        name: "output folder exists as a file",
        files: &[("out", "not a folder")],
        cmd: Cmd::Run,
        at: "out:",
        says: &["exists and is not a folder", "choose another output.folder"],
        ..BAD
    },
    Case {
        name: "output folder holds files of the user",
        files: &[("out/thesis.tex", "chapter one")],
        cmd: Cmd::Run,
        at: "out:",
        says: &["not a sextant results folder", "will not replace it"],
        ..BAD
    },
    Case {
        name: "replace a folder holding a hand-written manifest",
        files: &[
            (
                "out/manifest.json",
                "{\"tool\": {\"name\": \"sextant\"}, \"digest\": \"0\"}",
            ),
            ("out/thesis.tex", "chapter one"),
        ],
        cmd: Cmd::Line(&["run", "recipe.toml", "--replace"]),
        at: "out:",
        says: &["thesis.tex"],
        ..BAD
    },
    Case {
        name: "replace a results folder holding an extra file",
        results: true,
        files: &[("res/notes.txt", "my notes")],
        cmd: Cmd::Line(&["run", "made.toml", "--replace"]),
        at: "res:",
        says: &["notes.txt"],
        ..BAD
    },
    Case {
        name: "replace a results folder that is a link",
        results: true,
        recipe: Replace("folder = \"out\"", "folder = \"alias\""),
        links: &[("alias", "res")],
        cmd: Cmd::Line(&["run", "recipe.toml", "--replace"]),
        at: "alias:",
        says: &["symbolic link"],
        ..BAD
    },
    Case {
        name: "input is a device",
        recipe: Replace("file = \"data.csv\"", "file = \"/dev/zero\""),
        at: "/dev/zero:",
        says: &["a device, pipe or socket, not a regular file"],
        ..BAD
    },
    Case {
        name: "input is a folder",
        recipe: Replace("file = \"data.csv\"", "file = \"sub\""),
        files: &[("sub/x.csv", "a\n1\n")],
        at: "sub:",
        says: &["a folder, not a regular file"],
        ..BAD
    },
    Case {
        name: "recipe is a device",
        links: &[("null.toml", "/dev/null")],
        cmd: Cmd::Line(&["check", "null.toml"]),
        at: "null.toml:",
        says: &["cannot read the recipe", "not a regular file"],
        ..BAD
    },
    Case {
        name: "recipe file does not exist",
        cmd: Cmd::Line(&["check", "absent.toml"]),
        at: "absent.toml:",
        says: &["cannot read the recipe"],
        ..BAD
    },
    // -----------------------------------------------------------------------
    // apply: the results folder, the new table and where the scores go.
    Case {
        name: "apply to a folder without a manifest",
        files: &[("empty/readme.txt", "x")],
        cmd: Cmd::Line(&["apply", "empty", "data.csv"]),
        at: "empty:",
        says: &["not a sextant results folder", "manifest.json"],
        ..BAD
    },
    Case {
        name: "apply with a manifest that is not JSON",
        results: true,
        files: &[("res/manifest.json", "{ not json")],
        cmd: Cmd::Line(&["apply", "res", "data.csv"]),
        at: "res:",
        says: &["manifest.json"],
        ..BAD
    },
    Case {
        name: "apply with an edited manifest",
        results: true,
        files: &[(
            "res/manifest.json",
            "{\"tool\": {\"name\": \"sextant\"}, \"digest\": \"0\", \"outputs\": []}",
        )],
        cmd: Cmd::Line(&["apply", "res", "data.csv"]),
        at: "res:",
        says: &["digest"],
        ..BAD
    },
    Case {
        name: "apply with an edited model",
        results: true,
        files: &[("res/model.json", "{}")],
        cmd: Cmd::Line(&["apply", "res", "data.csv"]),
        at: "res:",
        says: &["model.json", "SHA-256"],
        ..BAD
    },
    Case {
        name: "apply to a table without a model feature",
        results: true,
        files: &[("new.csv", "sample,group,a,b\nn1,x,1,2\n")],
        cmd: Cmd::Line(&["apply", "res", "new.csv"]),
        at: "new.csv:",
        says: &["feature(s) c are not in the table's header"],
        ..BAD
    },
    Case {
        name: "apply to a table with a text cell in a feature",
        results: true,
        files: &[("new.csv", "sample,group,a,b,c\nn1,x,1,2,3\nn2,x,1,two,3\n")],
        cmd: Cmd::Line(&["apply", "res", "new.csv"]),
        at: "new.csv:3:",
        says: &["column `b`", "`two`"],
        ..BAD
    },
    Case {
        name: "apply to a table with a ragged row",
        results: true,
        files: &[("new.csv", "sample,group,a,b,c\nn1,x,1,2,3\nn2,x,1,2\n")],
        cmd: Cmd::Line(&["apply", "res", "new.csv"]),
        at: "new.csv:3:",
        says: &["fields"],
        ..BAD
    },
    Case {
        name: "apply to an empty table",
        results: true,
        files: &[("new.csv", "")],
        cmd: Cmd::Line(&["apply", "res", "new.csv"]),
        at: "new.csv:",
        says: &["empty"],
        ..BAD
    },
    Case {
        name: "apply to a table that does not exist",
        results: true,
        cmd: Cmd::Line(&["apply", "res", "absent.csv"]),
        at: "absent.csv:",
        says: &["cannot read the file"],
        ..BAD
    },
    Case {
        name: "apply to a device",
        results: true,
        cmd: Cmd::Line(&["apply", "res", "/dev/zero"]),
        at: "/dev/zero:",
        says: &["not a regular file"],
        ..BAD
    },
    Case {
        name: "apply writing into the results folder it reads",
        results: true,
        cmd: Cmd::Line(&["apply", "res", "data.csv", "--out", "res", "--replace"]),
        at: "res:",
        says: &["would overlap the results folder", "choose another --out"],
        ..BAD
    },
    Case {
        name: "apply writing inside the results folder",
        results: true,
        cmd: Cmd::Line(&["apply", "res", "data.csv", "--out", "res/scored"]),
        at: "res/scored:",
        says: &["would overlap the results folder"],
        ..BAD
    },
    Case {
        name: "apply writing through a link to the results folder",
        results: true,
        links: &[("same", "res")],
        cmd: Cmd::Line(&["apply", "res", "data.csv", "--out", "same", "--replace"]),
        at: "same:",
        says: &["would overlap the results folder", "links followed"],
        ..BAD
    },
    Case {
        name: "apply writing over the table's folder",
        results: true,
        files: &[("batch/new.csv", "sample,group,a,b,c\nn1,x,1,2,3\n")],
        cmd: Cmd::Line(&[
            "apply",
            "res",
            "batch/new.csv",
            "--out",
            "batch",
            "--replace",
        ]),
        at: "batch:",
        says: &["would overlap the table"],
        ..BAD
    },
    Case {
        name: "apply writing over a folder of the user",
        results: true,
        files: &[("mine/thesis.tex", "chapter one")],
        cmd: Cmd::Line(&["apply", "res", "data.csv", "--out", "mine", "--replace"]),
        at: "mine:",
        says: &["not a sextant results folder", "will not replace it"],
        ..BAD
    },
    // -----------------------------------------------------------------------
    // verify: what it is given, and what a manifest may make it open.
    Case {
        name: "verify a folder without a manifest",
        files: &[("empty/readme.txt", "x")],
        cmd: Cmd::Line(&["verify", "empty"]),
        at: "empty:",
        says: &["not a sextant results folder"],
        ..BAD
    },
    Case {
        name: "verify a manifest that is not JSON",
        results: true,
        files: &[("res/manifest.json", "[1, 2")],
        cmd: Cmd::Line(&["verify", "res"]),
        at: "res:",
        says: &["manifest.json"],
        ..BAD
    },
    Case {
        name: "verify a manifest written by another program",
        results: true,
        files: &[("res/manifest.json", "{\"tool\": {\"name\": \"other\"}}")],
        cmd: Cmd::Line(&["verify", "res"]),
        at: "res:",
        says: &["not written by sextant"],
        ..BAD
    },
    Case {
        name: "verify a file instead of a folder",
        cmd: Cmd::Line(&["verify", "data.csv"]),
        at: "data.csv:",
        says: &["not a sextant results folder"],
        ..BAD
    },
    Case {
        name: "verify a results folder with an extra file",
        results: true,
        files: &[("res/notes.txt", "mine")],
        cmd: Cmd::Line(&["verify", "res"]),
        code: 1,
        at: "notes.txt",
        says: &["NOT IN THE MANIFEST"],
        ..BAD
    },
    Case {
        name: "verify a manifest that names a system file",
        results: true,
        files: &[(
            "res/manifest.json",
            "{\"tool\": {\"name\": \"sextant\", \"version\": \"0.1.0\"}, \"recipe\": {\"path\": \"../made.toml\", \"sha256\": \"0\"}, \"inputs\": [{\"path\": \"/etc/passwd\", \"sha256\": \"0\"}], \"outputs\": [], \"digest\": \"0\"}",
        )],
        cmd: Cmd::Line(&["verify", "res"]),
        code: 1,
        at: "/etc/passwd",
        says: &["digest"],
        ..BAD
    },
];

// ---------------------------------------------------------------------------
// Running a case
// ---------------------------------------------------------------------------

/// Whether an entry a failed command left beside the results folder may stay.
/// None may today; if the folder lock becomes a file that outlives runs (say
/// `.out.sextant-lock`), allow it here and nowhere else.
fn may_remain(_name: &str) -> bool {
    false
}

/// Every path under `root`, relative.
fn entries(root: &Path) -> BTreeSet<PathBuf> {
    fn walk(root: &Path, dir: &Path, into: &mut BTreeSet<PathBuf>) {
        let Ok(list) = std::fs::read_dir(dir) else {
            return;
        };
        for entry in list.flatten() {
            let path = entry.path();
            into.insert(path.strip_prefix(root).expect("under root").to_path_buf());
            if entry.file_type().is_ok_and(|t| t.is_dir()) {
                walk(root, &path, into);
            }
        }
    }
    let mut set = BTreeSet::new();
    walk(root, root, &mut set);
    set
}

/// What a failed command left behind: the results folder and any new entry
/// (staging folders, scratch files, locks) that [`may_remain`] does not allow.
fn leftovers(root: &Path, before: &BTreeSet<PathBuf>) -> Vec<String> {
    let mut left: Vec<String> = entries(root)
        .difference(before)
        .filter(|p| {
            !p.file_name()
                .is_some_and(|n| may_remain(&n.to_string_lossy()))
        })
        .map(|p| p.display().to_string())
        .collect();
    if root.join("out").symlink_metadata().is_ok() && !before.contains(Path::new("out")) {
        left.push("the results folder `out`".into());
    }
    left.dedup();
    left
}

fn write(root: &Path, rel: &str, bytes: &[u8]) {
    let path = root.join(rel);
    if let Some(parent) = path.parent() {
        std::fs::create_dir_all(parent).expect("create folder");
    }
    std::fs::write(path, bytes).expect("write file");
}

impl Case {
    fn recipe_bytes(&self) -> Vec<u8> {
        match self.recipe {
            Recipe::Base => BASE.into(),
            Recipe::Section(s) => format!("{BASE}\n{s}\n").into_bytes(),
            Recipe::Input(lines) => BASE
                .replace(
                    "groups = [\"group\"]\n",
                    &format!("groups = [\"group\"]\n{lines}\n"),
                )
                .into_bytes(),
            Recipe::Replace(from, to) => {
                assert!(BASE.contains(from), "`{from}` is not in the base recipe");
                BASE.replace(from, to).into_bytes()
            }
            Recipe::Whole(text) => text.into(),
            Recipe::Bytes(bytes) => bytes.to_vec(),
        }
    }

    fn set_up(&self, root: &Path) {
        write(root, "recipe.toml", &self.recipe_bytes());
        match self.data {
            Data::Base => write(root, "data.csv", DATA.as_bytes()),
            Data::Text(text) => write(root, "data.csv", text.as_bytes()),
            Data::Bytes(bytes) => write(root, "data.csv", bytes),
            Data::Absent => {}
        }
        if self.results {
            write(
                root,
                "made.toml",
                BASE.replace("\"out\"", "\"res\"").as_bytes(),
            );
            let made = Command::new(env!("CARGO_BIN_EXE_sextant"))
                .args(["run", "made.toml"])
                .current_dir(root)
                .output()
                .expect("the sextant binary starts");
            assert!(made.status.success(), "{}: the results folder", self.name);
        }
        for (rel, text) in self.files {
            write(root, rel, text.as_bytes());
        }
        for (link, target) in self.links {
            std::os::unix::fs::symlink(target, root.join(link)).expect("make a link");
        }
    }

    /// The command lines this case runs: the options, then the recipe (a
    /// path given in `args` that ends in .toml replaces `recipe.toml`).
    fn commands(&self) -> Vec<Vec<&'static str>> {
        let names: &[&str] = match self.cmd {
            Cmd::Check => &["check"],
            Cmd::Run => &["run"],
            Cmd::Both => &["check", "run"],
            Cmd::Line(line) => return vec![line.to_vec()],
        };
        names
            .iter()
            .map(|&name| {
                let mut line = vec![name];
                line.extend(self.args.iter().copied());
                if !self.args.iter().any(|a| a.ends_with(".toml")) {
                    line.push("recipe.toml");
                }
                line
            })
            .collect()
    }

    /// Runs the case; returns what it found.
    fn evaluate(&self) -> Verdict {
        let tmp = tempfile::tempdir().expect("temporary folder");
        let root = tmp.path();
        self.set_up(root);
        let mut verdict = Verdict::default();
        let mut all_two = true;
        let mut all_positioned = true;
        for line in self.commands() {
            let before = entries(root);
            let out = Command::new(env!("CARGO_BIN_EXE_sextant"))
                .args(&line)
                .current_dir(root)
                .env("SEXTANT_NO_PROGRESS", "1")
                .output()
                .expect("the sextant binary starts");
            let code = out.status.code();
            let stderr = String::from_utf8_lossy(&out.stderr).into_owned();
            let stdout = String::from_utf8_lossy(&out.stdout).into_owned();
            let mut wrong = Vec::new();
            all_two &= code == Some(2);
            if code != Some(self.code) {
                wrong.push(format!("exit code {code:?}, expected {}", self.code));
            }
            if stderr.contains("panicked") || stderr.contains("RUST_BACKTRACE") || code == Some(101)
            {
                verdict.panicked = true;
                wrong.push("the binary panicked".into());
            }
            // A failed verification is a report on standard output, not an error.
            let report = self.code == 1 && !stdout.is_empty();
            let shown = if report {
                format!("{stderr}{stdout}")
            } else {
                stderr.clone()
            };
            let positioned = !self.at.is_empty() && shown.contains(self.at);
            all_positioned &= positioned && has_line(self.at);
            if !self.at.is_empty() && !positioned {
                wrong.push(format!("stderr does not name {:?}", self.at));
            }
            for part in self.says {
                if !shown.contains(part) {
                    wrong.push(format!("stderr lacks {part:?}"));
                }
            }
            for part in self.not {
                if stderr.contains(part) || stdout.contains(part) {
                    wrong.push(format!("the output contains {part:?}"));
                }
            }
            if self.code != 0 && !report {
                if !stderr.starts_with("error: ") {
                    wrong.push("stderr does not start with `error: `".into());
                }
                if !stdout.is_empty() {
                    wrong.push("stdout is not empty on an error".into());
                }
            }
            if self.code != 0 || line[0] == "check" {
                for left in leftovers(root, &before) {
                    wrong.push(format!("left behind: {left}"));
                }
            }
            if !wrong.is_empty() {
                let mut report = format!("case `{}` (sextant {}):\n", self.name, line.join(" "));
                for w in &wrong {
                    report.push_str(&format!("    - {w}\n"));
                }
                for l in stderr.lines() {
                    report.push_str(&format!("      | {}\n", l.escape_debug()));
                }
                verdict.mismatches.push(report);
            }
        }
        verdict.exit_two = all_two;
        verdict.positioned = all_positioned;
        verdict
    }
}

/// Whether a position fragment names a line (`data.csv:7:`), not only a file.
fn has_line(at: &str) -> bool {
    at.split(':')
        .nth(1)
        .is_some_and(|l| !l.is_empty() && l.bytes().all(|b| b.is_ascii_digit()))
}

#[derive(Default)]
struct Verdict {
    mismatches: Vec<String>,
    exit_two: bool,
    positioned: bool,
    panicked: bool,
}

#[test]
fn bad_inputs_are_refused_with_position_and_remedy() {
    let mut names = BTreeSet::new();
    for c in CASES {
        assert!(names.insert(c.name), "case name `{}` is used twice", c.name);
    }
    // The cases are independent: a few at a time.
    let threads = std::thread::available_parallelism().map_or(2, |n| n.get().min(4));
    let verdicts: Vec<Verdict> = std::thread::scope(|scope| {
        let chunks: Vec<_> = CASES
            .chunks(CASES.len().div_ceil(threads))
            .map(|chunk| scope.spawn(move || chunk.iter().map(Case::evaluate).collect::<Vec<_>>()))
            .collect();
        chunks
            .into_iter()
            .flat_map(|h| h.join().expect("a worker"))
            .collect()
    });
    let mismatches: Vec<&String> = verdicts.iter().flat_map(|v| &v.mismatches).collect();
    for m in &mismatches {
        eprintln!("{m}");
    }
    let summary = format!(
        "catalogue: {} cases, {} exit 2, {} positioned (file and line), {} panics, {} mismatches",
        CASES.len(),
        verdicts.iter().filter(|v| v.exit_two).count(),
        verdicts.iter().filter(|v| v.positioned).count(),
        verdicts.iter().filter(|v| v.panicked).count(),
        mismatches.len()
    );
    println!("{summary}");
    eprintln!("{summary}");
    assert!(mismatches.is_empty(), "{summary}; details above");
}
