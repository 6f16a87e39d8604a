//! Tables from any locale and what the outputs say about them: a decimal
//! comma, thousands separators and missing codes of one column read the same
//! numbers as a plain twin table in both engines; `new` writes the decimal
//! mark it sees and a starter recipe with figures that later edits do not
//! break; a key defined twice names its first line; imputed.csv gives fills in
//! the feature's own units; and a bad cell has one line number in every
//! command.

#[allow(dead_code)] // only `sextant` is used here
mod common;

use common::sextant;
use std::fs;
use std::path::Path;

fn write(dir: &Path, name: &str, text: &str) {
    fs::write(dir.join(name), text).unwrap();
}

/// A fixed table of `rows` rows: an id, four features with up to three
/// decimals (some negative, one above a thousand) and a note.
fn rows(rows: usize) -> Vec<(String, [f64; 4], String)> {
    let mut state: u64 = 0x9e37_79b9_7f4a_7c15;
    let mut next = || {
        state = state
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        ((state >> 33) % 100_000) as f64 / 1000.0
    };
    (0..rows)
        .map(|i| {
            let a = next();
            let b = a * 0.5 + next() / 10.0 - 20.0;
            let c = 1000.0 + next() * 37.0;
            let d = next() - a / 3.0;
            let note = match i % 3 {
                0 => "plain".to_string(),
                1 => "two\nlines; with a ; and a , inside".to_string(),
                _ => "say \"\"hi\"\"".to_string(),
            };
            (format!("s{i}"), [a, b, c, d], note)
        })
        .collect()
}

/// `v` with three decimals, the decimal mark `mark` and, if given, `sep`
/// between groups of three digits.
fn written(v: f64, mark: char, sep: Option<char>) -> String {
    let text = format!("{v:.3}");
    let (int, frac) = text.split_once('.').unwrap();
    let (sign, digits) = int.strip_prefix('-').map_or(("", int), |d| ("-", d));
    let mut grouped = String::new();
    for (k, ch) in digits.chars().enumerate() {
        if let Some(s) = sep.filter(|_| k > 0 && (digits.len() - k) % 3 == 0) {
            grouped.push(s);
        }
        grouped.push(ch);
    }
    format!("{sign}{grouped}{mark}{frac}")
}

/// The table with `delimiter`, decimal `mark` and thousands `sep`; every
/// third number is quoted.
fn table(delimiter: char, mark: char, sep: Option<char>) -> String {
    let d = delimiter;
    let mut text = format!("id{d}a{d}b{d}c{d}d{d}note\n");
    for (i, (id, values, note)) in rows(30).iter().enumerate() {
        let cells: Vec<String> = values
            .iter()
            .enumerate()
            .map(|(j, &v)| {
                let w = written(v, mark, sep);
                if (i + j) % 3 == 0 {
                    format!("\"{w}\"")
                } else {
                    w
                }
            })
            .collect();
        text.push_str(&format!(
            "{id}{d}{}{d}\"{note}\"\n",
            cells.join(&d.to_string())
        ));
    }
    text
}

fn recipe(file: &str, extra: &str, folder: &str) -> String {
    format!(
        "format = 1\n[input]\nfile = \"{file}\"\nid = \"id\"\nexclude = [\"note\"]\n{extra}\n[components]\nkeep = 2\n[output]\nfolder = \"{folder}\"\n"
    )
}

fn run(dir: &Path, recipe: &str, engine: &str) {
    let out = sextant(dir, &["run", "--engine", engine, recipe]);
    assert_eq!(out.code, 0, "{recipe} ({engine}): {}", out.stderr);
}

fn read(path: &Path) -> String {
    fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

/// The result files that hold numbers read from the table.
const NUMBER_FILES: [&str; 5] = [
    "scores.csv",
    "loadings.csv",
    "variance.csv",
    "preprocessing.csv",
    "imputed.csv",
];

fn same_results(dir: &Path, a: &str, b: &str) {
    for file in NUMBER_FILES {
        assert!(
            fs::read(dir.join(a).join(file)).unwrap() == fs::read(dir.join(b).join(file)).unwrap(),
            "{file} differs between {a} and {b}"
        );
    }
}

#[test]
fn semicolon_decimal_comma_table_with_quoted_notes_gives_its_point_twins_bytes() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path();
    write(p, "point.csv", &table(',', '.', None));
    write(p, "comma.csv", &table(';', ',', None));
    assert!(read(&p.join("comma.csv")).contains("\"two\nlines; with a ;"));
    for engine in ["in-memory", "passes"] {
        write(
            p,
            "point.toml",
            &recipe("point.csv", "", &format!("point-{engine}")),
        );
        write(
            p,
            "comma.toml",
            &recipe(
                "comma.csv",
                "delimiter = \";\"\ndecimal = \",\"",
                &format!("comma-{engine}"),
            ),
        );
        run(p, "point.toml", engine);
        run(p, "comma.toml", engine);
        same_results(p, &format!("point-{engine}"), &format!("comma-{engine}"));
        // Every feature was read as a number, quoted cells too.
        let loadings = read(&p.join(format!("comma-{engine}/loadings.csv")));
        for f in ["a", "b", "c", "d"] {
            assert!(loadings.contains(&format!("\n{f},")), "{loadings}");
        }
    }
    same_results(p, "comma-in-memory", "comma-passes");
    // The manifest records the mark; the point twin's has no such key.
    let manifest = read(&p.join("comma-passes/manifest.json"));
    assert!(manifest.contains("\"decimal\": \",\""), "{manifest}");
    assert!(!read(&p.join("point-passes/manifest.json")).contains("\"decimal\""));
}

#[test]
fn quoted_decimal_comma_cells_are_numbers_never_text() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path();
    let mut text = String::from("id;a;b;q\n");
    for (id, v, _) in rows(12) {
        text.push_str(&format!(
            "{id};{};{};\"{}\"\n",
            written(v[0], ',', None),
            written(v[1], ',', None),
            written(v[3], ',', None)
        ));
    }
    write(p, "t.csv", &text);
    write(
        p,
        "t.toml",
        &recipe("t.csv", "delimiter = \";\"\ndecimal = \",\"", "out")
            .replace("exclude = [\"note\"]\n", ""),
    );
    run(p, "t.toml", "in-memory");
    let loadings = read(&p.join("out/loadings.csv"));
    assert!(loadings.contains("\nq,"), "q was not analysed:\n{loadings}");
    // A point in a decimal-comma table is an error naming the cell, not a number.
    write(
        p,
        "t.csv",
        &text.replacen(&written(rows(12)[3].1[0], ',', None), "3.5", 1),
    );
    let out = sextant(p, &["check", "t.toml"]);
    assert_eq!(out.code, 2, "{}", out.stdout);
    assert!(
        out.stderr.contains(
            "t.csv:5: column `a` has a non-numeric cell `3.5`: not a number in the table's format"
        ),
        "{}",
        out.stderr
    );
}

#[test]
fn thousands_separators_read_the_same_numbers() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path();
    write(p, "point.csv", &table(',', '.', None));
    write(p, "dots.csv", &table(';', ',', Some('.')));
    write(p, "spaces.csv", &table(';', ',', Some(' ')));
    write(p, "commas.csv", &table(';', '.', Some(',')));
    assert!(
        read(&p.join("dots.csv")).contains(".0"),
        "some value above 1,000"
    );
    write(p, "point.toml", &recipe("point.csv", "", "point"));
    run(p, "point.toml", "in-memory");
    for (name, keys) in [
        (
            "dots",
            "delimiter = \";\"\ndecimal = \",\"\nthousands = \".\"",
        ),
        (
            "spaces",
            "delimiter = \";\"\ndecimal = \",\"\nthousands = \" \"",
        ),
        ("commas", "delimiter = \";\"\nthousands = \",\""),
    ] {
        for engine in ["in-memory", "passes"] {
            let folder = format!("{name}-{engine}");
            write(p, "t.toml", &recipe(&format!("{name}.csv"), keys, &folder));
            run(p, "t.toml", engine);
            same_results(p, "point", &folder);
        }
    }
    // A thousands separator that is the decimal mark is refused, with its line.
    write(
        p,
        "t.toml",
        &recipe(
            "dots.csv",
            "delimiter = \";\"\ndecimal = \",\"\nthousands = \",\"",
            "x",
        ),
    );
    let out = sextant(p, &["check", "t.toml"]);
    assert_eq!(out.code, 2);
    assert!(out.stderr.contains("t.toml:8:"), "{}", out.stderr);
    assert!(
        out.stderr
            .contains("input.thousands and input.decimal are both"),
        "{}",
        out.stderr
    );
}

#[test]
fn a_decimal_mark_that_is_the_delimiter_is_refused_with_its_line() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path();
    write(p, "t.csv", &table(',', '.', None));
    write(p, "t.toml", &recipe("t.csv", "decimal = \",\"", "out"));
    let out = sextant(p, &["check", "t.toml"]);
    assert_eq!(out.code, 2, "{}", out.stdout);
    assert!(
        out.stderr
            .contains("t.toml:6:11: input.decimal = \",\" is also the field delimiter"),
        "{}",
        out.stderr
    );
    assert!(out.stderr.contains("set input.delimiter"), "{}", out.stderr);
}

#[test]
fn a_missing_code_of_one_column_applies_to_that_column_only() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path();
    let mut text = String::from("id,a,b\n");
    for (i, (id, v, _)) in rows(20).iter().enumerate() {
        let a = if i % 7 == 3 {
            "-999".to_string()
        } else {
            written(v[0], '.', None)
        };
        let b = if i == 5 {
            "-999".to_string()
        } else {
            written(v[1], '.', None)
        };
        text.push_str(&format!("{id},{a},{b}\n"));
    }
    write(p, "t.csv", &text);
    let keys = "[input.missing_per_column]\na = [-999]";
    let body = recipe("t.csv", "", "out").replace("exclude = [\"note\"]\n", "");
    let with_codes = body.replace("\n[components]", &format!("\n{keys}\n[components]"));
    write(p, "t.toml", &with_codes);
    for engine in ["in-memory", "passes"] {
        run(p, "t.toml", engine);
        let imputed = read(&p.join("out/imputed.csv"));
        let features: Vec<&str> = imputed
            .lines()
            .skip(1)
            .map(|l| l.split(',').nth(2).unwrap())
            .collect();
        // Rows 4, 11 and 18 of column a (table rows 3, 10, 17) are filled; b's -999 is a value.
        assert_eq!(features, ["a", "a", "a"], "{engine}: {imputed}");
        let pre = read(&p.join("out/preprocessing.csv"));
        assert!(pre.contains("\na,used,3,"), "a has 3 missing cells:\n{pre}");
        assert!(pre.contains("\nb,used,0,"), "b has none:\n{pre}");
    }
    let manifest = read(&p.join("out/manifest.json"));
    assert!(manifest.contains("\"missing_per_column\""), "{manifest}");
    // An unknown column is an error naming the recipe line.
    write(
        p,
        "t.toml",
        &with_codes.replace("\na = [-999]", "\nalpha = [-999]"),
    );
    let out = sextant(p, &["check", "t.toml"]);
    assert_eq!(out.code, 2);
    assert!(
        out.stderr
            .contains("t.toml:7:1: column `alpha` is not in the header of t.csv"),
        "{}",
        out.stderr
    );
}

#[test]
fn new_detects_a_decimal_comma_and_its_recipe_runs() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path();
    write(p, "lab.csv", &table(';', ',', None));
    let out = sextant(p, &["new", "lab.csv"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    assert!(
        out.stdout.contains("delimiter ';', decimal comma"),
        "{}",
        out.stdout
    );
    let text = read(&p.join("lab.toml"));
    let recipe: toml::Value = toml::from_str(&text).unwrap();
    assert_eq!(recipe["input"]["decimal"].as_str(), Some(","), "{text}");
    assert_eq!(recipe["input"]["delimiter"].as_str(), Some(";"), "{text}");
    let out = sextant(p, &["run", "lab.toml"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    let loadings = read(&p.join("results/lab/loadings.csv"));
    for f in ["a", "b", "c", "d"] {
        assert!(loadings.contains(&format!("\n{f},")), "{loadings}");
    }
}

#[test]
fn starter_recipe_draws_three_figures_and_takes_an_added_transform_table() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path();
    let mut text = String::from("id,site,a,b,c\n");
    for (i, (id, v, _)) in rows(30).iter().enumerate() {
        text.push_str(&format!(
            "{id},{},{},{},{}\n",
            ["north", "south", "east"][i % 3],
            written(v[0] + 1.0, '.', None),
            written(v[1], '.', None),
            written(v[2], '.', None)
        ));
    }
    write(p, "t.csv", &text);
    let out = sextant(p, &["new", "t.csv"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    let written_text = read(&p.join("t.toml"));
    let recipe: toml::Value = toml::from_str(&written_text).unwrap();
    let plots = recipe["plot"].as_array().expect("[[plot]] tables");
    let kinds: Vec<&str> = plots.iter().map(|p| p["kind"].as_str().unwrap()).collect();
    assert_eq!(kinds, ["scree", "scores", "loadings"], "{written_text}");
    assert_eq!(plots[1]["color"].as_str(), Some("site"), "{written_text}");
    // The comments give the real order: transforms before filling.
    let prose = written_text.replace("\n# ", " ");
    assert!(!prose.contains("after missing cells are filled"), "{prose}");
    assert!(prose.contains("before missing cells are filled"), "{prose}");
    // A [transform] table appended later is not a duplicate.
    let edited = format!("{written_text}\n[transform]\nlog10 = [\"a\"]\n");
    write(p, "t.toml", &edited);
    let out = sextant(p, &["run", "t.toml"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    for figure in ["scree.svg", "scores-pc1-pc2.svg", "loadings-pc1.svg"] {
        assert!(p.join("results/t/plots").join(figure).is_file(), "{figure}");
    }
}

#[test]
fn a_key_or_table_defined_twice_names_itself_and_its_first_line() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path();
    write(p, "t.csv", &table(',', '.', None));
    let base = recipe("t.csv", "", "out");
    write(p, "t.toml", &format!("{base}\n[components]\ncompute = 3\n"));
    let out = sextant(p, &["check", "t.toml"]);
    assert_eq!(out.code, 2);
    assert!(
        out.stderr.contains(
            "t.toml:12:2: `[components]` is defined twice; its first definition is on line 7"
        ),
        "{}",
        out.stderr
    );
    write(
        p,
        "t.toml",
        &base.replace("id = \"id\"\n", "id = \"id\"\n\nid = \"a\"\n"),
    );
    let out = sextant(p, &["check", "t.toml"]);
    assert_eq!(out.code, 2);
    assert!(
        out.stderr
            .contains("t.toml:6:1: `input.id` is defined twice; its first definition is on line 4"),
        "{}",
        out.stderr
    );
}

#[test]
fn imputed_csv_gives_a_log_feature_s_fill_in_its_own_units() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path();
    let c: [f64; 7] = [12.5, 40.0, 3.25, 8.0, 150.0, 27.0, 64.0];
    let mut text = String::from("id,a,b,c\n");
    for (i, (id, v, _)) in rows(8).iter().enumerate() {
        let cell = if i == 2 {
            "NA".to_string()
        } else {
            c[i - usize::from(i > 2)].to_string()
        };
        text.push_str(&format!(
            "{id},{},{},{cell}\n",
            written(v[0], '.', None),
            written(v[1], '.', None)
        ));
    }
    write(p, "t.csv", &text);
    let body = recipe("t.csv", "", "out").replace("exclude = [\"note\"]\n", "");
    write(
        p,
        "t.toml",
        &body.replace(
            "\n[components]",
            "\n[transform]\nln = [\"c\"]\n[components]",
        ),
    );
    run(p, "t.toml", "in-memory");
    let imputed = read(&p.join("out/imputed.csv"));
    let lines: Vec<&str> = imputed.lines().collect();
    assert_eq!(
        lines[0],
        "row,id,feature,filled_value,transformed_value,transform"
    );
    let fields: Vec<&str> = lines[1].split(',').collect();
    assert_eq!(&fields[..3], ["3", "s2", "c"]);
    assert_eq!(fields[5], "ln");
    // The mean fill on the ln scale is the mean of the logs (computed here with
    // the standard library), and the value in c's units is its exponential.
    let mean_log = c.iter().map(|v| v.ln()).sum::<f64>() / c.len() as f64;
    let transformed: f64 = fields[4].parse().unwrap();
    let original: f64 = fields[3].parse().unwrap();
    assert!(
        (transformed - mean_log).abs() < 1e-12,
        "{transformed} vs {mean_log}"
    );
    assert!(
        (original - mean_log.exp()).abs() < 1e-9 * original,
        "{original}"
    );
    assert!((original - transformed.exp()).abs() < 1e-12 * original);
    // apply gives the batch's fills in the same form.
    let out = sextant(p, &["apply", "out", "t.csv", "--out", "batch"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    assert_eq!(read(&p.join("batch/imputed.csv")), imputed);
}

/// The same bad cell (file line 8, after a quoted note over three lines and
/// CRLF endings) has the same line in check, run (both engines), new and apply.
#[test]
fn a_bad_cell_has_one_line_number_in_every_command() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path();
    let good = "id,a,b,note\r\nr1,1,2,x\r\nr2,3,4,y\r\nr3,5,7,z\r\nr4,7,9,w\r\n";
    write(p, "good.csv", good);
    let bad = "id,a,b,note\r\nr1,1,2,\"two\r\nlines\"\r\nr2,3,4,x\r\nr3,5,6,\"a\r\n\r\nb\"\r\nr4,7,x8,z\r\nr5,2,3,v\r\n";
    write(p, "bad.csv", bad);
    let want = "bad.csv:8: column `b` has a non-numeric cell `x8`";
    let body = recipe("bad.csv", "", "out").replace("keep = 2", "keep = 1");
    write(p, "bad.toml", &body);
    write(
        p,
        "good.toml",
        &body
            .replace("bad.csv", "good.csv")
            .replace("\"out\"", "\"model\""),
    );
    for args in [
        &["check", "bad.toml"][..],
        &["run", "--engine", "in-memory", "bad.toml"],
        &["run", "--engine", "passes", "bad.toml"],
    ] {
        let out = sextant(p, args);
        assert_eq!(out.code, 2, "{args:?}");
        assert!(out.stderr.contains(want), "{args:?}: {}", out.stderr);
    }
    run(p, "good.toml", "in-memory");
    let out = sextant(p, &["apply", "model", "bad.csv"]);
    assert_eq!(out.code, 2);
    assert!(out.stderr.contains(want), "apply: {}", out.stderr);
    let out = sextant(p, &["new", "bad.csv", "-o", "fresh.toml"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    assert!(
        out.stdout.contains("first `x8` on line 8;"),
        "new: {}",
        out.stdout
    );
    assert!(
        out.stdout.contains("1 cell holds text"),
        "new: {}",
        out.stdout
    );
}
