//! `sextant new` on the real binary: the starter recipe it writes passes `check`
//! and `run` unchanged, gives each column the expected role, never replaces a file
//! without --force, points at the table from wherever it is written, and is the
//! same text every time.

use std::fs;
use std::path::{Path, PathBuf};
use std::process::Command;

const BIN: &str = env!("CARGO_BIN_EXE_sextant");
const DEFAULT_MISSING: [&str; 4] = ["", "NA", "N/A", "-"];

fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

struct Output {
    code: i32,
    stdout: String,
    stderr: String,
}

fn sextant(args: &[&str], cwd: &Path) -> Output {
    let out = Command::new(BIN)
        .args(args)
        .current_dir(cwd)
        .output()
        .unwrap();
    Output {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

/// Runs `sextant new` and insists that it succeeds.
fn new_ok(args: &[&str], cwd: &Path) -> String {
    let mut all = vec!["new"];
    all.extend_from_slice(args);
    let out = sextant(&all, cwd);
    assert_eq!(
        out.code, 0,
        "sextant {all:?} failed\nstdout:\n{}\nstderr:\n{}",
        out.stdout, out.stderr
    );
    out.stdout
}

/// `check` and `run` on the recipe both succeed; returns check's output.
fn check_and_run(recipe: &str, cwd: &Path) -> String {
    let check = sextant(&["check", recipe], cwd);
    let text = fs::read_to_string(cwd.join(recipe)).unwrap_or_default();
    assert_eq!(
        check.code, 0,
        "check failed on {recipe}\n{}\nrecipe:\n{text}",
        check.stderr
    );
    let run = sextant(&["run", recipe], cwd);
    assert_eq!(
        run.code, 0,
        "run failed on {recipe}\n{}\nrecipe:\n{text}",
        run.stderr
    );
    check.stdout
}

fn parse(path: &Path) -> toml::Value {
    let text = fs::read_to_string(path).unwrap();
    toml::from_str(&text).unwrap_or_else(|e| panic!("{} is not TOML: {e}\n{text}", path.display()))
}

fn strings(value: Option<&toml::Value>) -> Vec<String> {
    value
        .and_then(toml::Value::as_array)
        .map(|a| {
            a.iter()
                .map(|v| v.as_str().expect("a string").to_string())
                .collect()
        })
        .unwrap_or_default()
}

/// The id, groups and exclusions a recipe gives.
fn roles(recipe: &toml::Value) -> (Option<String>, Vec<String>, Vec<String>) {
    let input = &recipe["input"];
    (
        input.get("id").and_then(|v| v.as_str()).map(String::from),
        strings(input.get("groups")),
        strings(input.get("exclude")),
    )
}

/// Writes `text` as `name` in `dir`, making folders as needed.
fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let path = dir.join(name);
    fs::create_dir_all(path.parent().unwrap()).unwrap();
    fs::write(&path, text).unwrap();
    path
}

/// A small deterministic stream of numbers in [0, 1) for test tables.
struct Numbers(u64);

impl Numbers {
    fn next(&mut self) -> f64 {
        // xorshift64*: plenty for varied, reproducible test columns.
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        (self.0.wrapping_mul(0x2545_f491_4f6c_dd1d) >> 11) as f64 / (1u64 << 53) as f64
    }
}

/// A table from a header and a function giving each row's cells.
fn table(
    header: &[&str],
    rows: usize,
    sep: &str,
    mut cells: impl FnMut(usize) -> Vec<String>,
) -> String {
    let mut text = header.join(sep);
    text.push('\n');
    for i in 0..rows {
        let row = cells(i);
        assert_eq!(row.len(), header.len());
        text.push_str(&row.join(sep));
        text.push('\n');
    }
    text
}

/// Runs `new` on `data` (relative to `dir`), then check and run; returns the
/// recipe, its text and check's output.
fn starter(dir: &Path, data: &str) -> (toml::Value, String, String) {
    new_ok(&[data], dir);
    let stem = Path::new(data)
        .file_stem()
        .unwrap()
        .to_string_lossy()
        .into_owned();
    let recipe = format!("{stem}.toml");
    let checked = check_and_run(&recipe, dir);
    (
        parse(&dir.join(&recipe)),
        fs::read_to_string(dir.join(&recipe)).unwrap(),
        checked,
    )
}

/// The recipe's comments as running text, so a phrase can be found across line breaks.
fn prose(text: &str) -> String {
    text.replace("\n# ", " ").replace("\n    # ", " ")
}

fn names(list: &[&str]) -> Vec<String> {
    list.iter().map(|s| s.to_string()).collect()
}

// ---------------------------------------------------------------------------
// Demo and reference tables

#[test]
fn demo_tables_give_working_recipes_with_the_documented_roles() {
    let mut found = 0;
    let mut tables: Vec<PathBuf> = fs::read_dir(repo().join("demo-data"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "csv"))
        .collect();
    tables.sort();
    for source in tables {
        found += 1;
        let dir = tempfile::tempdir().unwrap();
        let name = source.file_name().unwrap().to_string_lossy().into_owned();
        fs::create_dir(dir.path().join("demo-data")).unwrap();
        fs::copy(&source, dir.path().join("demo-data").join(&name)).unwrap();
        let (recipe, text, checked) = starter(dir.path(), &format!("demo-data/{name}"));

        // The demo README: `sample` is the id, `farm` and `season` are groups
        // (in table order), `collected` is a date.
        let header = fs::read_to_string(&source).unwrap();
        let header: Vec<&str> = header.lines().next().unwrap().split(',').collect();
        let mut groups = names(&["farm", "season"]);
        groups.sort_by_key(|g| header.iter().position(|h| h == g));
        assert_eq!(
            roles(&recipe),
            (Some("sample".into()), groups, names(&["collected"])),
            "{name}"
        );
        assert_eq!(
            strings(recipe["input"].get("missing")),
            names(&DEFAULT_MISSING)
        );
        assert_eq!(
            recipe["input"]["file"].as_str(),
            Some(format!("demo-data/{name}").as_str())
        );
        assert!(recipe["input"].get("delimiter").is_none());
        assert!(recipe["input"].get("features").is_none());
        // Citrate is measured on only some samples: the recipe says it will be
        // dropped, and check drops it.
        assert!(
            prose(&text).contains("That drops citrate_mg_dl ("),
            "{name}:\n{text}"
        );
        assert!(
            checked.contains("dropped  citrate_mg_dl"),
            "{name}:\n{checked}"
        );
        // The skewed counts get a log10 suggestion, commented out.
        let suggestion = text
            .lines()
            .find(|l| l.starts_with("# log10 = ["))
            .unwrap_or_else(|| panic!("{name}: no log10 suggestion\n{text}"));
        for skewed in ["somatic_cells_k_ml", "bacteria_k_cfu_ml"] {
            assert!(suggestion.contains(skewed), "{name}: {suggestion}");
        }
        assert!(!suggestion.contains("\"ph\""), "{name}: {suggestion}");
        assert!(
            recipe
                .get("transform")
                .and_then(|t| t.get("log10"))
                .is_none()
        );
        // …and enabling it gives a recipe that still passes check.
        let enabled = text
            .replace("# [transform]\n", "[transform]\n")
            .replace("# log10 = [", "log10 = [");
        let stem = name.trim_end_matches(".csv");
        write(dir.path(), &format!("{stem}-log.toml"), &enabled);
        let check = sextant(&["check", &format!("{stem}-log.toml")], dir.path());
        assert_eq!(check.code, 0, "{name}: {}", check.stderr);
        assert!(
            check.stdout.contains("transform  log10 somatic_cells_k_ml"),
            "{}",
            check.stdout
        );
    }
    assert!(found >= 2, "demo-data/ should hold at least two tables");
}

#[test]
fn reference_tables_get_their_class_column_as_a_group() {
    let data = repo().join("tests/data");
    for (name, features) in [
        ("iris.csv", 4),
        ("wine.csv", 13),
        ("breast_cancer_wdbc.csv", 30),
    ] {
        let source = data.join(name);
        if !source.exists() {
            eprintln!("skipping {name}: tests/data/{name} is not there yet");
            continue;
        }
        let dir = tempfile::tempdir().unwrap();
        fs::copy(&source, dir.path().join(name)).unwrap();
        let (recipe, _, checked) = starter(dir.path(), name);
        assert_eq!(roles(&recipe), (None, names(&["class"]), vec![]), "{name}");
        assert!(
            checked.contains(&format!("features   {features} selected, {features} used")),
            "{name}:\n{checked}"
        );
    }
}

// ---------------------------------------------------------------------------
// Small tables, one trait at a time

#[test]
fn numeric_only_table() {
    let dir = tempfile::tempdir().unwrap();
    let mut r = Numbers(1);
    let text = table(&["a", "b", "c"], 25, ",", |_| {
        let x = r.next();
        vec![
            format!("{x:.4}"),
            format!("{:.4}", x + r.next()),
            format!("{:.4}", r.next()),
        ]
    });
    write(dir.path(), "plain.csv", &text);
    let (recipe, _, checked) = starter(dir.path(), "plain.csv");
    assert_eq!(roles(&recipe), (None, vec![], vec![]));
    assert!(
        checked.contains("features   3 selected, 3 used"),
        "{checked}"
    );
    assert_eq!(recipe["missing"]["method"].as_str(), Some("mean"));
    assert_eq!(
        recipe["missing"]["max_feature_missing"].as_float(),
        Some(0.3)
    );
    assert_eq!(recipe["scaling"]["method"].as_str(), Some("unit-variance"));
    assert_eq!(recipe["components"]["keep"].as_str(), Some("broken-stick"));
    // compute is lowered to the number of features.
    assert_eq!(recipe["components"]["compute"].as_integer(), Some(3));
    assert_eq!(recipe["output"]["folder"].as_str(), Some("results/plain"));
    assert!(dir.path().join("results/plain/scores.csv").exists());
}

#[test]
fn text_id_and_numeric_id_columns() {
    let dir = tempfile::tempdir().unwrap();
    let mut r = Numbers(2);
    // A text label named like one, and row numbers that are not the id.
    let text = table(&["n", "specimen", "x", "y"], 20, ",", |i| {
        vec![
            (i + 1).to_string(),
            format!("S-{:03}", 20 - i),
            format!("{:.3}", r.next()),
            format!("{:.3}", r.next()),
        ]
    });
    write(dir.path(), "labelled.csv", &text);
    let (recipe, _, _) = starter(dir.path(), "labelled.csv");
    assert_eq!(
        roles(&recipe),
        (Some("specimen".into()), vec![], names(&["n"]))
    );

    // Whole numbers in no order, named as an id.
    let text = table(&["x", "SampleID", "y"], 15, ",", |i| {
        vec![
            format!("{:.3}", r.next()),
            (1000 + (i * 7) % 15).to_string(),
            format!("{:.3}", r.next()),
        ]
    });
    write(dir.path(), "numbered.csv", &text);
    let (recipe, _, _) = starter(dir.path(), "numbered.csv");
    assert_eq!(roles(&recipe), (Some("SampleID".into()), vec![], vec![]));
}

#[test]
fn group_columns_follow_the_documented_rule() {
    let dir = tempfile::tempdir().unwrap();
    let mut r = Numbers(3);
    // 40 rows: groups may have 2 to 8 values. `remark` has 13, too many.
    let text = table(
        &["treatment", "x", "site", "remark", "batch", "y", "z"],
        40,
        ",",
        |i| {
            vec![
                ["control", "low dose", "high dose"][i % 3].to_string(),
                format!("{:.3}", r.next()),
                ["north", "south"][i % 2].to_string(),
                format!("seen by {}", (i * 5) % 13),
                (1 + i % 4).to_string(),
                format!("{:.3}", r.next()),
                format!("{:.3}", r.next()),
            ]
        },
    );
    write(dir.path(), "trial.csv", &text);
    let (recipe, text, checked) = starter(dir.path(), "trial.csv");
    assert_eq!(
        roles(&recipe),
        (
            None,
            names(&["treatment", "site", "batch"]),
            names(&["remark"])
        )
    );
    assert!(
        checked.contains("features   3 selected, 3 used"),
        "{checked}"
    );
    assert!(prose(&text).contains("here 8"), "{text}");
}

#[test]
fn date_and_time_columns_are_excluded() {
    let dir = tempfile::tempdir().unwrap();
    let mut r = Numbers(4);
    let text = table(&["sample", "taken", "clock", "x", "y"], 30, ",", |i| {
        vec![
            format!("P{i}"),
            // Few distinct values, so only the date rule keeps them out of the groups.
            ["2026-02-03", "2026-02-10", "2026-02-17"][i % 3].into(),
            ["08:30", "12:00", "16:45"][i % 3].into(),
            format!("{:.3}", r.next()),
            format!("{:.3}", r.next()),
        ]
    });
    write(dir.path(), "dated.csv", &text);
    let (recipe, text, _) = starter(dir.path(), "dated.csv");
    assert_eq!(
        roles(&recipe),
        (Some("sample".into()), vec![], names(&["taken", "clock"]))
    );
    assert!(
        text.contains("\"taken\",                     # dates or times"),
        "{text}"
    );
}

#[test]
fn constant_column_is_excluded_so_check_passes() {
    let dir = tempfile::tempdir().unwrap();
    let mut r = Numbers(5);
    let text = table(&["x", "blank_level", "y", "z"], 20, ",", |_| {
        vec![
            format!("{:.3}", r.next()),
            "0.5".into(),
            format!("{:.3}", r.next()),
            format!("{:.3}", r.next()),
        ]
    });
    write(dir.path(), "flat.csv", &text);
    let (recipe, text, _) = starter(dir.path(), "flat.csv");
    assert_eq!(roles(&recipe), (None, vec![], names(&["blank_level"])));
    // Without the exclusion the same recipe fails, so the exclusion matters.
    let without = text.replace("    \"blank_level\",", "");
    write(dir.path(), "without.toml", &without);
    let check = sextant(&["check", "without.toml"], dir.path());
    assert_eq!(check.code, 2, "{}", check.stdout);
    assert!(check.stderr.contains("blank_level"), "{}", check.stderr);
}

#[test]
fn semicolon_table_gets_its_delimiter_and_decimal_commas_are_excluded() {
    let dir = tempfile::tempdir().unwrap();
    let mut r = Numbers(6);
    let text = table(&["code", "a", "b", "c", "eu"], 12, ";", |i| {
        vec![
            format!("K{i}"),
            format!("{:.3}", r.next()),
            format!("{:.3}", r.next()),
            format!("{:.3}", r.next()),
            format!("{:.2}", r.next()).replace('.', ","),
        ]
    });
    write(dir.path(), "semi.csv", &text);
    let (recipe, _, _) = starter(dir.path(), "semi.csv");
    assert_eq!(recipe["input"]["delimiter"].as_str(), Some(";"));
    assert_eq!(
        roles(&recipe),
        (Some("code".into()), vec![], names(&["eu"]))
    );
}

#[test]
fn tab_separated_table_needs_no_delimiter_setting() {
    let dir = tempfile::tempdir().unwrap();
    let mut r = Numbers(7);
    let text = table(&["p", "q", "r"], 10, "\t", |_| {
        (0..3).map(|_| format!("{:.3}", r.next())).collect()
    });
    write(dir.path(), "tabs.tsv", &text);
    let (recipe, _, checked) = starter(dir.path(), "tabs.tsv");
    assert!(recipe["input"].get("delimiter").is_none());
    assert!(
        checked.contains("features   3 selected, 3 used"),
        "{checked}"
    );
}

#[test]
fn mostly_missing_column_is_kept_in_the_recipe_and_dropped_by_the_run() {
    let dir = tempfile::tempdir().unwrap();
    let mut r = Numbers(8);
    let text = table(&["x", "sparse", "y", "z"], 30, ",", |i| {
        vec![
            format!("{:.3}", r.next()),
            if i % 5 < 3 {
                "NA".into()
            } else {
                format!("{:.3}", r.next())
            },
            format!("{:.3}", r.next()),
            if i == 4 {
                String::new()
            } else {
                format!("{:.3}", r.next())
            },
        ]
    });
    write(dir.path(), "gappy.csv", &text);
    let (recipe, text, checked) = starter(dir.path(), "gappy.csv");
    assert_eq!(roles(&recipe), (None, vec![], vec![]));
    assert!(
        prose(&text).contains("That drops sparse (60.0 % missing)"),
        "{text}"
    );
    assert!(
        prose(&text).contains("29 of 30 rows are complete"),
        "{text}"
    );
    assert!(checked.contains("dropped  sparse"), "{checked}");
    assert!(
        checked.contains("features   4 selected, 3 used"),
        "{checked}"
    );
}

#[test]
fn missing_value_marks_in_numeric_columns_join_the_missing_list() {
    let dir = tempfile::tempdir().unwrap();
    let mut r = Numbers(9);
    let text = table(&["site", "lead", "zinc", "tin", "note"], 30, ",", |i| {
        vec![
            ["river", "lake", "well"][i % 3].into(),
            if i % 7 == 2 {
                "ND".into()
            } else {
                format!("{:.3}", r.next())
            },
            if i % 11 == 5 {
                "<LOD".into()
            } else {
                format!("{:.3}", r.next())
            },
            format!("{:.3}", r.next()),
            // `?` in a text column is not a reason to treat it as missing.
            if i % 2 == 0 {
                "?".into()
            } else {
                format!("remark {i}")
            },
        ]
    });
    write(dir.path(), "metals.csv", &text);
    let (recipe, text, checked) = starter(dir.path(), "metals.csv");
    let mut expected = names(&DEFAULT_MISSING);
    expected.extend(names(&["<LOD", "ND"]));
    assert_eq!(strings(recipe["input"].get("missing")), expected);
    assert_eq!(roles(&recipe), (None, names(&["site"]), names(&["note"])));
    assert!(text.contains("#   \"ND\" in lead"), "{text}");
    assert!(
        checked.contains("features   3 selected, 3 used"),
        "{checked}"
    );
}

#[test]
fn numbers_with_stray_text_are_excluded_with_the_cell_named() {
    let dir = tempfile::tempdir().unwrap();
    let mut r = Numbers(10);
    let text = table(&["x", "y", "z"], 20, ",", |i| {
        vec![
            format!("{:.3}", r.next()),
            if i == 6 {
                "see notes".into()
            } else {
                format!("{:.3}", r.next())
            },
            format!("{:.3}", r.next()),
        ]
    });
    write(dir.path(), "typo.csv", &text);
    let (recipe, text, _) = starter(dir.path(), "typo.csv");
    assert_eq!(roles(&recipe), (None, vec![], names(&["y"])));
    assert!(
        prose(&text).contains("first `see notes` on line 8"),
        "{text}"
    );
}

// ---------------------------------------------------------------------------
// Files and paths

fn small_table(dir: &Path, name: &str) -> PathBuf {
    let mut r = Numbers(11);
    let text = table(&["id", "g", "a", "b", "c"], 20, ",", |i| {
        vec![
            format!("r{i}"),
            ["x", "y"][i % 2].into(),
            format!("{:.3}", r.next()),
            format!("{:.3}", r.next()),
            format!("{:.3}", r.next()),
        ]
    });
    write(dir, name, &text)
}

#[test]
fn an_existing_recipe_is_replaced_only_with_force() {
    let dir = tempfile::tempdir().unwrap();
    small_table(dir.path(), "t.csv");
    new_ok(&["t.csv"], dir.path());
    let recipe = dir.path().join("t.toml");
    let written = fs::read(&recipe).unwrap();
    let mut edited = written.clone();
    edited.extend_from_slice(b"# my own note\n");
    fs::write(&recipe, &edited).unwrap();

    let again = sextant(&["new", "t.csv"], dir.path());
    assert_eq!(again.code, 2, "{}", again.stdout);
    assert!(again.stderr.contains("t.toml"), "{}", again.stderr);
    assert!(again.stderr.contains("--force"), "{}", again.stderr);
    assert!(again.stdout.is_empty(), "{}", again.stdout);
    assert_eq!(fs::read(&recipe).unwrap(), edited);

    let forced = new_ok(&["t.csv", "--force"], dir.path());
    assert!(forced.contains("replaced"), "{forced}");
    assert_eq!(fs::read(&recipe).unwrap(), written);
    // No temporary files are left beside it.
    let left: Vec<String> = fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.starts_with('.'))
        .collect();
    assert!(left.is_empty(), "{left:?}");
}

#[test]
fn the_table_itself_is_never_overwritten() {
    let dir = tempfile::tempdir().unwrap();
    let data = small_table(dir.path(), "t.csv");
    let before = fs::read(&data).unwrap();
    let out = sextant(&["new", "t.csv", "-o", "./t.csv", "--force"], dir.path());
    assert_eq!(out.code, 2, "{}", out.stdout);
    assert_eq!(fs::read(&data).unwrap(), before);
}

#[test]
fn default_recipe_goes_to_the_current_folder() {
    let dir = tempfile::tempdir().unwrap();
    small_table(&dir.path().join("data"), "t.csv");
    let work = dir.path().join("work");
    fs::create_dir(&work).unwrap();
    let stdout = new_ok(&["../data/t.csv"], &work);
    assert!(work.join("t.toml").exists());
    assert!(!dir.path().join("data/t.toml").exists());
    assert!(
        stdout.contains("next       sextant check t.toml"),
        "{stdout}"
    );
    let recipe = parse(&work.join("t.toml"));
    assert_eq!(recipe["input"]["file"].as_str(), Some("../data/t.csv"));
    assert_eq!(recipe["output"]["folder"].as_str(), Some("results/t"));
    check_and_run("t.toml", &work);
}

#[test]
fn recipe_in_a_subfolder_points_back_at_the_table() {
    let dir = tempfile::tempdir().unwrap();
    small_table(&dir.path().join("data"), "t.csv");
    // The folder does not exist yet: it is made.
    new_ok(
        &["data/t.csv", "-o", "analysis/recipes/first.toml"],
        dir.path(),
    );
    let recipe = parse(&dir.path().join("analysis/recipes/first.toml"));
    assert_eq!(recipe["input"]["file"].as_str(), Some("../../data/t.csv"));
    check_and_run("analysis/recipes/first.toml", dir.path());
    assert!(
        dir.path()
            .join("analysis/recipes/results/t/manifest.json")
            .exists()
    );
    // The same recipe works from its own folder.
    let from_inside = sextant(
        &["check", "first.toml"],
        &dir.path().join("analysis/recipes"),
    );
    assert_eq!(from_inside.code, 0, "{}", from_inside.stderr);

    // An existing folder as -o gets <stem>.toml inside it.
    new_ok(&["data/t.csv", "-o", "analysis"], dir.path());
    let recipe = parse(&dir.path().join("analysis/t.toml"));
    assert_eq!(recipe["input"]["file"].as_str(), Some("../data/t.csv"));

    // A table given by an absolute path still gets a relative one.
    let absolute = dir.path().join("data/t.csv");
    new_ok(
        &[absolute.to_str().unwrap(), "-o", "data/deep/er/r.toml"],
        dir.path(),
    );
    let recipe = parse(&dir.path().join("data/deep/er/r.toml"));
    assert_eq!(recipe["input"]["file"].as_str(), Some("../../t.csv"));
    check_and_run("data/deep/er/r.toml", dir.path());
}

#[test]
fn the_recipe_text_is_the_same_every_time() {
    let dir = tempfile::tempdir().unwrap();
    fs::create_dir(dir.path().join("demo-data")).unwrap();
    let name = "dairy-lab-2026-03.csv";
    fs::copy(
        repo().join("demo-data").join(name),
        dir.path().join("demo-data").join(name),
    )
    .unwrap();
    let data = format!("demo-data/{name}");
    let first = new_ok(&[&data, "-o", "one.toml"], dir.path());
    let second = new_ok(&[&data, "-o", "two.toml"], dir.path());
    assert_eq!(
        fs::read(dir.path().join("one.toml")).unwrap(),
        fs::read(dir.path().join("two.toml")).unwrap()
    );
    assert_eq!(first.replace("one.toml", "two.toml"), second);
    // Another folder at the same depth gives the same text too.
    let other = tempfile::tempdir().unwrap();
    fs::create_dir(other.path().join("demo-data")).unwrap();
    fs::copy(dir.path().join(&data), other.path().join(&data)).unwrap();
    new_ok(&[&data, "-o", "one.toml"], other.path());
    assert_eq!(
        fs::read(dir.path().join("one.toml")).unwrap(),
        fs::read(other.path().join("one.toml")).unwrap()
    );
    // Nothing machine-specific is written.
    let text = fs::read_to_string(dir.path().join("one.toml")).unwrap();
    let root = dir.path().to_string_lossy().into_owned();
    assert!(!text.contains(&root), "{text}");
}

#[test]
fn a_table_without_measurements_is_refused_and_nothing_is_written() {
    let dir = tempfile::tempdir().unwrap();
    let text = table(&["name", "colour"], 10, ",", |i| {
        vec![format!("item {i}"), ["red", "blue"][i % 2].into()]
    });
    write(dir.path(), "words.csv", &text);
    let out = sextant(&["new", "words.csv"], dir.path());
    assert_eq!(out.code, 2, "{}", out.stdout);
    assert!(out.stderr.contains("words.csv"), "{}", out.stderr);
    assert!(out.stderr.contains("no usable features"), "{}", out.stderr);
    assert!(!dir.path().join("words.toml").exists());

    let missing = sextant(&["new", "absent.csv"], dir.path());
    assert_eq!(missing.code, 2);
    assert!(missing.stderr.contains("absent.csv"), "{}", missing.stderr);
}

#[test]
fn the_summary_names_every_column_and_the_next_command() {
    let dir = tempfile::tempdir().unwrap();
    small_table(dir.path(), "t.csv");
    let stdout = new_ok(&["t.csv", "-o", "my recipes/t.toml"], dir.path());
    for line in [
        "table      t.csv: 20 rows, 5 columns, delimiter ','",
        "id         id",
        "group      g",
        "feature    a",
        "feature    b",
        "feature    c",
        "recipe     my recipes/t.toml written",
        "next       sextant check 'my recipes/t.toml'",
    ] {
        assert!(stdout.contains(line), "missing `{line}` in\n{stdout}");
    }
}
