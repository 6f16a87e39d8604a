//! Fuzzing the two files a user writes: the table and the recipe.
//!
//! Each case starts from a valid table and recipe and is changed by seeded
//! mutations (bytes, cells, lines and columns of the table; keys, values and
//! text of the recipe), then runs in-process as `sextant run` would, short of
//! writing the folder: the recipe is parsed, the table read and checked, and
//! every stage, table, figure and report rendered in memory. Every case must
//! end in results or in an error whose exit code is 1 or 2; a panic fails the
//! test and prints the case so it can be replayed.
//!
//! The mutations draw from the seeded stream of `linalg::random`, so case `i`
//! of a target is the same on every machine. A short run is part of
//! `cargo test`; the long run is
//! `SEXTANT_FUZZ_CASES=250000 cargo test --release --test fuzz_inputs -- --ignored fuzz`.
//! Counts in the dictionaries stay small (at most a few thousand iterations
//! or replicates) so each case takes milliseconds: slowness is not what this
//! fuzzer looks for, crashes are.

use rayon::prelude::*;
use sextant::linalg::random::Stream;
use std::fmt::Write;
use std::panic::{AssertUnwindSafe, catch_unwind};
use std::path::Path;
use std::sync::Mutex;

/// The first 40 rows of the invented demo table (ids, groups, a date, counts
/// with missing cells) and Fisher's iris (tests/data/SOURCES.md).
fn seed_tables() -> Vec<String> {
    let demo = include_str!("../demo-data/dairy-lab-2026-03.csv");
    let iris = include_str!("data/iris.csv");
    vec![
        demo.lines().take(41).collect::<Vec<_>>().join("\n") + "\n",
        iris.lines().step_by(3).collect::<Vec<_>>().join("\n") + "\n",
        "id,a,b,c\nr1,1,2,3\nr2,2,4.5,6\nr3,3,6,9.5\nr4,4,8.25,12\n".to_string(),
    ]
}

/// A valid recipe for seed table `t` (paths relative to the case folder).
fn seed_recipe(t: usize, missing: &str) -> String {
    let input = match t {
        0 => {
            "id = \"sample\"\ngroups = [\"farm\", \"season\"]\nexclude = [\"collected\"]\nmissing = [\"\", \"NA\"]\n"
        }
        1 => "groups = [\"class\"]\n",
        _ => "id = \"id\"\n",
    };
    format!(
        "format = 1\n[input]\nfile = \"data.csv\"\n{input}[missing]\nmethod = \"{missing}\"\n[components]\nkeep = 2\n\n[[plot]]\nkind = \"scores\"\n\n[[plot]]\nkind = \"outlier-map\"\n[output]\nfolder = \"out\"\n"
    )
}

const METHODS: &[&str] = &["mean", "median", "knn", "iterative-pca", "drop-rows"];

/// Cell texts that have broken readers before, or might.
const ODD_CELLS: &[&str] = &[
    "",
    "NA",
    "N/A",
    "-",
    "nan",
    "NaN",
    "inf",
    "-inf",
    "Infinity",
    "1e308",
    "-1e308",
    "1e400",
    "1e-310",
    "5e-324",
    "-0",
    "0",
    "0.0",
    "+.5",
    "--1",
    "0x10",
    "1,5",
    "1.5.5",
    " 3 ",
    "\t4",
    "١٢",
    "１２",
    "1_000",
    "1e",
    "e5",
    ".",
    "+",
    "\"",
    "\"\"",
    "\"a,b\"",
    "\"1\"",
    "\u{feff}1",
    "99999999999999999999999",
    "0.30000000000000004",
    "\u{1b}[31mred",
    "<script>",
    "é",
    "\u{202e}x",
    "1e-5",
    "-7",
];

/// Bytes worth inserting: separators, quotes, line ends, invalid UTF-8.
const ODD_BYTES: &[u8] = &[
    b',', b'"', b'\n', b'\r', b'\t', b';', b' ', 0, 0xff, 0xfe, 0xc3, 0x80, b'\\', b'#',
];

fn pick<T: Copy>(rng: &mut Stream, items: &[T]) -> T {
    items[rng.below(items.len() as u64) as usize]
}

/// One seeded change of a table's text, at the level of bytes, cells or lines.
fn mutate_table(rng: &mut Stream, bytes: &mut Vec<u8>) {
    let text = String::from_utf8_lossy(bytes).into_owned();
    let mut lines: Vec<String> = text.lines().map(String::from).collect();
    let line =
        |rng: &mut Stream, lines: &Vec<String>| rng.below(lines.len().max(1) as u64) as usize;
    match rng.below(12) {
        0 if !bytes.is_empty() => {
            let at = rng.below(bytes.len() as u64) as usize;
            bytes.insert(at, pick(rng, ODD_BYTES));
            return;
        }
        1 if !bytes.is_empty() => {
            let at = rng.below(bytes.len() as u64) as usize;
            bytes.remove(at);
            return;
        }
        2 => {
            let keep = rng.below(bytes.len() as u64 + 1) as usize;
            bytes.truncate(keep);
            return;
        }
        3 if !lines.is_empty() => {
            let i = line(rng, &lines);
            lines.remove(i);
        }
        4 if !lines.is_empty() => {
            let i = line(rng, &lines);
            let copy = lines[i].clone();
            lines.insert(i, copy);
        }
        5 if lines.len() > 1 => {
            // A column made constant, or all but one of its cells missing.
            let column = rng.below(8) as usize;
            let value = if rng.below(2) == 0 { "7" } else { "" };
            let skip = rng.below(lines.len() as u64) as usize;
            for (i, l) in lines.iter_mut().enumerate().skip(1) {
                if i != skip {
                    *l = replace_cell(l, column, value);
                }
            }
        }
        6 if !lines.is_empty() => {
            let i = line(rng, &lines);
            let cells = lines[i].split(',').count();
            lines[i].push_str(if rng.below(2) == 0 { "," } else { ",9,9" });
            if cells > 2 && rng.below(2) == 0 {
                lines[i] = lines[i].rsplitn(3, ',').nth(2).unwrap_or("").to_string();
            }
        }
        7 if !lines.is_empty() => {
            // The header: an empty, repeated or hostile column name.
            let names = [
                "",
                "a",
                "id",
                "sample",
                "\u{1b}]0;x\u{7}",
                "<b>x</b>",
                "PC1",
            ];
            let column = rng.below(6) as usize;
            let name = pick(rng, &names);
            lines[0] = replace_cell(&lines[0], column, name);
        }
        8 => {
            let ends = ["\r\n", "\r", "\n\n"];
            let end = pick(rng, &ends);
            let mut joined = lines.join(end);
            if rng.below(2) == 0 {
                joined.insert(0, '\u{feff}');
            }
            *bytes = joined.into_bytes();
            return;
        }
        9 if lines.len() > 1 => {
            // A repeated or empty id in the first column.
            let (a, b) = (line(rng, &lines).max(1), line(rng, &lines).max(1));
            let first = lines[a].split(',').next().unwrap_or("").to_string();
            let value = if rng.below(3) == 0 {
                String::new()
            } else {
                first
            };
            lines[b] = replace_cell(&lines[b], 0, &value);
        }
        _ if !lines.is_empty() => {
            let i = line(rng, &lines);
            let column = rng.below(8) as usize;
            let cell = pick(rng, ODD_CELLS);
            lines[i] = replace_cell(&lines[i], column, cell);
        }
        _ => {}
    }
    *bytes = (lines.join("\n") + "\n").into_bytes();
}

/// The line with its `column`-th comma-separated cell replaced (if it has one).
fn replace_cell(line: &str, column: usize, value: &str) -> String {
    let mut cells: Vec<&str> = line.split(',').collect();
    if let Some(cell) = cells.get_mut(column) {
        *cell = value;
    }
    cells.join(",")
}

/// Recipe settings, table by table: valid values, values out of range and
/// values of the wrong type.
const SETTINGS: &[(&str, &str, &[&str])] = &[
    ("", "title", &["\"t\"", "1", "\"\u{1b}[2J\""]),
    ("", "format", &["1", "2", "1.0", "\"1\""]),
    (
        "input",
        "id",
        &["\"sample\"", "\"id\"", "\"farm\"", "\"nope\"", "\"\"", "3"],
    ),
    (
        "input",
        "groups",
        &[
            "[]",
            "[\"farm\"]",
            "[\"class\"]",
            "[\"fat_pct\"]",
            "\"farm\"",
            "[\"x\", \"x\"]",
        ],
    ),
    (
        "input",
        "features",
        &[
            "[\"*\"]",
            "[\"*_pct\"]",
            "[\"a\", \"b\"]",
            "[]",
            "[\"nope*\"]",
            "[\"sepal_*\"]",
        ],
    ),
    (
        "input",
        "exclude",
        &["[\"collected\"]", "[\"*\"]", "[\"ph\"]", "[\"c\"]"],
    ),
    (
        "input",
        "missing",
        &["[\"\", \"NA\"]", "[]", "[\"7\"]", "[\"-\", \"nan\"]"],
    ),
    (
        "input",
        "delimiter",
        &["\",\"", "\";\"", "\"\\t\"", "\"\"", "\",,\"", "\"\\\"\""],
    ),
    (
        "input",
        "sha256",
        &[
            "\"abc\"",
            "\"0000000000000000000000000000000000000000000000000000000000000000\"",
        ],
    ),
    (
        "missing",
        "method",
        &[
            "\"mean\"",
            "\"median\"",
            "\"knn\"",
            "\"iterative-pca\"",
            "\"drop-rows\"",
            "\"zero\"",
        ],
    ),
    (
        "missing",
        "max_feature_missing",
        &["0.3", "1", "0", "1.5", "-0.1", "0.01", "\"all\""],
    ),
    (
        "missing.iterative_pca",
        "components",
        &["1", "2", "3", "50", "0", "-1", "1.5"],
    ),
    (
        "missing.iterative_pca",
        "variant",
        &["\"em\"", "\"regularized\"", "\"other\""],
    ),
    (
        "missing.iterative_pca",
        "tolerance",
        &["1e-9", "1e-300", "0", "1", "-1e-9", "nan"],
    ),
    (
        "missing.iterative_pca",
        "max_iterations",
        &["1", "2", "1000", "0"],
    ),
    (
        "missing.iterative_pca",
        "start",
        &["\"mean\"", "\"median\"", "\"zero\""],
    ),
    (
        "missing.iterative_pca",
        "allow_unconverged",
        &["true", "false", "1"],
    ),
    ("missing.knn", "neighbours", &["1", "5", "1000", "0", "-3"]),
    (
        "transform",
        "log10",
        &[
            "[\"*\"]",
            "[\"somatic_cells_k_ml\"]",
            "[\"a\"]",
            "[\"ph\"]",
            "[\"nope\"]",
        ],
    ),
    (
        "transform",
        "ln",
        &[
            "[\"*_pct\"]",
            "[\"b\"]",
            "[\"sepal_length\"]",
            "[\"urea_mg_dl\"]",
        ],
    ),
    (
        "transform",
        "sqrt",
        &[
            "[\"*\"]",
            "[\"c\"]",
            "[\"freezing_point_mdegc\"]",
            "[\"petal_width\"]",
        ],
    ),
    (
        "scaling",
        "method",
        &[
            "\"unit-variance\"",
            "\"center\"",
            "\"pareto\"",
            "\"range\"",
            "\"none\"",
            "\"log\"",
        ],
    ),
    (
        "scaling",
        "constant_features",
        &["\"error\"", "\"drop\"", "\"keep\""],
    ),
    (
        "components",
        "keep",
        &[
            "1",
            "2",
            "3",
            "40",
            "0",
            "\"kaiser\"",
            "\"broken-stick\"",
            "\"parallel-analysis\"",
            "\"cross-validation\"",
            "{ variance = 0.9 }",
            "{ variance = 1.5 }",
            "\"all\"",
        ],
    ),
    (
        "components",
        "compute",
        &["1", "2", "10", "1000", "0", "1e3"],
    ),
    (
        "components",
        "method",
        &["\"exact\"", "\"randomized\"", "\"fast\""],
    ),
    (
        "components.randomized",
        "oversampling",
        &["0", "10", "1000"],
    ),
    (
        "components.randomized",
        "power_iterations",
        &["0", "4", "20"],
    ),
    (
        "components.randomized",
        "seed",
        &["0", "1", "18446744073709551615", "-1"],
    ),
    (
        "components.parallel_analysis",
        "replicates",
        &["1", "20", "0"],
    ),
    (
        "components.parallel_analysis",
        "percentile",
        &["50", "95", "100", "0", "101"],
    ),
    (
        "components.parallel_analysis",
        "random_data",
        &["\"normal\"", "\"permuted-columns\"", "\"x\""],
    ),
    (
        "components.cross_validation",
        "folds",
        &["1", "2", "7", "1000", "0"],
    ),
    (
        "components.cross_validation",
        "folds_by",
        &["\"interleaved\"", "\"contiguous\"", "\"random\""],
    ),
    (
        "components.cross_validation",
        "choose",
        &["\"minimum\"", "\"one-standard-error\"", "\"max\""],
    ),
    (
        "diagnostics",
        "confidence",
        &[
            "0.95",
            "[0.9, 0.99]",
            "[]",
            "1",
            "0",
            "[0.95, 0.95]",
            "0.999999999",
        ],
    ),
    (
        "diagnostics",
        "spe_limit",
        &["\"box\"", "\"jackson-mudholkar\"", "\"other\""],
    ),
    ("diagnostics", "contributions_max_rows", &["1", "1000", "0"]),
    (
        "output",
        "folder",
        &[
            "\"out\"",
            "\"\"",
            "\".\"",
            "\"..\"",
            "\"data.csv\"",
            "\"a/b/c\"",
            "\"/\"",
        ],
    ),
];

/// A settings table, and the choice (table, setting) that makes it apply.
const ENABLING: &[(&str, &str, &str)] = &[
    (
        "missing.iterative_pca",
        "missing",
        "method = \"iterative-pca\"",
    ),
    ("missing.knn", "missing", "method = \"knn\""),
    (
        "components.randomized",
        "components",
        "method = \"randomized\"",
    ),
    (
        "components.randomized",
        "diagnostics",
        "spe_limit = \"box\"",
    ),
    (
        "components.parallel_analysis",
        "components",
        "keep = \"parallel-analysis\"",
    ),
    (
        "components.cross_validation",
        "components",
        "keep = \"cross-validation\"",
    ),
];

/// Settings of one `[[plot]]` table.
const PLOT_SETTINGS: &[(&str, &[&str])] = &[
    (
        "kind",
        &[
            "\"scree\"",
            "\"scores\"",
            "\"loadings\"",
            "\"biplot\"",
            "\"correlation-circle\"",
            "\"outlier-map\"",
            "\"pie\"",
        ],
    ),
    ("x", &["1", "2", "3", "11", "0"]),
    ("y", &["1", "2", "4", "0"]),
    ("component", &["1", "2", "9"]),
    (
        "color",
        &[
            "\"farm\"",
            "\"class\"",
            "\"season\"",
            "\"fat_pct\"",
            "\"nope\"",
        ],
    ),
    (
        "labels",
        &["\"all\"", "\"none\"", "\"flagged\"", "\"some\""],
    ),
    ("ellipse", &["0.95", "0.5", "1", "0"]),
    ("density_above", &["1", "5", "20000", "0"]),
    ("title", &["\"<script>x</script>\"", "\"\""]),
    ("file", &["\"a.svg\"", "\"../a.svg\"", "\"a.png\"", "\"\""]),
    ("bogus", &["1"]),
];

/// A recipe built from random settings, then perhaps changed as text.
fn generate_recipe(rng: &mut Stream, table: usize) -> String {
    let mut tables: std::collections::BTreeMap<&str, Vec<String>> = Default::default();
    let base = seed_recipe(table, pick(rng, METHODS));
    let settings = 1 + rng.below(3) as usize;
    for _ in 0..settings {
        let (section, key, values) = pick(rng, SETTINGS);
        tables
            .entry(section)
            .or_default()
            .push(format!("{key} = {}", pick(rng, values)));
    }
    // Settings of a method apply only when it is chosen (others are refused):
    // mostly choose it, so the cases reach the method itself.
    for (section, parent, choice) in ENABLING {
        if tables.contains_key(section) && rng.below(4) != 0 {
            let (parent, choice) = (*parent, *choice);
            let lines = tables.entry(parent).or_default();
            let key = choice.split(" = ").next().unwrap_or("");
            lines.retain(|l| l.split(" = ").next() != Some(key));
            lines.push(choice.to_string());
        }
    }
    if rng.below(8) == 0 {
        let (section, _, _) = pick(rng, SETTINGS);
        tables
            .entry(section)
            .or_default()
            .push("unknown_key = 1".into());
    }
    // A generated key replaces the base recipe's own; a key generated twice is
    // a TOML error, which is a case too.
    let mut text = String::new();
    let mut section = "";
    let mut written = vec![""];
    for line in base.lines() {
        let key = line.split(" = ").next().unwrap_or("");
        let overridden = tables
            .get(section)
            .is_some_and(|l| l.iter().any(|l| l.split(" = ").next() == Some(key)));
        if !overridden {
            text.push_str(line);
            text.push('\n');
        }
        if let Some(name) = line.strip_prefix('[').and_then(|l| l.strip_suffix(']')) {
            section = name;
            written.push(name);
            for l in tables.get(name).into_iter().flatten() {
                let _ = writeln!(text, "{l}");
            }
        }
    }
    if let Some(lines) = tables.remove("") {
        text = lines.join("\n") + "\n" + &text;
    }
    for (section, lines) in tables.iter().filter(|(s, _)| !written.contains(s)) {
        let _ = writeln!(text, "[{section}]");
        for l in lines {
            let _ = writeln!(text, "{l}");
        }
    }
    for _ in 0..rng.below(3) {
        let mut plot = String::from("[[plot]]\n");
        for _ in 0..1 + rng.below(4) {
            let (key, values) = pick(rng, PLOT_SETTINGS);
            let _ = writeln!(plot, "{key} = {}", pick(rng, values));
        }
        // Plots go before [output], which must stay the last table.
        let at = text.find("[output]").unwrap_or(text.len());
        text.insert_str(at, &plot);
    }
    if rng.below(6) == 0 {
        mutate_text(rng, &mut text);
    }
    text
}

/// A change of the recipe as plain text: a character removed or inserted, a
/// line doubled or dropped.
fn mutate_text(rng: &mut Stream, text: &mut String) {
    let chars: Vec<char> = text.chars().collect();
    if chars.is_empty() {
        return;
    }
    let at = rng.below(chars.len() as u64) as usize;
    let odd = ['[', ']', '"', '=', '\n', '#', '{', '\'', '\\', '\u{0}', '.'];
    let mut chars = chars;
    match rng.below(3) {
        0 => {
            chars.remove(at);
        }
        1 => chars.insert(at, pick(rng, &odd)),
        _ => {
            let lines: Vec<&str> = text.lines().collect();
            let i = rng.below(lines.len() as u64) as usize;
            let mut out: Vec<&str> = lines.clone();
            if rng.below(2) == 0 {
                out.insert(i, lines[i]);
            } else {
                out.remove(i);
            }
            *text = out.join("\n") + "\n";
            return;
        }
    }
    *text = chars.into_iter().collect();
}

/// How one case ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Outcome {
    Exit(i32),
    Panic,
}

/// Runs one case in `dir` as `sextant run` would, short of writing the folder.
fn run_case(dir: &Path, recipe: &str, table: &[u8]) -> Outcome {
    std::fs::write(dir.join("data.csv"), table).unwrap();
    let path = dir.join("r.toml");
    let result = catch_unwind(AssertUnwindSafe(|| -> Result<(), sextant::error::Error> {
        let loaded = sextant::recipe::parse(&path, recipe.to_string())?;
        let prepared = sextant::run::prepare_recipe(loaded)?;
        sextant::run::compute(&prepared)?;
        Ok(())
    }));
    match result {
        Ok(Ok(())) => Outcome::Exit(0),
        Ok(Err(e)) => Outcome::Exit(e.exit_code()),
        Err(_) => Outcome::Panic,
    }
}

/// Counts of one target's run.
#[derive(Default)]
struct Counts {
    cases: usize,
    by_code: std::collections::BTreeMap<i32, usize>,
    panics: Vec<(usize, String)>,
}

/// Runs `cases` cases of a target in parallel; case `i` is made by `make(i)`.
fn fuzz(name: &str, cases: usize, make: impl Fn(usize) -> (String, Vec<u8>) + Sync) -> Counts {
    // Panics are expected to be caught; their messages would flood the output.
    let previous = std::panic::take_hook();
    std::panic::set_hook(Box::new(|_| {}));
    let counts = Mutex::new(Counts::default());
    let start = std::time::Instant::now();
    (0..cases).into_par_iter().for_each_init(
        || tempfile::tempdir().unwrap(),
        |dir, i| {
            let (recipe, table) = make(i);
            let outcome = run_case(dir.path(), &recipe, &table);
            let mut counts = counts.lock().unwrap();
            counts.cases += 1;
            match outcome {
                Outcome::Exit(code) => *counts.by_code.entry(code).or_default() += 1,
                Outcome::Panic => counts.panics.push((
                    i,
                    format!(
                        "--- recipe ---\n{recipe}--- table ---\n{}",
                        String::from_utf8_lossy(&table)
                    ),
                )),
            }
        },
    );
    std::panic::set_hook(previous);
    let counts = counts.into_inner().unwrap();
    println!(
        "fuzz {name}: {} cases in {:.1} s, exit codes {:?}, panics {}",
        counts.cases,
        start.elapsed().as_secs_f64(),
        counts.by_code,
        counts.panics.len()
    );
    counts
}

/// Case `i` of the table target: a valid recipe, a mutated table.
fn table_case(i: usize) -> (String, Vec<u8>) {
    let mut rng = Stream::new(0x7ab1e, i as u64);
    let tables = seed_tables();
    let t = rng.below(tables.len() as u64) as usize;
    let recipe = seed_recipe(t, pick(&mut rng, METHODS));
    let mut bytes = tables[t].clone().into_bytes();
    for _ in 0..1 + rng.below(4) {
        mutate_table(&mut rng, &mut bytes);
    }
    (recipe, bytes)
}

/// Case `i` of the recipe target: a generated recipe, a valid table.
fn recipe_case(i: usize) -> (String, Vec<u8>) {
    let mut rng = Stream::new(0x4ec1fe, i as u64);
    let tables = seed_tables();
    let t = rng.below(tables.len() as u64) as usize;
    (generate_recipe(&mut rng, t), tables[t].clone().into_bytes())
}

fn assert_no_panics(counts: &Counts) {
    for (i, case) in counts.panics.iter().take(3) {
        eprintln!("case {i} panicked:\n{case}");
    }
    assert!(counts.panics.is_empty(), "{} panics", counts.panics.len());
    assert!(
        counts.by_code.keys().all(|c| [0, 1, 2].contains(c)),
        "exit codes {:?}",
        counts.by_code
    );
}

/// The seeds themselves are valid: the mutations start from a working case.
#[test]
fn the_seed_cases_run() {
    let dir = tempfile::tempdir().unwrap();
    for (t, table) in seed_tables().iter().enumerate() {
        for method in METHODS {
            let outcome = run_case(dir.path(), &seed_recipe(t, method), table.as_bytes());
            assert_eq!(outcome, Outcome::Exit(0), "table {t}, {method}");
        }
    }
}

/// Both targets reach past the first check: some cases succeed and some are
/// refused, so the fuzzer is not testing one error message over and over.
#[test]
fn fuzz_inputs_short_run() {
    for (name, make) in [
        ("table", table_case as fn(usize) -> (String, Vec<u8>)),
        ("recipe", recipe_case),
    ] {
        let counts = fuzz(name, 1500, make);
        assert_no_panics(&counts);
        assert!(
            counts.by_code.get(&0).copied().unwrap_or(0) > 50,
            "{name}: too few run"
        );
        assert!(
            counts.by_code.get(&2).copied().unwrap_or(0) > 50,
            "{name}: too few refused"
        );
    }
}

/// The long run: `SEXTANT_FUZZ_CASES` cases per target (default 250,000).
#[test]
#[ignore]
fn fuzz_inputs_long_run() {
    let cases = std::env::var("SEXTANT_FUZZ_CASES")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(250_000);
    let table = fuzz("table", cases, table_case);
    let recipe = fuzz("recipe", cases, recipe_case);
    assert_no_panics(&table);
    assert_no_panics(&recipe);
}
