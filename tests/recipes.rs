//! Every shipped recipe is a test: it passes `check`, it runs, and a rerun gives
//! identical bytes (the manifest's `run` block aside).

use std::fs;
use std::path::{Path, PathBuf};
use std::process::Command;

const BIN: &str = env!("CARGO_BIN_EXE_sextant");

fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// Copies recipes/ and demo-data/ into a fresh folder, so results land there.
fn workspace() -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    for sub in ["recipes", "demo-data"] {
        fs::create_dir(dir.path().join(sub)).unwrap();
        for entry in fs::read_dir(repo().join(sub)).unwrap() {
            let path = entry.unwrap().path();
            fs::copy(&path, dir.path().join(sub).join(path.file_name().unwrap())).unwrap();
        }
    }
    dir
}

fn recipes(root: &Path) -> Vec<PathBuf> {
    let mut list: Vec<PathBuf> = fs::read_dir(root.join("recipes"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "toml"))
        .collect();
    list.sort();
    assert!(
        list.len() >= 2,
        "recipes/ should hold the demo and at least one more recipe"
    );
    list
}

fn sextant(args: &[&str], cwd: &Path) -> (i32, String, String) {
    let out = Command::new(BIN)
        .args(args)
        .current_dir(cwd)
        .output()
        .unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

fn results_folder(recipe: &Path) -> PathBuf {
    let text = fs::read_to_string(recipe).unwrap();
    let value: toml::Value = toml::from_str(&text).unwrap();
    let folder = value["output"]["folder"].as_str().unwrap();
    recipe.parent().unwrap().join(folder)
}

/// The folder's files as (relative path, bytes), sorted, with the manifest's
/// `run` block removed.
fn snapshot(folder: &Path) -> Vec<(String, Vec<u8>)> {
    let mut files = Vec::new();
    let mut pending = vec![folder.to_path_buf()];
    while let Some(dir) = pending.pop() {
        for entry in fs::read_dir(&dir).unwrap() {
            let path = entry.unwrap().path();
            if path.is_dir() {
                pending.push(path);
                continue;
            }
            let name = path
                .strip_prefix(folder)
                .unwrap()
                .to_string_lossy()
                .replace('\\', "/");
            let mut bytes = fs::read(&path).unwrap();
            if name == "manifest.json" {
                let mut v: serde_json::Value = serde_json::from_slice(&bytes).unwrap();
                v.as_object_mut()
                    .unwrap()
                    .remove("run")
                    .expect("a run block");
                bytes = serde_json::to_vec_pretty(&v).unwrap();
            }
            files.push((name, bytes));
        }
    }
    files.sort();
    files
}

#[test]
fn every_recipe_checks_runs_and_reruns_identically() {
    let ws = workspace();
    for recipe in recipes(ws.path()) {
        let r = recipe.to_str().unwrap();
        let (code, out, err) = sextant(&["check", r], ws.path());
        assert_eq!(code, 0, "check {r} failed: {err}");
        assert!(out.contains("valid"), "check output for {r}: {out}");

        let (code, out, err) = sextant(&["run", r], ws.path());
        assert_eq!(code, 0, "run {r} failed: {err}");
        assert!(out.contains("digest"), "run output for {r}: {out}");
        let folder = results_folder(&recipe);
        let first = snapshot(&folder);
        let names: Vec<&str> = first.iter().map(|(n, _)| n.as_str()).collect();
        for required in [
            "contributions.csv",
            "loadings.csv",
            "manifest.json",
            "preprocessing.csv",
            "report.html",
            "scores.csv",
            "variance.csv",
        ] {
            assert!(
                names.contains(&required),
                "{r} did not write {required}: {names:?}"
            );
        }
        // Every file in the folder is listed, with its hash, in the manifest.
        let manifest: serde_json::Value =
            serde_json::from_slice(&fs::read(folder.join("manifest.json")).unwrap()).unwrap();
        let mut listed: Vec<&str> = manifest["outputs"]
            .as_array()
            .unwrap()
            .iter()
            .map(|o| o["path"].as_str().unwrap())
            .collect();
        listed.push("manifest.json");
        listed.sort();
        assert_eq!(
            names, listed,
            "files written by {r} against the manifest's list"
        );

        let (code, _, err) = sextant(&["run", r], ws.path());
        assert_eq!(code, 0, "second run of {r} failed: {err}");
        let second = snapshot(&folder);
        for ((name, a), (_, b)) in first.iter().zip(&second) {
            assert!(a == b, "{name} differs between two runs of {r}");
        }
    }
}

#[test]
fn manifest_hashes_every_output_and_input() {
    let ws = workspace();
    let recipe = ws.path().join("recipes/dairy-march.toml");
    let (code, _, err) = sextant(&["run", recipe.to_str().unwrap()], ws.path());
    assert_eq!(code, 0, "{err}");
    let folder = results_folder(&recipe);
    let manifest: serde_json::Value =
        serde_json::from_slice(&fs::read(folder.join("manifest.json")).unwrap()).unwrap();

    for output in manifest["outputs"].as_array().unwrap() {
        let bytes = fs::read(folder.join(output["path"].as_str().unwrap())).unwrap();
        assert_eq!(output["bytes"].as_u64().unwrap(), bytes.len() as u64);
        assert_eq!(output["sha256"].as_str().unwrap(), sha256(&bytes));
    }
    let input = &manifest["inputs"][0];
    let data = fs::read(ws.path().join("demo-data/dairy-lab-2026-03.csv")).unwrap();
    assert_eq!(input["sha256"].as_str().unwrap(), sha256(&data));
    assert_eq!(input["rows"], 400);
    assert_eq!(input["path"], "../demo-data/dairy-lab-2026-03.csv");
    assert_eq!(manifest["recipe"]["path"], "../../recipes/dairy-march.toml");
    assert_eq!(
        manifest["recipe"]["sha256"].as_str().unwrap(),
        sha256(&fs::read(&recipe).unwrap())
    );

    // The digest covers everything but `digest` and `run`.
    let mut body = manifest.clone();
    let map = body.as_object_mut().unwrap();
    let digest = map.remove("digest").unwrap();
    map.remove("run");
    assert_eq!(
        digest.as_str().unwrap(),
        sha256(&serde_json::to_vec(&body).unwrap())
    );

    // Defaults the recipe left out are written down.
    let resolved = &manifest["recipe"]["resolved"];
    assert_eq!(resolved["scaling"]["constant_features"], "error");
    assert_eq!(resolved["input"]["delimiter"], ",");
    assert_eq!(manifest["steps"]["decomposition"]["divisor"], "n - 1");

    // No absolute path of this machine in any hashed file.
    let root = ws.path().to_string_lossy().into_owned();
    for (name, bytes) in snapshot(&folder) {
        let text = String::from_utf8_lossy(&bytes);
        assert!(!text.contains(&root), "an absolute path leaked into {name}");
    }
}

fn sha256(bytes: &[u8]) -> String {
    sextant::outputs::hashing::sha256_hex(bytes)
}

#[test]
fn demo_results_match_the_summary() {
    // The demo's k and share, as printed in the README; update both together.
    let ws = workspace();
    let recipe = ws.path().join("recipes/dairy-march.toml");
    let (code, out, err) = sextant(&["run", recipe.to_str().unwrap()], ws.path());
    assert_eq!(code, 0, "{err}");
    assert!(
        out.contains("components 2 kept of 10 computed, 57.1 % of the variance (broken-stick"),
        "{out}"
    );
    let scores = fs::read_to_string(results_folder(&recipe).join("scores.csv")).unwrap();
    assert_eq!(scores.lines().count(), 401);
    assert!(scores.starts_with(
        "row,sample,farm,season,PC1,PC2,T2,SPE,T2_above_95,SPE_above_95,T2_above_99,SPE_above_99\n"
    ));
}

/// The recipe printed in README.md ("The recipe", the demo shortened) is run as
/// written: it must stay a valid recipe, and since it only leaves out figures,
/// notes and comments, its tables must equal those of recipes/dairy-march.toml.
#[test]
fn the_readme_recipe_runs_and_matches_the_demo() {
    let readme = fs::read_to_string(repo().join("README.md")).unwrap();
    let start = readme
        .find("```toml\n")
        .expect("README.md shows a recipe in a ```toml block");
    let body = &readme[start + "```toml\n".len()..];
    let text = &body[..body.find("```").expect("the block is closed")];
    assert!(
        text.contains("[output]"),
        "the README block is a whole recipe"
    );

    let ws = workspace();
    let dir = ws.path();
    let readme_recipe = dir.join("recipes/readme-example.toml");
    fs::write(
        &readme_recipe,
        text.replace("results/dairy-march", "results/readme"),
    )
    .unwrap();
    let (code, _, stderr) = sextant(&["run", "recipes/readme-example.toml"], dir);
    assert_eq!(code, 0, "the README's recipe fails:\n{stderr}");
    let (code, _, stderr) = sextant(&["run", "recipes/dairy-march.toml"], dir);
    assert_eq!(code, 0, "{stderr}");
    for table in [
        "scores.csv",
        "loadings.csv",
        "variance.csv",
        "preprocessing.csv",
    ] {
        let shown = fs::read(dir.join("results/readme").join(table)).unwrap();
        let demo = fs::read(dir.join("results/dairy-march").join(table)).unwrap();
        assert!(
            shown == demo,
            "{table} of the README's recipe differs from the demo recipe's: update one or the other"
        );
    }
}
