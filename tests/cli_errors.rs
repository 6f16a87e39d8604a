//! End-to-end error handling: the real binary on bad recipes and bad tables.
//!
//! Every case writes a recipe (and usually `data.csv`) into a fresh temporary
//! folder, runs `sextant check` and/or `sextant run` there, and checks
//!
//! * the documented exit code (2 = the recipe or an input is invalid,
//!   1 = the analysis failed, 0 = success);
//! * that standard error names the file, the line (and for recipes the column)
//!   and the offending text;
//! * for a failed `run`, that the folder is exactly as it was before: no output
//!   folder, no hidden `.sextant-*` staging folder, no file touched.
//!
//! All mismatches of the table are collected and printed before the test fails.
//!
//! The regression tests at the end each pin a message that was once wrong.

use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use std::process::Command;

// ---------------------------------------------------------------------------
// Fixtures
// ---------------------------------------------------------------------------

/// A small valid table: an id, a group and three numeric features.
const DATA: &str = "\
sample,group,a,b,c
s1,x,1.5,2.0,3.5
s2,x,2.0,1.5,4.0
s3,y,3.0,3.5,2.0
s4,y,4.5,2.5,1.0
s5,z,2.5,4.0,3.0
";

/// A valid recipe for [`DATA`]. Line numbers, for reading the expectations below:
///
/// ```text
///  1 format = 1
///  2
///  3 [input]
///  4 file = "data.csv"
///  5 id = "sample"
///  6 groups = ["group"]
///  7
///  8 [output]
///  9 folder = "out"
/// ```
const BASE: &str = "\
format = 1

[input]
file = \"data.csv\"
id = \"sample\"
groups = [\"group\"]

[output]
folder = \"out\"
";

/// [`BASE`] with a section appended: its header is line 11, its keys start on line 12.
fn with_section(section: &str) -> String {
    format!("{BASE}\n{section}\n")
}

/// [`BASE`] with extra `[input]` lines inserted after `groups`: they start on
/// line 7 (and `[output]` moves down accordingly).
fn with_input(lines: &str) -> String {
    BASE.replace(
        "groups = [\"group\"]\n",
        &format!("groups = [\"group\"]\n{lines}\n"),
    )
}

/// [`BASE`] with one piece of text replaced (it must occur).
fn base_replacing(from: &str, to: &str) -> String {
    assert!(BASE.contains(from), "`{from}` is not in the base recipe");
    BASE.replace(from, to)
}

fn sha256_hex(bytes: &[u8]) -> String {
    use sha2::{Digest, Sha256};
    Sha256::digest(bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

// ---------------------------------------------------------------------------
// Running the binary and looking at folders
// ---------------------------------------------------------------------------

struct Outcome {
    code: Option<i32>,
    stdout: String,
    stderr: String,
}

fn sextant(dir: &Path, args: &[&str]) -> Outcome {
    let out = Command::new(env!("CARGO_BIN_EXE_sextant"))
        .args(args)
        .current_dir(dir)
        .output()
        .expect("the sextant binary starts");
    Outcome {
        code: out.status.code(),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

/// Every file and folder under `root`, relative, with file contents (`None` for folders).
fn snapshot(root: &Path) -> BTreeMap<PathBuf, Option<Vec<u8>>> {
    fn walk(root: &Path, dir: &Path, into: &mut BTreeMap<PathBuf, Option<Vec<u8>>>) {
        let mut entries: Vec<_> = std::fs::read_dir(dir)
            .expect("readable folder")
            .map(|e| e.expect("readable entry").path())
            .collect();
        entries.sort();
        for path in entries {
            let rel = path.strip_prefix(root).expect("under root").to_path_buf();
            if path.is_dir() {
                into.insert(rel, None);
                walk(root, &path, into);
            } else {
                into.insert(rel, Some(std::fs::read(&path).expect("readable file")));
            }
        }
    }
    let mut map = BTreeMap::new();
    walk(root, root, &mut map);
    map
}

/// Paths under `root` whose last part starts with `.sextant-` (staging leftovers).
fn staging_leftovers(root: &Path) -> Vec<PathBuf> {
    snapshot(root)
        .into_keys()
        .filter(|p| {
            p.file_name()
                .is_some_and(|n| n.to_string_lossy().starts_with(".sextant-"))
        })
        .collect()
}

/// Describes how two snapshots differ (empty when equal).
fn snapshot_diff(
    before: &BTreeMap<PathBuf, Option<Vec<u8>>>,
    after: &BTreeMap<PathBuf, Option<Vec<u8>>>,
) -> Vec<String> {
    let mut diff = Vec::new();
    for (path, content) in after {
        match before.get(path) {
            None => diff.push(format!("created {}", path.display())),
            Some(old) if old != content => diff.push(format!("changed {}", path.display())),
            _ => {}
        }
    }
    for path in before.keys().filter(|p| !after.contains_key(*p)) {
        diff.push(format!("removed {}", path.display()));
    }
    diff
}

fn write_file(root: &Path, rel: &str, bytes: &[u8]) {
    let path = root.join(rel);
    if let Some(parent) = path.parent() {
        std::fs::create_dir_all(parent).expect("create folder");
    }
    std::fs::write(&path, bytes).expect("write file");
}

// ---------------------------------------------------------------------------
// The case table
// ---------------------------------------------------------------------------

#[derive(Debug, Clone, Copy, PartialEq)]
enum Mode {
    Check,
    Run,
    /// `check`, then `run`: both must give the same exit code and messages.
    Both,
}

struct Case {
    name: &'static str,
    mode: Mode,
    /// Folder (relative to the temporary folder) holding the recipe and `data.csv`.
    folder: &'static str,
    recipe: String,
    /// `data.csv` beside the recipe; `None` writes no data file.
    data: Option<Vec<u8>>,
    /// Further files, relative to the temporary folder.
    files: Vec<(&'static str, Vec<u8>)>,
    /// The recipe path given on the command line, if not the written one.
    recipe_arg: Option<&'static str>,
    code: i32,
    stderr: Vec<String>,
    stdout: Vec<String>,
}

fn case(name: &'static str, recipe: impl Into<String>) -> Case {
    Case {
        name,
        mode: Mode::Both,
        folder: "",
        recipe: recipe.into(),
        data: Some(DATA.as_bytes().to_vec()),
        files: Vec::new(),
        recipe_arg: None,
        code: 2,
        stderr: Vec::new(),
        stdout: Vec::new(),
    }
}

impl Case {
    fn data(mut self, text: &str) -> Self {
        self.data = Some(text.as_bytes().to_vec());
        self
    }
    fn data_bytes(mut self, bytes: &[u8]) -> Self {
        self.data = Some(bytes.to_vec());
        self
    }
    fn no_data(mut self) -> Self {
        self.data = None;
        self
    }
    fn file(mut self, rel: &'static str, text: &str) -> Self {
        self.files.push((rel, text.as_bytes().to_vec()));
        self
    }
    fn in_folder(mut self, folder: &'static str) -> Self {
        self.folder = folder;
        self
    }
    fn recipe_arg(mut self, arg: &'static str) -> Self {
        self.recipe_arg = Some(arg);
        self
    }
    fn only(mut self, mode: Mode) -> Self {
        self.mode = mode;
        self
    }
    fn code(mut self, code: i32) -> Self {
        self.code = code;
        self
    }
    /// Substrings standard error must contain.
    fn err(mut self, parts: &[&str]) -> Self {
        self.stderr.extend(parts.iter().map(|s| s.to_string()));
        self
    }
    fn err_owned(mut self, part: String) -> Self {
        self.stderr.push(part);
        self
    }
    /// Substrings standard output must contain (success cases).
    fn out(mut self, parts: &[&str]) -> Self {
        self.stdout.extend(parts.iter().map(|s| s.to_string()));
        self
    }

    fn recipe_path(&self) -> String {
        if self.folder.is_empty() {
            "recipe.toml".to_string()
        } else {
            format!("{}/recipe.toml", self.folder)
        }
    }

    fn in_dir(&self, name: &str) -> String {
        if self.folder.is_empty() {
            name.to_string()
        } else {
            format!("{}/{name}", self.folder)
        }
    }

    /// Writes the case into `root`.
    fn set_up(&self, root: &Path) {
        write_file(root, &self.recipe_path(), self.recipe.as_bytes());
        if let Some(data) = &self.data {
            write_file(root, &self.in_dir("data.csv"), data);
        }
        for (rel, bytes) in &self.files {
            write_file(root, rel, bytes);
        }
    }

    /// Runs the case in a fresh temporary folder; returns its mismatches.
    fn evaluate(&self) -> Vec<String> {
        let tmp = tempfile::tempdir().expect("temporary folder");
        let root = tmp.path();
        self.set_up(root);
        let recipe_arg = self
            .recipe_arg
            .map(str::to_string)
            .unwrap_or_else(|| self.recipe_path());
        let mut problems = Vec::new();
        let commands: &[&str] = match self.mode {
            Mode::Check => &["check"],
            Mode::Run => &["run"],
            Mode::Both => &["check", "run"],
        };
        for &command in commands {
            let before = snapshot(root);
            let got = sextant(root, &[command, &recipe_arg]);
            let after = snapshot(root);
            let mut wrong = Vec::new();
            if got.code != Some(self.code) {
                wrong.push(format!("exit code {:?}, expected {}", got.code, self.code));
            }
            for part in &self.stderr {
                if !got.stderr.contains(part.as_str()) {
                    wrong.push(format!("stderr lacks {part:?}"));
                }
            }
            for part in &self.stdout {
                if !got.stdout.contains(part.as_str()) {
                    wrong.push(format!("stdout lacks {part:?}"));
                }
            }
            if got.stderr.contains("panicked") {
                wrong.push("the binary panicked".to_string());
            }
            if self.code != 0 {
                if !got.stderr.starts_with("error: ") {
                    wrong.push("stderr does not start with `error: `".to_string());
                }
                if !got.stdout.is_empty() {
                    wrong.push("stdout is not empty on an error".to_string());
                }
                // A failed command must leave the folder exactly as it was:
                // no output folder, no staging folder, nothing touched.
                for d in snapshot_diff(&before, &after) {
                    wrong.push(format!("after the failed command: {d}"));
                }
            } else if command == "check" {
                for d in snapshot_diff(&before, &after) {
                    wrong.push(format!("`check` wrote to the folder: {d}"));
                }
            }
            for p in staging_leftovers(root) {
                wrong.push(format!("staging folder left behind: {}", p.display()));
            }
            if !wrong.is_empty() {
                let mut report = format!("case `{}` (sextant {command}):\n", self.name);
                for w in &wrong {
                    let _ = writeln!(report, "    - {w}");
                }
                let _ = writeln!(
                    report,
                    "    expected code {} and stderr parts {:?}",
                    self.code, self.stderr
                );
                let _ = writeln!(report, "    actual code {:?}; stderr:", got.code);
                for line in got.stderr.lines() {
                    let _ = writeln!(report, "      | {line}");
                }
                if self.code == 0 || !got.stdout.is_empty() {
                    let _ = writeln!(report, "    stdout:");
                    for line in got.stdout.lines() {
                        let _ = writeln!(report, "      | {line}");
                    }
                }
                problems.push(report);
            }
        }
        problems
    }
}

/// Runs every case, prints every mismatch, and fails once at the end.
fn run_table(cases: &[Case]) {
    let mut names = std::collections::BTreeSet::new();
    for c in cases {
        assert!(names.insert(c.name), "case name `{}` is used twice", c.name);
    }
    let failures: Vec<String> = cases.iter().flat_map(Case::evaluate).collect();
    if !failures.is_empty() {
        for f in &failures {
            eprintln!("{f}");
        }
        panic!(
            "{} mismatch(es) in a table of {} case(s); details above",
            failures.len(),
            cases.len()
        );
    }
}

// ---------------------------------------------------------------------------
// Bad recipes
// ---------------------------------------------------------------------------

fn recipe_cases() -> Vec<Case> {
    vec![
        // [[plot]] tables: each mistake points at its own line.
        case(
            "unknown plot kind",
            with_section("[[plot]]\nkind = \"pie\""),
        )
        .err(&[
            "recipe.toml:12:8:",
            "unknown choice `pie`",
            "`scree`",
            "`outlier-map`",
        ]),
        case(
            "plot component beyond compute",
            with_section("[components]\ncompute = 3\n\n[[plot]]\nkind = \"scores\"\ny = 4"),
        )
        .err(&["recipe.toml:16:5:", "component 4 is beyond compute = 3"]),
        case(
            "plot colour is not a group",
            with_section("[[plot]]\nkind = \"scores\"\ncolor = \"a\""),
        )
        .err(&[
            "recipe.toml:13:9:",
            "color = `a` is not a group column",
            "group",
        ]),
        case(
            "plot key that does not apply",
            with_section("[[plot]]\nkind = \"scree\"\nellipse = 0.95"),
        )
        .err(&[
            "recipe.toml:13:11:",
            "`ellipse` does not apply to a `scree` plot",
        ]),
        case(
            "plot file outside plots/",
            with_section("[[plot]]\nkind = \"scree\"\nfile = \"../x.svg\""),
        )
        .err(&[
            "recipe.toml:13:8:",
            "must be a plain file name ending in .svg",
        ]),
        case(
            "two plots on one file",
            with_section("[[plot]]\nkind = \"scree\"\n\n[[plot]]\nkind = \"scree\""),
        )
        .err(&["recipe.toml:14:1:", "two plots would write plots/scree.svg"]),
        case(
            "toml syntax error",
            "format = 1\n\n[input\nfile = \"data.csv\"\n",
        )
        .err(&["recipe.toml:3:7:", "expected `]`", "3 | [input"]),
        case(
            "unknown top-level key",
            format!("colour = \"blue\"\n{BASE}"),
        )
        .err(&[
            "recipe.toml:1:1:",
            "`colour`",
            "expected one of `format`",
            "`output`",
        ]),
        case(
            "unknown key in [scaling]",
            with_section("[scaling]\nmethd = \"center\""),
        )
        .err(&[
            "recipe.toml:12:1:",
            "unknown field `methd`",
            "`method`",
            "`constant_features`",
        ]),
        case(
            "unknown scaling method",
            with_section("[scaling]\nmethod = \"zscore\""),
        )
        .err(&[
            "recipe.toml:12:10:",
            "`zscore`",
            "`none`",
            "`center`",
            "`unit-variance`",
            "`pareto`",
            "`range`",
        ]),
        case(
            "unknown missing method",
            with_section("[missing]\nmethod = \"zero\""),
        )
        .err(&[
            "recipe.toml:12:10:",
            "`zero`",
            "`drop-rows`",
            "`mean`",
            "`median`",
        ]),
        case(
            "keep is not a rule",
            with_section("[components]\nkeep = \"three\""),
        )
        .err(&[
            "recipe.toml:12:8:",
            "`three`",
            "\"kaiser\"",
            "\"broken-stick\"",
            "{ variance = 0.9 }",
        ]),
        case("keep is zero", with_section("[components]\nkeep = 0"))
            .err(&["recipe.toml:12:8:", "keep = 0 is not a positive count"]),
        case(
            "keep is a fraction",
            with_section("[components]\nkeep = 2.5"),
        )
        .err(&["recipe.toml:12:8:", "2.5", "a component count such as 3"]),
        case(
            "keep variance share out of range",
            with_section("[components]\nkeep = { variance = 1.2 }"),
        )
        .err(&["recipe.toml:12:21:", "1.2 is not a share", "from 0 to 1"]),
        case(
            "compute is text",
            with_section("[components]\ncompute = \"ten\""),
        )
        .err(&["recipe.toml:12:11:", "\"ten\"", "12 | compute = \"ten\""]),
        case("compute is zero", with_section("[components]\ncompute = 0"))
            .err(&["recipe.toml:12:11:", "12 | compute = 0"]),
        case(
            "max_feature_missing out of range",
            with_section("[missing]\nmax_feature_missing = 1.5"),
        )
        .err(&["recipe.toml:12:23:", "1.5 is not a share", "from 0 to 1"]),
        case("format 2", base_replacing("format = 1", "format = 2")).err(&[
            "recipe.toml:1:10:",
            "recipe format 2 is not supported",
            "format = 1",
        ]),
        case(
            "missing [output]",
            "format = 1\n\n[input]\nfile = \"data.csv\"\nid = \"sample\"\n",
        )
        .err(&["recipe.toml:1:1:", "missing field `output`"]),
        case("duplicate key", format!("format = 1\n{BASE}")).err(&[
            "recipe.toml:2:1:",
            "`format` is defined twice; its first definition is on line 1",
        ]),
        case("sha256 pin is not a digest", with_input("sha256 = \"abc\"")).err(&[
            "recipe.toml:7:10:",
            "`abc` is not a SHA-256 digest",
            "64 hexadecimal digits",
        ]),
        case(
            "delimiter of two characters",
            with_input("delimiter = \";;\""),
        )
        .err(&[
            "recipe.toml:7:13:",
            "delimiter `;;` is not one ASCII character",
        ]),
        case("recipe file not found", BASE)
            .recipe_arg("nothere.toml")
            .err(&["nothere.toml: cannot read the recipe"]),
        case(
            "recipe with CRLF line ends",
            BASE.replace("id = \"sample\"", "id = \"sampel\"")
                .replace('\n', "\r\n"),
        )
        .err(&[
            "recipe.toml:5:6:",
            "`sampel`",
            "did you mean `sample`?",
            "5 | id = \"sampel\"\n",
        ]),
    ]
}

// ---------------------------------------------------------------------------
// Bad tables
// ---------------------------------------------------------------------------

fn table_cases() -> Vec<Case> {
    vec![
        case(
            "input file not found",
            base_replacing("data.csv", "missing.csv"),
        )
        .err(&["missing.csv: cannot read the file"]),
        case("empty data file", BASE)
            .data("")
            .err(&["data.csv: the file is empty"]),
        case("header only", BASE)
            .data("sample,group,a,b,c\n")
            .err(&["data.csv: 0 usable rows", "at least 2"]),
        case("ragged row", BASE)
            .data("sample,group,a,b,c\ns1,x,1,2,3\ns2,x,2,3,4\ns3,y,3,4,5,6\ns4,y,1,1,1\n")
            .err(&["data.csv:4: the row has 6 fields but the header has 5"]),
        case("short row", BASE)
            .data("sample,group,a,b,c\ns1,x,1,2,3\ns2,x,2,3\ns3,y,3,4,5\n")
            .err(&["data.csv:3: the row has 4 fields but the header has 5"]),
        case("ragged row after a quoted line break", BASE)
            .data("sample,group,a,b,c\ns1,\"x\ny\",1,2,3\ns2,x,2,3,4,9\ns3,y,3,4,5\n")
            .err(&["data.csv:4: the row has 6 fields"]),
        case("duplicate column name", BASE)
            .data("sample,group,a,b,b\ns1,x,1,2,3\ns2,x,2,3,4\ns3,y,3,4,6\n")
            .err(&[
                "data.csv:1:",
                "column name `b` appears twice",
                "columns 4 and 5",
            ]),
        case("empty header name", BASE)
            .data("sample,group,,b,c\ns1,x,1,2,3\ns2,x,2,3,4\ns3,y,3,4,6\n")
            .err(&["data.csv:1:", "header column 3 has no name"]),
        case("text that is not UTF-8", BASE)
            .data_bytes(b"sample,group,a,b,c\ns1,x,1,2,3\ns2,\xff\xfe,2,3,4\ns3,y,3,4,6\n")
            .err(&["data.csv:3:", "not valid UTF-8"]),
        case(
            "id column named in the wrong case",
            base_replacing("id = \"sample\"", "id = \"Sample\""),
        )
        .err(&[
            "recipe.toml:5:6:",
            "column `Sample` is not in the header of data.csv",
            "did you mean `sample`?",
            "5 | id = \"Sample\"",
        ]),
        case(
            "group column misspelt",
            base_replacing("[\"group\"]", "[\"gruop\"]"),
        )
        .err(&[
            "recipe.toml:6:11:",
            "column `gruop` is not in the header",
            "did you mean `group`?",
        ]),
        case(
            "feature glob matches nothing",
            with_input("features = [\"*_pct\"]"),
        )
        .err(&[
            "recipe.toml:7:13:",
            "pattern `*_pct` matches no column of data.csv",
        ]),
        case(
            "listed feature misspelt",
            with_input("features = [\"a\", \"bb\"]"),
        )
        .err(&[
            "recipe.toml:7:18:",
            "column `bb` is not in the header",
            "did you mean `b`?",
        ]),
        case(
            "exclude names a missing column",
            with_input("exclude = [\"notes\"]"),
        )
        .err(&[
            "recipe.toml:7:12:",
            "column `notes` is not in the header of data.csv",
        ]),
        case(
            "decimal comma in a listed feature",
            with_input("features = [\"a\", \"b\"]"),
        )
        .data("sample,group,a,b,c\ns1,x,1.5,2,1\ns2,x,2.5,3,2\ns3,y,\"7,2\",4,3\ns4,y,1,5,4\n")
        .err(&["data.csv:4:", "column `a`", "`7,2`", "decimal comma"]),
        case(
            "decimal comma with a semicolon delimiter",
            with_input("delimiter = \";\""),
        )
        .data("sample;group;a;b;c\ns1;x;1.5;2;1\ns2;x;2.5;3;2\ns3;y;3;4,25;3\ns4;y;1;5;4\n")
        .err(&["data.csv:4:", "column `b`", "`4,25`", "decimal comma"]),
        case("stray text in a numeric column", BASE)
            .data("sample,group,a,b,c\ns1,x,1.5,2,1\ns2,x,2.5,n/d,2\ns3,y,3,4,3\ns4,y,1,5,4\n")
            .err(&["data.csv:3:", "column `b`", "`n/d`", "input.missing"]),
        case("infinite value", BASE)
            .data("sample,group,a,b,c\ns1,x,1.5,2,1\ns2,x,2.5,3,2\ns3,y,3,inf,3\ns4,y,1,5,4\n")
            .err(&["data.csv:4:", "column `b`", "non-finite value `inf`"]),
        case("overflowing number", BASE)
            .data("sample,group,a,b,c\ns1,x,1.5,2,1\ns2,x,1e999,3,2\ns3,y,3,4,3\ns4,y,1,5,4\n")
            .err(&["data.csv:3:", "column `a`", "`1e999`"]),
        case("NaN written as a value", BASE)
            .data("sample,group,a,b,c\ns1,x,1.5,2,1\ns2,x,2.5,3,2\ns3,y,3,4,NaN\ns4,y,1,5,4\n")
            .err(&["data.csv:4:", "column `c`", "`NaN`"]),
        case("duplicate ids", BASE)
            .data("sample,group,a,b,c\ns1,x,1.5,2,1\ns2,x,2.5,3,2\ns3,y,3,4,3\ns1,y,1,5,4\n")
            .err(&[
                "data.csv:5:",
                "id `s1`",
                "column `sample`",
                "already appeared at line 2",
            ]),
        case("empty id", BASE)
            .data("sample,group,a,b,c\ns1,x,1.5,2,1\n,x,2.5,3,2\ns3,y,3,4,3\n")
            .err(&["data.csv:3:", "the id column `sample` is empty"]),
        case("no numeric column", BASE)
            .data("sample,group,a\ns1,x,p\ns2,x,q\ns3,y,r\n")
            .err(&["data.csv: no usable features", "no numeric column"]),
        case("one data row", BASE)
            .data("sample,group,a,b,c\ns1,x,1,2,3\n")
            .err(&["data.csv: 1 usable row", "at least 2"]),
    ]
}

// ---------------------------------------------------------------------------
// Recipes that do not fit their data
// ---------------------------------------------------------------------------

fn plan_cases() -> Vec<Case> {
    let pin = sha256_hex(DATA.as_bytes());
    let zeros = "0".repeat(64);
    vec![
        case(
            "log10 of zero",
            with_section("[transform]\nlog10 = [\"b\"]"),
        )
        .data("sample,group,a,b,c\ns1,x,1.5,2,1\ns2,x,2.5,3,2\ns3,y,3,0,3\ns4,y,1,5,4\n")
        .err(&[
            "data.csv:4:",
            "column `b`",
            "value 0",
            "`log10` needs a value > 0",
        ]),
        case(
            "ln of a negative value",
            with_section("[transform]\nln = [\"c\"]"),
        )
        .data("sample,group,a,b,c\ns1,x,1.5,2,1\ns2,x,2.5,3,-1.5\ns3,y,3,4,3\ns4,y,1,5,4\n")
        .err(&[
            "data.csv:3:",
            "column `c`",
            "-1.5",
            "`ln` needs a value > 0",
        ]),
        case(
            "sqrt of a negative value",
            with_section("[transform]\nsqrt = [\"a\"]"),
        )
        .data("sample,group,a,b,c\ns1,x,1.5,2,1\ns2,x,2.5,3,2\ns3,y,3,4,3\ns4,y,-4,5,4\n")
        .err(&[
            "data.csv:5:",
            "column `a`",
            "-4",
            "`sqrt` needs a value ≥ 0",
        ]),
        case(
            "transform names a non-feature",
            with_section("[transform]\nlog10 = [\"group\"]"),
        )
        .err(&[
            "recipe.toml:12:10:",
            "transform `log10` names `group`",
            "not a feature",
        ]),
        case(
            "two transforms for one feature",
            with_section("[transform]\nlog10 = [\"a\"]\nsqrt = [\"a\"]"),
        )
        .err(&[
            "recipe.toml:13:9:",
            "feature `a` is given two transforms",
            "`log10`",
            "`sqrt`",
        ]),
        case(
            "id also a group",
            base_replacing("[\"group\"]", "[\"group\", \"sample\"]"),
        )
        .err(&[
            "recipe.toml:6:20:",
            "column `sample` is used twice",
            "the id",
            "a group",
        ]),
        case(
            "id also a listed feature",
            with_input("features = [\"a\", \"sample\"]"),
        )
        .err(&[
            "recipe.toml:7:18:",
            "column `sample` is used twice",
            "the id",
            "a feature",
        ]),
        case(
            "constant feature under unit-variance",
            with_section("[scaling]\nmethod = \"unit-variance\""),
        )
        .data("sample,group,a,b,k\ns1,x,1.5,2,7\ns2,x,2.5,3,7\ns3,y,3,4,7\ns4,y,1,5,7\n")
        .err(&[
            "feature `k` is constant (7)",
            "`unit-variance`",
            "constant_features = \"drop\"",
        ]),
        case(
            "constant feature dropped on request",
            with_section("[scaling]\nconstant_features = \"drop\""),
        )
        .data("sample,group,a,b,k\ns1,x,1.5,2,7\ns2,x,2.5,3,7\ns3,y,3,4,7\ns4,y,1,5,7\n")
        .code(0)
        .out(&["dropped  k: constant"]),
        case(
            "keep above compute",
            with_section("[components]\nkeep = 5\ncompute = 3"),
        )
        .err(&[
            "recipe.toml:12:8:",
            "keep = 5",
            "compute = 3",
            "12 | keep = 5",
        ]),
        case(
            "keep above the rank of the data",
            with_section("[components]\nkeep = 3"),
        )
        .data("sample,group,a,b,c\ns1,x,1.5,2,3\ns2,x,2.5,1,7\ns3,y,3,4,1\n")
        .only(Mode::Run)
        .err(&["recipe.toml:12:8:", "keep = 3", "at most 2", "3 rows"]),
        case(
            "fewer than two rows after drop-rows",
            with_section("[missing]\nmethod = \"drop-rows\"\nmax_feature_missing = 0.5"),
        )
        .data("sample,group,a,b,c\ns1,x,NA,2,1\ns2,x,2.5,NA,2\ns3,y,3,4,\ns4,y,1,5,4\ns5,z,-,6,5\n")
        .err(&[
            "data.csv: 1 usable row",
            "after dropping 4 rows",
            "at least 2",
        ]),
        case(
            "every feature dropped by max_feature_missing",
            with_section("[missing]\nmax_feature_missing = 0.1"),
        )
        .data("sample,group,a,b,c\ns1,x,NA,2,1\ns2,x,2.5,NA,2\ns3,y,3,4,\ns4,y,1,5,4\ns5,z,2,6,5\n")
        .err(&["data.csv: no usable features", "max_feature_missing = 0.1"]),
        case(
            "output folder contains the recipe",
            base_replacing("folder = \"out\"", "folder = \".\""),
        )
        .err(&[
            "recipe.toml:9:10:",
            "output folder `.` would contain the recipe",
        ]),
        case(
            "output folder contains the input table",
            base_replacing("data.csv", "tables/data.csv")
                .replace("folder = \"out\"", "folder = \"tables\""),
        )
        .no_data()
        .file("tables/data.csv", DATA)
        .err(&[
            "recipe.toml:9:10:",
            "output folder `tables` would contain the input table",
        ]),
        case(
            "pinned sha256 does not match",
            with_input(&format!("sha256 = \"{zeros}\"")),
        )
        .err(&[
            "recipe.toml:7:10:",
            "input.sha256 pins data.csv",
            "update the pin",
        ])
        .err_owned(zeros.clone())
        .err_owned(pin.clone()),
        case(
            "recipe and table in a subfolder",
            base_replacing("id = \"sample\"", "id = \"Sample\""),
        )
        .in_folder("job")
        .err(&["job/recipe.toml:5:6:", "not in the header of data.csv"]),
        case("table error in a subfolder", BASE)
            .in_folder("job")
            .data("sample,group,a,b,c\ns1,x,1,2,3\ns2,x,2,3\n")
            .err(&["job/data.csv:3: the row has 4 fields"]),
        case("output folder is an existing file", BASE)
            .file("out", "not a folder\n")
            .only(Mode::Run)
            .err(&["out: exists and is not a folder"]),
        case(
            "numbers too large to square",
            with_section("[scaling]\nmethod = \"none\""),
        )
        .data("sample,group,a,b\ns1,x,1e200,2\ns2,x,2e200,1\ns3,y,3e200,4\n")
        .only(Mode::Run)
        // Only the exit code here; the wording is pinned by
        // `spread_too_large_for_double_precision_is_an_error`.
        .code(1),
        case(
            "output parent is a file",
            base_replacing("folder = \"out\"", "folder = \"blocker/out\""),
        )
        .file("blocker", "a file, not a folder\n")
        .err(&[
            "recipe.toml:",
            "output folder `blocker/out` cannot be created",
            "is a file",
        ]),
    ]
}

#[test]
fn bad_recipes() {
    run_table(&recipe_cases());
}

#[test]
fn bad_tables() {
    run_table(&table_cases());
}

#[test]
fn recipes_that_do_not_fit_their_data() {
    run_table(&plan_cases());
}

/// The valid base recipe must pass, or every case above would test nothing.
#[test]
fn the_base_recipe_is_valid() {
    run_table(&[case("base recipe", BASE)
        .code(0)
        .out(&["features   3 selected, 3 used"])]);
    // And the appended sections land where the expectations above assume.
    let text = with_section("[components]\nkeep = 5");
    assert_eq!(text.lines().nth(10), Some("[components]"));
    assert_eq!(text.lines().nth(11), Some("keep = 5"));
    let text = with_input("exclude = []");
    assert_eq!(text.lines().nth(6), Some("exclude = []"));
}

// ---------------------------------------------------------------------------
// Existing output folders
// ---------------------------------------------------------------------------

#[test]
fn refuses_to_replace_a_folder_that_is_not_results() {
    let tmp = tempfile::tempdir().unwrap();
    let root = tmp.path();
    write_file(root, "recipe.toml", BASE.as_bytes());
    write_file(root, "data.csv", DATA.as_bytes());
    write_file(root, "out/notes.txt", b"my own notes, not sextant output\n");
    write_file(root, "out/sub/more.csv", b"x,y\n1,2\n");
    let before = snapshot(root);

    let got = sextant(root, &["run", "recipe.toml"]);
    let mut wrong = Vec::new();
    if got.code != Some(2) {
        wrong.push(format!("exit code {:?}, expected 2", got.code));
    }
    for part in ["out:", "not a sextant results folder", "will not replace"] {
        if !got.stderr.contains(part) {
            wrong.push(format!("stderr lacks {part:?}"));
        }
    }
    wrong.extend(snapshot_diff(&before, &snapshot(root)));
    // --replace does not extend to folders that were never sextant results.
    let got_replace = sextant(root, &["run", "--replace", "recipe.toml"]);
    if got_replace.code != Some(2) {
        wrong.push(format!(
            "with --replace: exit code {:?}, expected 2",
            got_replace.code
        ));
    }
    wrong.extend(
        snapshot_diff(&before, &snapshot(root))
            .into_iter()
            .map(|d| format!("with --replace: {d}")),
    );
    assert!(
        wrong.is_empty(),
        "{wrong:#?}\nstderr:\n{}\nstderr with --replace:\n{}",
        got.stderr,
        got_replace.stderr
    );
}

#[test]
fn an_empty_existing_folder_is_used() {
    let tmp = tempfile::tempdir().unwrap();
    let root = tmp.path();
    write_file(root, "recipe.toml", BASE.as_bytes());
    write_file(root, "data.csv", DATA.as_bytes());
    std::fs::create_dir(root.join("out")).unwrap();
    let got = sextant(root, &["run", "recipe.toml"]);
    assert_eq!(got.code, Some(0), "stderr:\n{}", got.stderr);
    assert!(root.join("out/manifest.json").is_file());
    assert!(
        staging_leftovers(root).is_empty(),
        "{:?}",
        staging_leftovers(root)
    );
}

#[test]
fn a_changed_recipe_or_table_needs_replace() {
    let tmp = tempfile::tempdir().unwrap();
    let root = tmp.path();
    write_file(root, "recipe.toml", BASE.as_bytes());
    write_file(root, "data.csv", DATA.as_bytes());

    let first = sextant(root, &["run", "recipe.toml"]);
    assert_eq!(first.code, Some(0), "first run failed:\n{}", first.stderr);
    assert!(
        root.join("out/manifest.json").is_file(),
        "no manifest after the first run"
    );

    let mut wrong = Vec::new();

    // The same recipe and table again: accepted without --replace.
    let same = sextant(root, &["run", "recipe.toml"]);
    if same.code != Some(0) {
        wrong.push(format!(
            "rerun of the same recipe: exit {:?}\n{}",
            same.code, same.stderr
        ));
    }

    // A changed recipe: refused, and the old results stay byte for byte.
    let old = snapshot(&root.join("out"));
    let changed = with_section("[scaling]\nmethod = \"center\"");
    write_file(root, "recipe.toml", changed.as_bytes());
    let before = snapshot(root);
    let refused = sextant(root, &["run", "recipe.toml"]);
    if refused.code != Some(2) {
        wrong.push(format!(
            "changed recipe: exit {:?}, expected 2",
            refused.code
        ));
    }
    for part in ["out:", "different recipe or input", "--replace"] {
        if !refused.stderr.contains(part) {
            wrong.push(format!(
                "changed recipe: stderr lacks {part:?}:\n{}",
                refused.stderr
            ));
        }
    }
    wrong.extend(
        snapshot_diff(&before, &snapshot(root))
            .into_iter()
            .map(|d| format!("changed recipe: {d}")),
    );

    // A changed table with the original recipe: refused too.
    write_file(root, "recipe.toml", BASE.as_bytes());
    write_file(
        root,
        "data.csv",
        DATA.replace("s5,z,2.5", "s5,z,2.75").as_bytes(),
    );
    let before = snapshot(root);
    let refused = sextant(root, &["run", "recipe.toml"]);
    if refused.code != Some(2) || !refused.stderr.contains("different recipe or input") {
        wrong.push(format!(
            "changed table: exit {:?}, stderr:\n{}",
            refused.code, refused.stderr
        ));
    }
    wrong.extend(
        snapshot_diff(&before, &snapshot(root))
            .into_iter()
            .map(|d| format!("changed table: {d}")),
    );
    if snapshot(&root.join("out")) != old {
        wrong.push("the earlier results changed although the reruns were refused".into());
    }

    // With --replace the changed recipe is accepted and the results change.
    write_file(root, "data.csv", DATA.as_bytes());
    write_file(root, "recipe.toml", changed.as_bytes());
    let replaced = sextant(root, &["run", "--replace", "recipe.toml"]);
    if replaced.code != Some(0) {
        wrong.push(format!(
            "--replace: exit {:?}\n{}",
            replaced.code, replaced.stderr
        ));
    }
    let new = snapshot(&root.join("out"));
    if new == old {
        wrong.push("--replace left the results unchanged".into());
    }
    let manifest = std::fs::read_to_string(root.join("out/manifest.json")).unwrap_or_default();
    if !manifest.contains("\"center\"") {
        wrong.push("the replaced manifest does not record scaling `center`".into());
    }
    for p in staging_leftovers(root) {
        wrong.push(format!("staging folder left behind: {}", p.display()));
    }
    assert!(wrong.is_empty(), "{}", wrong.join("\n"));
}

// ---------------------------------------------------------------------------
// Regression tests: each pins a message or exit code that was once wrong
// ---------------------------------------------------------------------------

#[test]
fn check_refuses_keep_above_the_row_bound() {
    // With centring the rank is at most n - 1 = 2, which `check` can know from the
    // row and feature counts alone, without the decomposition.
    run_table(&[case(
        "check: keep above n - 1",
        with_section("[components]\nkeep = 3"),
    )
    .data("sample,group,a,b,c\ns1,x,1.5,2,3\ns2,x,2.5,1,7\ns3,y,3,4,1\n")
    .only(Mode::Check)
    .err(&["recipe.toml:12:8:", "keep = 3", "at most 2"])]);
}

#[test]
fn spread_too_large_for_double_precision_is_an_error() {
    let huge = "sample,group,a,b\ns1,x,1e300,2\ns2,x,-1e300,1\ns3,y,1.7e308,4\n";
    let huge_alone = "sample,group,a\ns1,x,1e300\ns2,x,-1e300\ns3,y,1.7e308\n";
    run_table(&[
        // Today: exit 0, `a` gets sd = inf and scale = inf in preprocessing.csv and
        // loading 0, and the "correlation" analysis reports a total variance of 1.
        case("sd overflows beside a normal feature", BASE)
            .data(huge)
            .only(Mode::Run)
            .code(1)
            .err(&["data.csv", "`a`"]),
        // Today: exit 2, "data.csv: no usable features (the scaled data has no variance)".
        case("sd overflows in the only feature", BASE)
            .data(huge_alone)
            .only(Mode::Run)
            .code(1)
            .err(&["data.csv", "`a`"]),
        // Today: exit 1 but the message names neither the table nor the feature.
        case(
            "squares overflow without scaling",
            with_section("[scaling]\nmethod = \"none\""),
        )
        .data("sample,group,a,b\ns1,x,1e200,2\ns2,x,2e200,1\ns3,y,3e200,4\n")
        .only(Mode::Run)
        .code(1)
        .err(&["data.csv", "`a`"]),
    ]);
}

#[test]
fn type_errors_speak_the_recipe_language() {
    let cases = [
        case(
            "compute is text",
            with_section("[components]\ncompute = \"ten\""),
        ),
        case(
            "compute is negative",
            with_section("[components]\ncompute = -1"),
        ),
        case(
            "format is text",
            base_replacing("format = 1", "format = \"1\""),
        ),
        case(
            "max_feature_missing is text",
            with_section("[missing]\nmax_feature_missing = \"half\""),
        ),
    ];
    let mut failures = Vec::new();
    for c in cases {
        let tmp = tempfile::tempdir().unwrap();
        c.set_up(tmp.path());
        let got = sextant(tmp.path(), &["check", "recipe.toml"]);
        let jargon = ["usize", "i64", "f64"];
        if got.code != Some(2) || jargon.iter().any(|j| got.stderr.contains(j)) {
            failures.push(format!(
                "case `{}`: exit {:?}\n{}",
                c.name, got.code, got.stderr
            ));
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

#[test]
fn empty_cell_not_in_missing_list_is_called_empty() {
    run_table(&[case(
        "empty cell, missing = [\"NA\"]",
        with_input("missing = [\"NA\"]"),
    )
    .data("sample,group,a,b,c\ns1,x,1.5,2,1\ns2,x,2.5,,2\ns3,y,3,4,3\ns4,y,1,5,4\n")
    .err(&["data.csv:3:", "column `b`", "empty cell", "\"\""])]);
}

#[test]
fn empty_id_name_is_reported_as_empty() {
    let tmp = tempfile::tempdir().unwrap();
    let c = case(
        "empty id name",
        base_replacing("id = \"sample\"", "id = \"\""),
    );
    c.set_up(tmp.path());
    let got = sextant(tmp.path(), &["check", "recipe.toml"]);
    assert_eq!(got.code, Some(2));
    assert!(got.stderr.contains("recipe.toml:5:6:"), "{}", got.stderr);
    assert!(!got.stderr.contains("did you mean"), "{}", got.stderr);
}

#[test]
fn constant_feature_message_names_the_table() {
    run_table(&[case("constant feature", BASE)
        .data("sample,group,a,b,k\ns1,x,1.5,2,7\ns2,x,2.5,3,7\ns3,y,3,4,7\ns4,y,1,5,7\n")
        .err(&["data.csv", "feature `k` is constant"])]);
}

#[test]
fn unwritable_output_folder_is_named() {
    run_table(&[case(
        "output parent is a file",
        base_replacing("folder = \"out\"", "folder = \"blocker/out\""),
    )
    .file("blocker", "a file, not a folder\n")
    .only(Mode::Run)
    .err(&["blocker/out", "output"])]);
}

// ---------------------------------------------------------------------------
// Writing failures are failures of the run (exit 1), not bad inputs
// ---------------------------------------------------------------------------

/// Runs `sextant ARGS` in `dir` with files limited to `blocks` × 512 bytes, so
/// any larger write fails (EFBIG) as it would on a full disk. The limit binds
/// root too, unlike a read-only folder; SIGXFSZ is ignored so the write returns
/// an error instead of killing the process.
fn sextant_with_file_limit(dir: &Path, blocks: u32, args: &[&str]) -> Outcome {
    let script = format!("trap '' XFSZ; ulimit -f {blocks} && exec \"$0\" \"$@\"",);
    let out = Command::new("sh")
        .arg("-c")
        .arg(script)
        .arg(env!("CARGO_BIN_EXE_sextant"))
        .args(args)
        .current_dir(dir)
        .env("SEXTANT_NO_PROGRESS", "1")
        .output()
        .expect("sh starts");
    Outcome {
        code: out.status.code(),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

/// A table of `rows` rows for the write-failure tests.
fn rows_table(rows: usize) -> String {
    let mut csv = String::from("sample,group,a,b,c\n");
    for i in 0..rows {
        let t = i as f64;
        let _ = writeln!(
            csv,
            "s{i},g{},{:.6},{:.6},{:.6}",
            i % 3,
            (t * 0.37).sin(),
            (t * 0.11).cos() + t * 1e-4,
            (t * 0.73).sin() * (t * 0.05).cos()
        );
    }
    csv
}

#[test]
fn results_that_cannot_be_written_fail_the_run_with_exit_1() {
    // Every write error used to be reported like a bad input file would be;
    // a results folder that cannot be written is a failed run (exit 1).
    let tmp = tempfile::tempdir().unwrap();
    let root = tmp.path();
    write_file(root, "recipe.toml", BASE.as_bytes());
    write_file(root, "data.csv", rows_table(400).as_bytes());
    let before = snapshot(root);
    // 16 KB: the table and small files fit, the report does not.
    let got = sextant_with_file_limit(root, 32, &["run", "recipe.toml"]);
    let mut wrong = Vec::new();
    if got.code != Some(1) {
        wrong.push(format!("exit code {:?}, expected 1", got.code));
    }
    if !got.stderr.starts_with("error: ") || got.stderr.contains("panicked") {
        wrong.push("not a plain error message".into());
    }
    wrong.extend(snapshot_diff(&before, &snapshot(root)));
    assert!(wrong.is_empty(), "{wrong:#?}\nstderr:\n{}", got.stderr);
}

#[test]
fn scratch_file_that_cannot_be_written_fails_the_run_not_the_input() {
    // The passes engine's scratch file failing to grow was reported as
    // "invalid input" (exit 2) naming the scratch file as if it were the table.
    let tmp = tempfile::tempdir().unwrap();
    let root = tmp.path();
    write_file(root, "recipe.toml", BASE.as_bytes());
    write_file(root, "data.csv", rows_table(60_000).as_bytes());
    let before = snapshot(root);
    let args = [
        "check",
        "--engine",
        "passes",
        "--memory-budget",
        "1MB",
        "recipe.toml",
    ];
    // 512 KB: below the table (read, not written) and the scratch file.
    let got = sextant_with_file_limit(root, 1024, &args);
    let mut wrong = Vec::new();
    if got.code != Some(1) {
        wrong.push(format!("exit code {:?}, expected 1", got.code));
    }
    if !got.stderr.contains("scratch file") {
        wrong.push("stderr does not name the scratch file".into());
    }
    wrong.extend(snapshot_diff(&before, &snapshot(root)));
    assert!(wrong.is_empty(), "{wrong:#?}\nstderr:\n{}", got.stderr);
}

#[test]
fn over_the_memory_budget_is_a_refusal_before_reading() {
    // An auto-chosen engine that cannot fit the budget was exit 1 ("the
    // analysis failed"), though nothing was computed and the fix is an option
    // or the recipe.
    let tmp = tempfile::tempdir().unwrap();
    let root = tmp.path();
    write_file(
        root,
        "recipe.toml",
        with_section("[missing]\nmethod = \"median\"").as_bytes(),
    );
    write_file(root, "data.csv", rows_table(200).as_bytes());
    let before = snapshot(root);
    for command in ["check", "run"] {
        let got = sextant(root, &[command, "--memory-budget", "1KB", "recipe.toml"]);
        assert_eq!(got.code, Some(2), "{command}: {}", got.stderr);
        for part in [
            "data.csv:",
            "above the memory budget",
            "raise --memory-budget",
        ] {
            assert!(got.stderr.contains(part), "{command}: {}", got.stderr);
        }
        assert!(snapshot_diff(&before, &snapshot(root)).is_empty());
    }
}
