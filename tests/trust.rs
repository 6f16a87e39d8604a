//! Regression tests of trust: a complete table through every fill method, links
//! that would let a replacement delete an input, and `pin` changing nothing but
//! the pin. Each runs the real binary in a temporary folder.
//!
//! The complete table is Fisher's iris measurements (tests/data/SOURCES.md).

#[allow(dead_code)] // not every shared helper is used here
mod common;

use common::sextant;
use serde_json::Value;
use std::fs;
use std::path::{Path, PathBuf};

const IRIS: &str = include_str!("data/iris.csv");

/// A folder with data/iris.csv and a recipe `r.toml` whose results go to
/// `out`, with `extra` added to the recipe.
fn iris_workspace(method: &str, extra: &str) -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    fs::create_dir(dir.path().join("data")).unwrap();
    fs::write(dir.path().join("data/iris.csv"), IRIS).unwrap();
    fs::write(
        dir.path().join("r.toml"),
        format!(
            "format = 1\n[input]\nfile = \"data/iris.csv\"\ngroups = [\"class\"]\n[missing]\nmethod = \"{method}\"\n{extra}[output]\nfolder = \"out\"\n"
        ),
    )
    .unwrap();
    dir
}

fn json(path: &Path) -> Value {
    serde_json::from_slice(&fs::read(path).unwrap()).unwrap()
}

/// Every file name under `dir` (recursively), sorted.
fn listing(dir: &Path) -> Vec<String> {
    let mut out = Vec::new();
    for entry in fs::read_dir(dir).unwrap() {
        let entry = entry.unwrap();
        let name = entry.file_name().to_string_lossy().into_owned();
        if entry.file_type().unwrap().is_dir() {
            out.extend(
                listing(&entry.path())
                    .into_iter()
                    .map(|n| format!("{name}/{n}")),
            );
        } else {
            out.push(name);
        }
    }
    out.sort();
    out
}

// 1. A complete table through every fill method.

/// `method = "iterative-pca"` on a table without missing cells panicked in the
/// model writer (the imputation model was left empty); every method must fill
/// nothing, say so, and leave a model that can fill new rows.
#[test]
fn a_complete_table_runs_through_every_fill_method() {
    for method in ["mean", "median", "knn", "iterative-pca", "drop-rows"] {
        let ws = iris_workspace(method, "");
        let check = sextant(ws.path(), &["check", "r.toml"]);
        assert_eq!(check.code, 0, "{method}: {}", check.stderr);
        let out = sextant(ws.path(), &["run", "r.toml"]);
        assert_eq!(out.code, 0, "{method}: {}", out.stderr);
        assert!(!out.stderr.contains("panicked"), "{}", out.stderr);
        let said = if method == "drop-rows" {
            "0 rows with a missing cell dropped, 150 rows left"
        } else {
            "none in the used features, so nothing was filled"
        };
        assert!(out.stdout.contains(said), "{method}: {}", out.stdout);
        let report = fs::read_to_string(ws.path().join("out/report.html")).unwrap();
        let sentence = if method == "drop-rows" {
            "No row had a missing cell in the used features"
        } else {
            "The used features had no missing cells, so nothing was filled."
        };
        assert!(
            report.contains(sentence),
            "{method}: the report must say so"
        );
        assert_eq!(
            fs::read_to_string(ws.path().join("out/imputed.csv"))
                .unwrap()
                .lines()
                .count(),
            1,
            "{method}: imputed.csv holds its header only"
        );
    }
}

/// On a complete table the iterative PCA model is the PCA of the table itself:
/// its loadings are the analysis' own (up to sign), and `apply` fills the
/// missing cells of new rows from it.
#[test]
fn a_complete_table_still_gives_an_iterative_model_for_new_rows() {
    let ws = iris_workspace(
        "iterative-pca",
        "[missing.iterative_pca]\ncomponents = 2\n[components]\nkeep = 2\n",
    );
    let out = sextant(ws.path(), &["run", "r.toml"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    let model = json(&ws.path().join("out/model.json"));
    let fill = &model["fill"]["model"]["loadings"];
    let analysis = &model["loadings"];
    assert_eq!(fill.as_array().unwrap().len(), 4, "one row per feature");
    for j in 0..4 {
        for a in 0..2 {
            let (x, y) = (
                fill[j][a].as_f64().unwrap(),
                analysis[j][a].as_f64().unwrap(),
            );
            assert!(
                (x.abs() - y.abs()).abs() < 1e-12,
                "loading {j},{a}: {x} against {y}"
            );
        }
    }
    fs::write(
        ws.path().join("data/new.csv"),
        "sepal_length,sepal_width,petal_length,petal_width,class\n5.0,,1.5,0.2,setosa\n6.5,3.0,,,virginica\n",
    )
    .unwrap();
    let applied = sextant(ws.path(), &["apply", "out", "data/new.csv"]);
    assert_eq!(applied.code, 0, "{}", applied.stderr);
    assert!(
        applied
            .stdout
            .contains("filled     3 missing cells from the training model"),
        "{}",
        applied.stdout
    );
}

// 2. Links that resolve inside the results folder.

/// The demo with its results already made once.
fn demo_with_results() -> (tempfile::TempDir, PathBuf) {
    let ws = common::workspace();
    let out = sextant(ws.path(), &["run", "recipes/dairy-march.toml"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    let results = ws.path().join("results/dairy-march");
    (ws, results)
}

/// Asserts a refusal with exit 2 naming `fragment`, and that no lock, staging
/// folder or scratch file was left beside the results.
fn assert_refused(out: &common::Out, fragment: &str, beside: &Path) {
    assert_eq!(
        out.code, 2,
        "stdout: {}\nstderr: {}",
        out.stdout, out.stderr
    );
    assert!(out.stderr.contains(fragment), "{}", out.stderr);
    let debris: Vec<String> = fs::read_dir(beside)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.contains(".sextant-new") || n.contains(".sextant-scratch"))
        .collect();
    assert!(debris.is_empty(), "left behind: {debris:?}");
}

/// The input table reached through a link whose target is inside the results
/// folder: the old check compared the written paths only, and `run --replace`
/// deleted the table.
#[cfg(unix)]
#[test]
fn an_input_linked_into_the_results_folder_is_never_deleted() {
    let (ws, results) = demo_with_results();
    let data = ws.path().join("demo-data/dairy-lab-2026-03.csv");
    fs::rename(&data, results.join("kept-here.csv")).unwrap();
    std::os::unix::fs::symlink(results.join("kept-here.csv"), &data).unwrap();
    let before = listing(&results);
    let out = sextant(ws.path(), &["run", "recipes/dairy-march.toml", "--replace"]);
    assert_refused(
        &out,
        "would contain the input table",
        &ws.path().join("results"),
    );
    assert!(
        results.join("kept-here.csv").exists(),
        "the table is still there"
    );
    assert_eq!(listing(&results), before, "the folder is untouched");
}

/// The recipe reached through a link into the results folder.
#[cfg(unix)]
#[test]
fn a_recipe_linked_into_the_results_folder_is_never_deleted() {
    let (ws, results) = demo_with_results();
    let recipe = ws.path().join("recipes/dairy-march.toml");
    // Paths are relative to the recipe as named (the link, in the top folder).
    let text = fs::read_to_string(&recipe)
        .unwrap()
        .replace("../demo-data/", "demo-data/")
        .replace("folder = \"../results/", "folder = \"results/");
    fs::write(results.join("recipe.toml"), text).unwrap();
    std::os::unix::fs::symlink(results.join("recipe.toml"), ws.path().join("linked.toml")).unwrap();
    let out = sextant(ws.path(), &["run", "linked.toml", "--replace"]);
    assert_eq!(out.code, 2, "{}", out.stderr);
    assert!(out.stderr.contains("would contain"), "{}", out.stderr);
    assert!(results.join("recipe.toml").exists());
}

/// An output folder that is a link to the folder holding the input.
#[cfg(unix)]
#[test]
fn an_output_folder_linked_to_the_data_folder_is_refused() {
    let ws = common::workspace();
    std::os::unix::fs::symlink(ws.path().join("demo-data"), ws.path().join("alias")).unwrap();
    let recipe = ws.path().join("recipes/dairy-march.toml");
    let text = fs::read_to_string(&recipe).unwrap().replace(
        "folder = \"../results/dairy-march\"",
        "folder = \"../alias\"",
    );
    fs::write(&recipe, text).unwrap();
    let before = listing(&ws.path().join("demo-data"));
    let out = sextant(ws.path(), &["run", "recipes/dairy-march.toml", "--replace"]);
    assert_refused(&out, "would contain the input table", ws.path());
    assert_eq!(listing(&ws.path().join("demo-data")), before);
}

/// `apply --out` through a link to the results folder it reads, or to the
/// table's folder, is refused before anything is read or written.
#[cfg(unix)]
#[test]
fn apply_refuses_an_output_linked_to_what_it_reads() {
    let (ws, results) = demo_with_results();
    std::os::unix::fs::symlink(&results, ws.path().join("same-results")).unwrap();
    std::os::unix::fs::symlink(ws.path().join("demo-data"), ws.path().join("data-alias")).unwrap();
    let before = listing(&results);
    for (out_folder, what) in [
        ("same-results", "the results folder"),
        ("data-alias", "the table"),
        ("results/dairy-march/inside", "the results folder"),
    ] {
        let out = sextant(
            ws.path(),
            &[
                "apply",
                "results/dairy-march",
                "demo-data/dairy-lab-2026-04.csv",
                "--out",
                out_folder,
                "--replace",
            ],
        );
        assert_refused(&out, what, ws.path());
        assert!(out.stderr.contains("links followed"), "{}", out.stderr);
    }
    assert_eq!(listing(&results), before, "the results are untouched");
    assert!(ws.path().join("demo-data/dairy-lab-2026-04.csv").exists());
}

// 9. `pin` changes nothing but the pin.

#[cfg(unix)]
fn mode(path: &Path) -> u32 {
    use std::os::unix::fs::PermissionsExt;
    fs::metadata(path).unwrap().permissions().mode() & 0o7777
}

/// `pin` made the recipe mode 0600 (the temporary file's mode).
#[cfg(unix)]
#[test]
fn pin_keeps_the_recipe_mode() {
    use std::os::unix::fs::PermissionsExt;
    let ws = common::workspace();
    let recipe = ws.path().join("recipes/dairy-march.toml");
    fs::set_permissions(&recipe, fs::Permissions::from_mode(0o664)).unwrap();
    let out = sextant(ws.path(), &["pin", "recipes/dairy-march.toml"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    assert!(fs::read_to_string(&recipe).unwrap().contains("sha256 = "));
    assert_eq!(mode(&recipe), 0o664);
}

/// `pin` replaced a linked recipe by a regular file, cutting the link.
#[cfg(unix)]
#[test]
fn pin_writes_through_a_link_to_its_target() {
    let ws = common::workspace();
    let recipe = ws.path().join("recipes/dairy-march.toml");
    let link = ws.path().join("recipes/current.toml");
    std::os::unix::fs::symlink("dairy-march.toml", &link).unwrap();
    let out = sextant(ws.path(), &["pin", "recipes/current.toml"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    assert!(
        fs::symlink_metadata(&link)
            .unwrap()
            .file_type()
            .is_symlink()
    );
    assert_eq!(fs::read_link(&link).unwrap(), Path::new("dairy-march.toml"));
    assert!(fs::read_to_string(&recipe).unwrap().contains("sha256 = "));
}

/// `pin` wrote through a read-only recipe (a rename needs only the folder's
/// permission); it must refuse with exit 2 and leave the file as it was.
#[cfg(unix)]
#[test]
fn pin_refuses_a_read_only_recipe() {
    use std::os::unix::fs::PermissionsExt;
    let ws = common::workspace();
    let recipe = ws.path().join("recipes/dairy-march.toml");
    let before = fs::read(&recipe).unwrap();
    fs::set_permissions(&recipe, fs::Permissions::from_mode(0o444)).unwrap();
    let out = sextant(ws.path(), &["pin", "recipes/dairy-march.toml"]);
    assert_eq!(out.code, 2, "{}", out.stderr);
    assert!(out.stderr.contains("read-only"), "{}", out.stderr);
    assert_eq!(fs::read(&recipe).unwrap(), before);
    assert_eq!(mode(&recipe), 0o444);
}

/// A recipe or table named `/dev/zero` was read until memory ran out, and a
/// named pipe blocked forever; both are refused as not regular files.
#[cfg(unix)]
#[test]
fn devices_pipes_and_folders_are_not_read_as_files() {
    let ws = iris_workspace("mean", "");
    let fifo = ws.path().join("data/pipe.csv");
    assert!(
        std::process::Command::new("mkfifo")
            .arg(&fifo)
            .status()
            .unwrap()
            .success()
    );
    let recipe = fs::read_to_string(ws.path().join("r.toml")).unwrap();
    for (file, kind) in [
        ("/dev/zero", "a device, pipe or socket"),
        ("data/pipe.csv", "a device, pipe or socket"),
        ("data", "a folder"),
    ] {
        fs::write(
            ws.path().join("odd.toml"),
            recipe.replace("data/iris.csv", file),
        )
        .unwrap();
        for command in ["check", "run", "pin"] {
            let out = sextant(ws.path(), &[command, "odd.toml"]);
            assert_eq!(out.code, 2, "{command} {file}: {}", out.stderr);
            assert!(
                out.stderr.contains(&format!("{kind}, not a regular file")),
                "{}",
                out.stderr
            );
        }
    }
    let out = sextant(ws.path(), &["check", "/dev/zero"]);
    assert_eq!(out.code, 2, "{}", out.stderr);
    assert!(
        out.stderr.contains("cannot read the recipe"),
        "{}",
        out.stderr
    );
    assert!(!ws.path().join("out").exists());
}
