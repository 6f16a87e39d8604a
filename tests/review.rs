//! The commands that make an analysis reviewable and rerunnable: `verify`,
//! `diff`, `explain` and `pin`, run as the real binary on temporary copies of the
//! shipped recipes and demo data.

use std::fs;
use std::path::{Path, PathBuf};

mod common;
use common::{Out, sextant, workspace};

fn run_demo(ws: &Path) -> PathBuf {
    let out = sextant(ws, &["run", "recipes/dairy-march.toml"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    ws.join("results/dairy-march")
}

fn edit(path: &Path, from: &str, to: &str) {
    let text = fs::read_to_string(path).unwrap();
    assert!(text.contains(from), "{} lacks {from:?}", path.display());
    fs::write(path, text.replacen(from, to, 1)).unwrap();
}

#[test]
fn verify_passes_on_untouched_results_and_names_every_change() {
    let ws = workspace();
    let results = run_demo(ws.path());
    let ok = sextant(ws.path(), &["verify", "results/dairy-march"]);
    assert_eq!(ok.code, 0, "{}{}", ok.stdout, ok.stderr);
    assert!(ok.stdout.contains("verified"), "{}", ok.stdout);
    let manifest: serde_json::Value =
        serde_json::from_slice(&fs::read(results.join("manifest.json")).unwrap()).unwrap();
    let outputs = manifest["outputs"].as_array().unwrap().len();
    assert!(
        outputs >= 8,
        "the demo writes tables, model, plots and report"
    );
    assert_eq!(
        ok.stdout.matches("unchanged").count(),
        2 + outputs,
        "recipe, input and every output:\n{}",
        ok.stdout
    );

    // A changed byte in an output.
    let scores = results.join("scores.csv");
    let original = fs::read(&scores).unwrap();
    let mut changed = original.clone();
    let last = changed.len() - 2;
    changed[last] = if changed[last] == b'1' { b'2' } else { b'1' };
    fs::write(&scores, &changed).unwrap();
    let out = sextant(ws.path(), &["verify", "results/dairy-march"]);
    assert_eq!(out.code, 1);
    assert!(
        out.stdout
            .lines()
            .any(|l| l.contains("scores.csv") && l.contains("CHANGED")),
        "{}",
        out.stdout
    );
    fs::write(&scores, &original).unwrap();

    // A deleted output.
    let variance = results.join("variance.csv");
    let kept = fs::read(&variance).unwrap();
    fs::remove_file(&variance).unwrap();
    let out = sextant(ws.path(), &["verify", "results/dairy-march"]);
    assert_eq!(out.code, 1);
    assert!(
        out.stdout
            .lines()
            .any(|l| l.contains("variance.csv") && l.contains("MISSING")),
        "{}",
        out.stdout
    );
    fs::write(&variance, kept).unwrap();

    // A changed input.
    let data = ws.path().join("demo-data/dairy-lab-2026-03.csv");
    edit(
        &data,
        "M-0001,Alder Hill,summer,2025-06-02,4.16",
        "M-0001,Alder Hill,summer,2025-06-02,4.17",
    );
    let out = sextant(ws.path(), &["verify", "results/dairy-march"]);
    assert_eq!(out.code, 1);
    assert!(
        out.stdout
            .lines()
            .any(|l| l.contains("dairy-lab-2026-03.csv") && l.contains("CHANGED")),
        "{}",
        out.stdout
    );

    // An edited manifest no longer matches its digest.
    edit(
        &data,
        "M-0001,Alder Hill,summer,2025-06-02,4.17",
        "M-0001,Alder Hill,summer,2025-06-02,4.16",
    );
    let manifest = results.join("manifest.json");
    edit(&manifest, "\"unit-variance\"", "\"center\"");
    let out = sextant(ws.path(), &["verify", "results/dairy-march"]);
    assert_eq!(out.code, 1);
    assert!(out.stdout.contains("DOES NOT MATCH"), "{}", out.stdout);
}

#[test]
fn verify_rerun_reproduces_every_shipped_recipe() {
    let ws = workspace();
    let mut recipes: Vec<_> = fs::read_dir(ws.path().join("recipes"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    recipes.sort();
    for recipe in recipes {
        let text = fs::read_to_string(&recipe).unwrap();
        let folder = text
            .lines()
            .find_map(|l| l.strip_prefix("folder = \"../"))
            .unwrap()
            .trim_end_matches('"');
        let run = sextant(ws.path(), &["run", recipe.to_str().unwrap()]);
        assert_eq!(run.code, 0, "{}", run.stderr);
        let out = sextant(ws.path(), &["verify", "--rerun", folder]);
        assert_eq!(
            out.code,
            0,
            "{}: {}{}",
            recipe.display(),
            out.stdout,
            out.stderr
        );
        assert!(
            out.stdout.contains("byte for byte identical"),
            "{}",
            out.stdout
        );
    }
}

#[test]
fn verify_rerun_names_the_first_differing_file_and_the_largest_difference() {
    let ws = workspace();
    let results = run_demo(ws.path());
    // Tamper with one loading by a known amount: the rerun must find it.
    let loadings = results.join("loadings.csv");
    let text = fs::read_to_string(&loadings).unwrap();
    let second = text.lines().nth(1).unwrap();
    let cell = second.split(',').nth(1).unwrap();
    let bumped = format!("{}", cell.parse::<f64>().unwrap() + 0.25);
    fs::write(&loadings, text.replacen(cell, &bumped, 1)).unwrap();
    let out = sextant(ws.path(), &["verify", "--rerun", "results/dairy-march"]);
    assert_eq!(out.code, 1);
    let line = out
        .stdout
        .lines()
        .find(|l| l.starts_with("rerun") && l.contains("loadings.csv"))
        .unwrap_or_else(|| panic!("no rerun line for loadings.csv:\n{}", out.stdout));
    assert!(line.contains("from line 2"), "{line}");
    // 0.25 to rounding: x + 0.25 − x is exact only for some x, and the
    // loading's last bits are not this test's business.
    let largest: f64 = line
        .split("largest absolute difference between numbers ")
        .nth(1)
        .and_then(|rest| rest.split_whitespace().next())
        .and_then(|v| v.parse().ok())
        .unwrap_or_else(|| panic!("no largest difference in {line}"));
    assert!((largest - 0.25).abs() <= 1e-15, "{line}");
}

#[test]
fn verify_refuses_a_folder_without_a_manifest() {
    let ws = workspace();
    fs::create_dir(ws.path().join("plain")).unwrap();
    let out = sextant(ws.path(), &["verify", "plain"]);
    assert_eq!(out.code, 2);
    assert!(
        out.stderr.contains("not a sextant results folder"),
        "{}",
        out.stderr
    );
}

/// Runs the demo recipe, then a variant of it into a second folder.
fn two_runs(ws: &Path, from: &str, to: &str, data_edit: Option<(&str, &str)>) -> Out {
    run_demo(ws);
    let variant = ws.join("recipes/variant.toml");
    let text = fs::read_to_string(ws.join("recipes/dairy-march.toml")).unwrap();
    let mut text = text.replace("../results/dairy-march", "../results/variant");
    if !from.is_empty() {
        assert!(text.contains(from));
        text = text.replacen(from, to, 1);
    }
    if let Some((a, b)) = data_edit {
        let data = ws.join("demo-data/dairy-lab-2026-03.csv");
        let copy = ws.join("demo-data/variant.csv");
        fs::write(&copy, fs::read_to_string(&data).unwrap().replacen(a, b, 1)).unwrap();
        text = text.replace("dairy-lab-2026-03.csv", "variant.csv");
    }
    fs::write(&variant, text).unwrap();
    let out = sextant(ws, &["run", "recipes/variant.toml"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    sextant(ws, &["diff", "results/dairy-march", "results/variant"])
}

#[test]
fn diff_of_identical_runs_shows_no_change() {
    let ws = workspace();
    let out = two_runs(ws.path(), "", "", None);
    assert_eq!(out.code, 0, "{}", out.stderr);
    // Only the output folder differs.
    assert!(out.stdout.contains("output.folder"), "{}", out.stdout);
    assert!(!out.stdout.contains("scaling.method"), "{}", out.stdout);
    assert!(
        out.stdout
            .contains("none: every input has the same SHA-256"),
        "{}",
        out.stdout
    );
    assert!(
        out.stdout
            .contains("principal angles on 17 shared features: 0°, 0°"),
        "{}",
        out.stdout
    );
    assert!(
        out.stdout
            .lines()
            .any(|l| l.starts_with("largest score change") && l.contains(" 0 on PC")),
        "{}",
        out.stdout
    );
}

#[test]
fn diff_after_a_change_of_scaling() {
    let ws = workspace();
    let out = two_runs(
        ws.path(),
        "method = \"unit-variance\"",
        "method = \"pareto\"",
        None,
    );
    assert_eq!(out.code, 0, "{}", out.stderr);
    let line = out
        .stdout
        .lines()
        .find(|l| l.contains("scaling.method"))
        .expect("a scaling line");
    assert!(line.contains("unit-variance → pareto"), "{line}");
    assert!(
        out.stdout.contains("Features whose loadings moved most"),
        "{}",
        out.stdout
    );
    let md = sextant(
        ws.path(),
        &[
            "diff",
            "--format",
            "markdown",
            "results/dairy-march",
            "results/variant",
        ],
    );
    assert!(md.stdout.starts_with("### sextant diff"), "{}", md.stdout);
    assert!(
        md.stdout
            .contains("| `scaling.method` | unit-variance | pareto |"),
        "{}",
        md.stdout
    );
}

#[test]
fn diff_after_a_change_of_one_cell() {
    let ws = workspace();
    let out = two_runs(
        ws.path(),
        "",
        "",
        Some((
            "M-0001,Alder Hill,summer,2025-06-02,4.16",
            "M-0001,Alder Hill,summer,2025-06-02,5.16",
        )),
    );
    assert_eq!(out.code, 0, "{}", out.stderr);
    let inputs = out
        .stdout
        .split("Inputs whose content changed")
        .nth(1)
        .unwrap();
    let inputs = inputs.split("Components").next().unwrap();
    assert!(
        inputs.contains("input 1") && inputs.contains("variant.csv"),
        "{}",
        out.stdout
    );
    assert!(
        out.stdout.contains("of row `M-0001`"),
        "the changed sample moves most:\n{}",
        out.stdout
    );
}

#[test]
fn diff_after_a_change_of_keep() {
    let ws = workspace();
    let out = two_runs(ws.path(), "keep = \"broken-stick\"", "keep = 4", None);
    assert_eq!(out.code, 0, "{}", out.stderr);
    assert!(
        out.stdout.contains("2 (broken-stick) → 4 (count)"),
        "{}",
        out.stdout
    );
    let line = out
        .stdout
        .lines()
        .find(|l| l.contains("components.keep"))
        .expect("a keep line");
    assert!(line.contains("broken-stick → 4"), "{line}");
    // The two kept components are shared: their angles are 0, the other two 90°.
    assert!(
        out.stdout
            .contains("principal angles on 17 shared features: "),
        "{}",
        out.stdout
    );
}

#[test]
fn diff_accepts_recipes_and_writes_nothing() {
    let ws = workspace();
    let out = sextant(
        ws.path(),
        &[
            "diff",
            "recipes/dairy-march.toml",
            "recipes/dairy-march-pareto.toml",
        ],
    );
    assert_eq!(out.code, 0, "{}", out.stderr);
    assert!(out.stdout.contains("scaling.method"), "{}", out.stdout);
    assert!(
        !ws.path().join("results").exists(),
        "diff of recipes must not write results"
    );
}

#[test]
fn explain_spells_out_every_default() {
    let ws = workspace();
    let out = sextant(
        ws.path(),
        &["explain", "recipes/dairy-march-composition.toml"],
    );
    assert_eq!(out.code, 0, "{}", out.stderr);
    let text = out.stdout;
    assert!(
        text.contains(" 1. Read the table `../demo-data/dairy-lab-2026-03.csv`"),
        "{text}"
    );
    assert!(
        text.contains("Drop every feature with more than 30 % of its cells missing"),
        "{text}"
    );
    assert!(
        text.contains("Then drop every row that still has a missing cell"),
        "{text}"
    );
    assert!(text.contains("Transform no feature."), "{text}");
    assert!(
        text.contains("A feature with no spread stops the run."),
        "{text}"
    );
    assert!(text.contains("Report 10 components"), "{text}");
    assert!(text.contains("reaches 90 %"), "{text}");
}

#[test]
fn pin_keeps_comments_and_makes_runs_refuse_a_changed_table() {
    let ws = workspace();
    let recipe = ws.path().join("recipes/dairy-march.toml");
    let before = fs::read_to_string(&recipe).unwrap();
    let out = sextant(ws.path(), &["pin", "recipes/dairy-march.toml"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    let after = fs::read_to_string(&recipe).unwrap();
    let hash = sextant::outputs::hashing::sha256_hex(
        &fs::read(ws.path().join("demo-data/dairy-lab-2026-03.csv")).unwrap(),
    );
    assert!(after.contains(&format!("sha256 = \"{hash}\"")), "{after}");
    // Every original line is still there, comments included.
    for line in before.lines() {
        assert!(after.contains(line), "lost line {line:?}");
    }
    assert_eq!(
        sextant(ws.path(), &["check", "recipes/dairy-march.toml"]).code,
        0
    );

    edit(
        &ws.path().join("demo-data/dairy-lab-2026-03.csv"),
        "4.16",
        "4.15",
    );
    let out = sextant(ws.path(), &["run", "recipes/dairy-march.toml"]);
    assert_eq!(out.code, 2);
    assert!(
        out.stderr.contains(&hash) && out.stderr.contains("input.sha256 pins"),
        "{}",
        out.stderr
    );
    assert!(!ws.path().join("results").exists());
}
