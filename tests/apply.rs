//! Scoring new rows with a saved model (`sextant apply`), run as the real binary
//! on temporary copies of the demo.

use std::collections::BTreeMap;
use std::fs;
use std::path::{Path, PathBuf};

mod common;
use common::{sextant, workspace};

/// Runs a recipe (the demo unless another is given) and returns its results folder.
fn analysed(ws: &Path, recipe: &str) -> PathBuf {
    let out = sextant(ws, &["run", recipe]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    let text = fs::read_to_string(ws.join(recipe)).unwrap();
    let folder = text
        .lines()
        .find_map(|l| l.strip_prefix("folder = \"../"))
        .unwrap()
        .trim_end_matches('"');
    ws.join(folder)
}

/// scores.csv as rows of cells.
fn table(path: &Path) -> Vec<Vec<String>> {
    fs::read_to_string(path)
        .unwrap()
        .lines()
        .map(|l| l.split(',').map(String::from).collect())
        .collect()
}

#[test]
fn the_training_table_scores_bit_for_bit_as_in_the_analysis() {
    let ws = workspace();
    let results = analysed(ws.path(), "recipes/dairy-march.toml");
    let out = sextant(
        ws.path(),
        &[
            "apply",
            "results/dairy-march",
            "demo-data/dairy-lab-2026-03.csv",
            "--out",
            "again",
        ],
    );
    assert_eq!(out.code, 0, "{}", out.stderr);
    let (a, b) = (
        table(&results.join("scores.csv")),
        table(&ws.path().join("again/scores.csv")),
    );
    assert_eq!(a.len(), b.len());
    let spe = a[0].iter().position(|h| h == "SPE").unwrap();
    for (x, y) in a.iter().zip(&b) {
        assert_eq!(
            x[..=spe],
            y[..=spe],
            "scores, T² and SPE must be the same text"
        );
    }
    // Flags use the new-row limits saved in the model (the F form), not the
    // analysis' own limits, so they may differ; they must follow that limit.
    let model: serde_json::Value =
        serde_json::from_slice(&fs::read(results.join("model.json")).unwrap()).unwrap();
    let limit = model["limits"][0]["t2_new_rows"].as_f64().unwrap();
    let t2 = a[0].iter().position(|h| h == "T2").unwrap();
    for row in &b[1..] {
        let above = row[t2].parse::<f64>().unwrap() > limit;
        assert_eq!(row[spe + 1], if above { "yes" } else { "no" });
    }
}

#[test]
fn shuffled_rows_and_reordered_columns_give_the_same_scores_by_id() {
    let ws = workspace();
    analysed(ws.path(), "recipes/dairy-march.toml");
    let original = table(&ws.path().join("demo-data/dairy-lab-2026-04.csv"));
    // Reverse the rows and rotate the columns.
    let width = original[0].len();
    let rotate = |r: &Vec<String>| {
        (0..width)
            .map(|j| r[(j + 5) % width].clone())
            .collect::<Vec<_>>()
            .join(",")
    };
    let mut lines = vec![rotate(&original[0])];
    lines.extend(original[1..].iter().rev().map(rotate));
    fs::write(
        ws.path().join("demo-data/shuffled.csv"),
        lines.join("\n") + "\n",
    )
    .unwrap();

    let a = sextant(
        ws.path(),
        &[
            "apply",
            "results/dairy-march",
            "demo-data/dairy-lab-2026-04.csv",
            "--out",
            "a",
        ],
    );
    let b = sextant(
        ws.path(),
        &[
            "apply",
            "results/dairy-march",
            "demo-data/shuffled.csv",
            "--out",
            "b",
        ],
    );
    assert_eq!((a.code, b.code), (0, 0), "{}{}", a.stderr, b.stderr);
    let by_id = |p: &str| -> BTreeMap<String, Vec<String>> {
        let t = table(&ws.path().join(p).join("scores.csv"));
        let id = t[0].iter().position(|h| h == "sample").unwrap();
        t[1..]
            .iter()
            .map(|r| (r[id].clone(), r[id + 3..].to_vec()))
            .collect()
    };
    let (x, y) = (by_id("a"), by_id("b"));
    assert_eq!(x.len(), 60);
    assert_eq!(x, y);
}

#[test]
fn the_second_batch_flags_its_watered_samples() {
    // demo-data/README.md: M-0427 and M-0451 in the April batch are watered.
    let ws = workspace();
    analysed(ws.path(), "recipes/dairy-march.toml");
    let out = sextant(
        ws.path(),
        &[
            "apply",
            "results/dairy-march",
            "demo-data/dairy-lab-2026-04.csv",
        ],
    );
    assert_eq!(out.code, 0, "{}", out.stderr);
    assert!(out.stdout.contains("60 rows, 60 scored"), "{}", out.stdout);
    assert!(
        out.stdout
            .contains("ignored columns that are not in the model: collected, citrate_mg_dl"),
        "{}",
        out.stdout
    );
    let folder = ws
        .path()
        .join("results/dairy-march-apply-dairy-lab-2026-04");
    let t = table(&folder.join("scores.csv"));
    let spe_flag = t[0].iter().position(|h| h == "SPE_above_95").unwrap();
    for id in ["M-0427", "M-0451"] {
        let row = t.iter().find(|r| r[1] == id).unwrap();
        assert_eq!(
            row[spe_flag], "yes",
            "{id} should be above the SPE limit: {row:?}"
        );
    }
    let contributions = fs::read_to_string(folder.join("contributions.csv")).unwrap();
    assert!(contributions.contains("M-0427"));
    // The manifest ties the scores to the model that made them.
    let manifest: serde_json::Value =
        serde_json::from_slice(&fs::read(folder.join("manifest.json")).unwrap()).unwrap();
    let model = fs::read(ws.path().join("results/dairy-march/model.json")).unwrap();
    assert_eq!(
        manifest["model"]["sha256"],
        sextant::outputs::hashing::sha256_hex(&model)
    );
    assert_eq!(
        sextant(
            ws.path(),
            &["verify", "results/dairy-march-apply-dairy-lab-2026-04"]
        )
        .code,
        0
    );
}

#[test]
fn a_missing_feature_is_an_error_and_nothing_is_written() {
    let ws = workspace();
    analysed(ws.path(), "recipes/dairy-march.toml");
    let text = fs::read_to_string(ws.path().join("demo-data/dairy-lab-2026-04.csv")).unwrap();
    let t: Vec<Vec<&str>> = text.lines().map(|l| l.split(',').collect()).collect();
    let drop = t[0].iter().position(|h| *h == "ph").unwrap();
    let without: Vec<String> = t
        .iter()
        .map(|r| {
            r.iter()
                .enumerate()
                .filter(|(j, _)| *j != drop)
                .map(|(_, c)| *c)
                .collect::<Vec<_>>()
                .join(",")
        })
        .collect();
    fs::write(
        ws.path().join("demo-data/no-ph.csv"),
        without.join("\n") + "\n",
    )
    .unwrap();
    let out = sextant(
        ws.path(),
        &[
            "apply",
            "results/dairy-march",
            "demo-data/no-ph.csv",
            "--out",
            "x",
        ],
    );
    assert_eq!(out.code, 2);
    assert!(
        out.stderr.contains("feature(s) ph are not in the table"),
        "{}",
        out.stderr
    );
    assert!(!ws.path().join("x").exists());
}

#[test]
fn a_feature_in_another_unit_is_reported() {
    let ws = workspace();
    analysed(ws.path(), "recipes/dairy-march.toml");
    // Density in g/l instead of kg/m³ is the same number; conductivity in µS/cm
    // instead of mS/cm is 1000 times larger.
    let text = fs::read_to_string(ws.path().join("demo-data/dairy-lab-2026-04.csv")).unwrap();
    let mut t: Vec<Vec<String>> = text
        .lines()
        .map(|l| l.split(',').map(String::from).collect())
        .collect();
    let j = t[0].iter().position(|h| h == "conductivity_ms_cm").unwrap();
    for row in t.iter_mut().skip(1) {
        if let Ok(v) = row[j].parse::<f64>() {
            row[j] = format!("{}", v * 1000.0);
        }
    }
    let lines: Vec<String> = t.iter().map(|r| r.join(",")).collect();
    fs::write(
        ws.path().join("demo-data/units.csv"),
        lines.join("\n") + "\n",
    )
    .unwrap();
    let out = sextant(
        ws.path(),
        &[
            "apply",
            "results/dairy-march",
            "demo-data/units.csv",
            "--out",
            "u",
        ],
    );
    assert_eq!(out.code, 0, "{}", out.stderr);
    assert!(
        out.stdout.contains("`conductivity_ms_cm`: ") && out.stdout.contains("another unit?"),
        "{}",
        out.stdout
    );
}

#[test]
fn a_changed_model_is_refused() {
    let ws = workspace();
    let results = analysed(ws.path(), "recipes/dairy-march.toml");
    let model = results.join("model.json");
    let text = fs::read_to_string(&model).unwrap();
    fs::write(&model, text.replacen("\"kept\": 2", "\"kept\": 1", 1)).unwrap();
    let out = sextant(
        ws.path(),
        &[
            "apply",
            "results/dairy-march",
            "demo-data/dairy-lab-2026-04.csv",
            "--out",
            "y",
        ],
    );
    assert_eq!(out.code, 2);
    assert!(
        out.stderr.contains("model.json does not match"),
        "{}",
        out.stderr
    );
    assert!(!ws.path().join("y").exists());
}

#[test]
fn model_based_fills_are_used_for_new_rows() {
    let ws = workspace();
    for (method, extra) in [("iterative-pca", ""), ("knn", "")] {
        let recipe = fs::read_to_string(ws.path().join("recipes/dairy-march.toml"))
            .unwrap()
            .replace(
                "method = \"mean\"",
                &format!("method = \"{method}\"{extra}"),
            )
            .replace("results/dairy-march\"", &format!("results/{method}\""));
        fs::write(ws.path().join(format!("recipes/{method}.toml")), recipe).unwrap();
        analysed(ws.path(), &format!("recipes/{method}.toml"));
        let out = sextant(
            ws.path(),
            &[
                "apply",
                &format!("results/{method}"),
                "demo-data/dairy-lab-2026-04.csv",
                "--out",
                method,
            ],
        );
        assert_eq!(out.code, 0, "{method}: {}", out.stderr);
        assert!(
            out.stdout
                .contains("filled     19 missing cells from the training model"),
            "{}",
            out.stdout
        );
        let imputed = table(&ws.path().join(method).join("imputed.csv"));
        assert_eq!(imputed.len(), 20);
        // Filled values are numbers in their feature's plausible range (the
        // log-scaled counts are filled on the log scale: the transformed value).
        let at = imputed[0]
            .iter()
            .position(|c| c == "transformed_value")
            .unwrap();
        for row in &imputed[1..] {
            let v: f64 = row[at].parse().unwrap();
            assert!(
                v.is_finite() && v > -10.0 && v < 2000.0,
                "{method}: {row:?}"
            );
        }
    }
}
