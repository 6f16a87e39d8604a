//! What `run`, `apply`, `verify` and `diff` do with a results folder they
//! cannot trust: a hand-written manifest, a file the manifest does not name, a
//! tampered model whose manifest was re-hashed to match, a manifest naming
//! system files, fifos and devices, malformed result tables. Run as the real
//! binary on temporary copies of the demo.

use serde_json::Value;
use std::fs;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

mod common;
use common::{BIN, Out, sextant, workspace};

/// Runs a recipe of the workspace and returns its results folder.
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

/// A copy of the demo recipe with another missing-value method and folder.
fn recipe_with_fill(ws: &Path, method: &str) -> String {
    let recipe = fs::read_to_string(ws.join("recipes/dairy-march.toml"))
        .unwrap()
        .replace("method = \"mean\"", &format!("method = \"{method}\""))
        .replace("results/dairy-march\"", &format!("results/{method}\""));
    let name = format!("recipes/{method}.toml");
    fs::write(ws.join(&name), recipe).unwrap();
    name
}

fn read_json(path: &Path) -> Value {
    serde_json::from_slice(&fs::read(path).unwrap()).unwrap()
}

/// The manifest's digest, computed as sextant documents it: the SHA-256 of the
/// compact JSON (keys sorted) of the manifest without `digest` and `run`.
fn digest(manifest: &Value) -> String {
    let mut body = manifest.clone();
    let map = body.as_object_mut().unwrap();
    map.remove("digest");
    map.remove("run");
    sextant::outputs::hashing::sha256_hex(&serde_json::to_vec(&body).unwrap())
}

/// Rewrites a results folder's manifest after `change`, with a digest that
/// matches again.
fn reseal(folder: &Path, change: impl FnOnce(&mut Value)) {
    let path = folder.join("manifest.json");
    let mut manifest = read_json(&path);
    change(&mut manifest);
    manifest["digest"] = Value::String(digest(&manifest));
    fs::write(&path, serde_json::to_string_pretty(&manifest).unwrap()).unwrap();
}

/// Replaces model.json by `text` and re-hashes the manifest (its record of
/// model.json and its digest), so that only the model's own checks can
/// refuse it.
fn write_model(folder: &Path, text: &str) {
    fs::write(folder.join("model.json"), text).unwrap();
    let sha = sextant::outputs::hashing::sha256_hex(text.as_bytes());
    reseal(folder, |m| {
        let outputs = m["outputs"].as_array_mut().unwrap();
        let record = outputs
            .iter_mut()
            .find(|o| o["path"] == "model.json")
            .unwrap();
        record["sha256"] = Value::String(sha);
        record["bytes"] = Value::from(text.len());
    });
}

fn apply_to(ws: &Path, results: &str, out: &str) -> Out {
    sextant(
        ws,
        &[
            "apply",
            results,
            "demo-data/dairy-lab-2026-04.csv",
            "--out",
            out,
        ],
    )
}

// ---------------------------------------------------------------- replacing

/// Bug: a folder whose manifest.json merely said `"tool": {"name": "sextant"}`
/// was deleted with everything in it by `run --replace`.
#[test]
fn a_hand_written_manifest_does_not_get_a_folder_replaced() {
    let ws = workspace();
    let folder = ws.path().join("results/dairy-march");
    fs::create_dir_all(&folder).unwrap();
    fs::write(
        folder.join("manifest.json"),
        r#"{"tool": {"name": "sextant"}, "outputs": []}"#,
    )
    .unwrap();
    fs::write(folder.join("thesis.tex"), "three years of work").unwrap();
    let out = sextant(ws.path(), &["run", "recipes/dairy-march.toml", "--replace"]);
    assert_eq!(out.code, 2, "{}{}", out.stdout, out.stderr);
    assert!(
        out.stderr.contains("`thesis.tex`") && out.stderr.contains("digest"),
        "{}",
        out.stderr
    );
    assert_eq!(
        fs::read_to_string(folder.join("thesis.tex")).unwrap(),
        "three years of work"
    );

    // Even with a digest computed by hand, the file it does not name stays.
    reseal(&folder, |_| {});
    let out = sextant(ws.path(), &["run", "recipes/dairy-march.toml", "--replace"]);
    assert_eq!(out.code, 2, "{}{}", out.stdout, out.stderr);
    assert!(out.stderr.contains("`thesis.tex`"), "{}", out.stderr);
    assert!(folder.join("thesis.tex").exists());

    // And `apply --replace` into it is refused the same way.
    analysed(ws.path(), "recipes/dairy-march-pareto.toml");
    let out = sextant(
        ws.path(),
        &[
            "apply",
            "results/dairy-march-pareto",
            "demo-data/dairy-lab-2026-04.csv",
            "--out",
            "results/dairy-march",
            "--replace",
        ],
    );
    assert_eq!(out.code, 2, "{}{}", out.stdout, out.stderr);
    assert!(out.stderr.contains("`thesis.tex`"), "{}", out.stderr);
    assert!(folder.join("thesis.tex").exists());
}

/// Bug: a file put into a real results folder was deleted with it when the
/// analysis was run again (with or without --replace).
#[test]
fn an_extra_file_in_real_results_blocks_replacing() {
    let ws = workspace();
    let folder = analysed(ws.path(), "recipes/dairy-march.toml");
    fs::write(folder.join("my-notes.txt"), "keep me").unwrap();
    for args in [
        &["run", "recipes/dairy-march.toml"][..],
        &["run", "recipes/dairy-march.toml", "--replace"][..],
    ] {
        let out = sextant(ws.path(), args);
        assert_eq!(out.code, 2, "{args:?}: {}{}", out.stdout, out.stderr);
        assert!(out.stderr.contains("`my-notes.txt`"), "{}", out.stderr);
        assert!(folder.join("my-notes.txt").exists());
    }
    fs::remove_file(folder.join("my-notes.txt")).unwrap();

    // In a folder of results, and a sub-folder the manifest does not name.
    fs::write(folder.join("plots/mine.svg"), "<svg/>").unwrap();
    fs::create_dir(folder.join("drafts")).unwrap();
    let out = sextant(ws.path(), &["run", "recipes/dairy-march.toml", "--replace"]);
    assert_eq!(out.code, 2, "{}", out.stderr);
    assert!(
        out.stderr.contains("`plots/mine.svg`") && out.stderr.contains("`drafts` (a folder)"),
        "{}",
        out.stderr
    );
    fs::remove_file(folder.join("plots/mine.svg")).unwrap();
    fs::remove_dir(folder.join("drafts")).unwrap();

    // A named file that is a link to something else.
    let elsewhere = ws.path().join("elsewhere.csv");
    fs::rename(folder.join("scores.csv"), &elsewhere).unwrap();
    std::os::unix::fs::symlink(&elsewhere, folder.join("scores.csv")).unwrap();
    let out = sextant(ws.path(), &["run", "recipes/dairy-march.toml", "--replace"]);
    assert_eq!(out.code, 2, "{}", out.stderr);
    assert!(
        out.stderr.contains("`scores.csv` (a symbolic link)"),
        "{}",
        out.stderr
    );
    fs::remove_file(folder.join("scores.csv")).unwrap();
    fs::rename(&elsewhere, folder.join("scores.csv")).unwrap();

    // Exactly the files it wrote: replaced as before.
    let out = sextant(ws.path(), &["run", "recipes/dairy-march.toml", "--replace"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
}

/// Bug: a results folder that was a symbolic link was replaced, following the
/// link's name.
#[test]
fn a_results_folder_that_is_a_link_is_not_replaced() {
    let ws = workspace();
    let folder = analysed(ws.path(), "recipes/dairy-march.toml");
    let real = ws.path().join("real-results");
    fs::rename(&folder, &real).unwrap();
    std::os::unix::fs::symlink(&real, &folder).unwrap();
    let out = sextant(ws.path(), &["run", "recipes/dairy-march.toml", "--replace"]);
    assert_eq!(out.code, 2, "{}", out.stderr);
    assert!(out.stderr.contains("symbolic link"), "{}", out.stderr);
    assert!(
        fs::symlink_metadata(&folder)
            .unwrap()
            .file_type()
            .is_symlink()
    );
    assert!(real.join("manifest.json").exists());
}

#[test]
fn an_empty_folder_is_still_used() {
    let ws = workspace();
    fs::create_dir_all(ws.path().join("results/dairy-march")).unwrap();
    let folder = analysed(ws.path(), "recipes/dairy-march.toml");
    assert!(folder.join("manifest.json").exists());
}

// ----------------------------------------------------------- tampered models

/// An edit of a model.
type Edit = fn(&mut Value);

/// An edit of a table's text.
type Change = fn(&str) -> String;

/// One way of editing a model and the field the refusal must name.
struct Tamper {
    what: &'static str,
    field: &'static str,
    edit: Edit,
}

fn drop_last(v: &mut Value) {
    v.as_array_mut().unwrap().pop();
}

/// Bug: apply checked only that model.json had the SHA-256 the manifest
/// recorded; a model edited with a re-hashed manifest panicked (index out of
/// bounds) or scored garbage with exit 0.
#[test]
fn a_tampered_model_is_refused_naming_the_field() {
    let tampering = [
        Tamper {
            what: "short loadings row",
            field: "`loadings[3]`",
            edit: |m| drop_last(&mut m["loadings"][3]),
        },
        Tamper {
            what: "loadings emptied",
            field: "`loadings`",
            edit: |m| m["loadings"] = Value::Array(vec![]),
        },
        Tamper {
            what: "too few eigenvalues",
            field: "`eigenvalues`",
            edit: |m| drop_last(&mut m["eigenvalues"]),
        },
        Tamper {
            what: "negative eigenvalue",
            field: "`eigenvalues[1]`",
            edit: |m| m["eigenvalues"][1] = Value::from(-0.5),
        },
        Tamper {
            what: "unsorted eigenvalues",
            field: "`eigenvalues[1]`",
            edit: |m| m["eigenvalues"].as_array_mut().unwrap().swap(0, 1),
        },
        Tamper {
            what: "NaN-like centre",
            field: "`features[2].centre`",
            edit: |m| m["features"][2]["centre"] = Value::Null,
        },
        Tamper {
            what: "huge centre",
            field: "`features[2].centre`",
            edit: |m| m["features"][2]["centre"] = Value::from(1e300),
        },
        Tamper {
            what: "zero scale",
            field: "`features[0].scale`",
            edit: |m| m["features"][0]["scale"] = Value::from(0.0),
        },
        Tamper {
            what: "kept = 0",
            field: "`kept`",
            edit: |m| m["kept"] = Value::from(0),
        },
        Tamper {
            what: "kept > p",
            field: "`kept`",
            edit: |m| m["kept"] = Value::from(40),
        },
        Tamper {
            what: "unknown transform",
            field: "`features[0].transform`",
            edit: |m| m["features"][0]["transform"] = Value::from("log2"),
        },
        Tamper {
            what: "unknown fill method",
            field: "`fill.method`",
            edit: |m| m["fill"]["method"] = Value::from("guess"),
        },
        Tamper {
            what: "unknown model format",
            field: "`model_format`",
            edit: |m| m["model_format"] = Value::from(7),
        },
        Tamper {
            what: "confidence of 1",
            field: "`limits[0].confidence`",
            edit: |m| m["limits"][0]["confidence"] = Value::from(1.0),
        },
        Tamper {
            what: "negative limit",
            field: "`limits[1].spe`",
            edit: |m| m["limits"][1]["spe"] = Value::from(-3.0),
        },
        Tamper {
            what: "unknown scaling",
            field: "`scaling`",
            edit: |m| m["scaling"] = Value::from("z-score"),
        },
        Tamper {
            what: "unknown SPE limit",
            field: "`spe_limit`",
            edit: |m| m["spe_limit"] = Value::from("guess"),
        },
        Tamper {
            what: "a feature twice",
            field: "`features[1].name`",
            edit: |m| m["features"][1]["name"] = m["features"][0]["name"].clone(),
        },
        Tamper {
            what: "the id is a feature",
            field: "`id`",
            edit: |m| m["id"] = m["features"][0]["name"].clone(),
        },
        Tamper {
            what: "constant fill values emptied",
            field: "`fill.values`",
            edit: |m| m["fill"]["values"] = Value::Array(vec![]),
        },
    ];
    let ws = workspace();
    let folder = analysed(ws.path(), "recipes/dairy-march.toml");
    let original = fs::read_to_string(folder.join("model.json")).unwrap();
    for t in &tampering {
        let mut model: Value = serde_json::from_str(&original).unwrap();
        (t.edit)(&mut model);
        write_model(&folder, &serde_json::to_string_pretty(&model).unwrap());
        expect_refused(ws.path(), "results/dairy-march", t.what, t.field);
    }
    // A number too large for a double is refused where it is read.
    let huge = original.replacen("\"centre\": ", "\"centre\": 1e999, \"was\": ", 1);
    write_model(&folder, &huge);
    expect_refused(
        ws.path(),
        "results/dairy-march",
        "1e999",
        "`features[0].centre`",
    );
    write_model(&folder, &original);
    assert_eq!(apply_to(ws.path(), "results/dairy-march", "fine").code, 0);
}

/// Runs apply on a tampered model and checks the refusal.
fn expect_refused(ws: &Path, results: &str, what: &str, field: &str) {
    let out = apply_to(ws, results, "tampered");
    assert_eq!(out.code, 2, "{what}: {}{}", out.stdout, out.stderr);
    assert!(
        out.stderr.contains("model.json cannot be used") && out.stderr.contains(field),
        "{what}: expected {field} in {}",
        out.stderr
    );
    assert!(!out.stderr.contains("panicked"), "{what}: {}", out.stderr);
    assert!(!ws.join("tampered").exists(), "{what}");
}

/// Bug: the fill models were not checked either: a short imputation model or
/// kNN with no neighbours panicked or divided by zero.
#[test]
fn a_tampered_fill_model_is_refused_naming_the_field() {
    let ws = workspace();
    let cases: [(&str, &str, Edit, &str); 5] = [
        (
            "iterative-pca",
            "imputation loadings row short",
            |m| drop_last(&mut m["fill"]["model"]["loadings"][2]),
            "`fill.model.loadings[2]`",
        ),
        (
            "iterative-pca",
            "imputation centre short",
            |m| drop_last(&mut m["fill"]["model"]["centre"]),
            "`fill.model.centre`",
        ),
        (
            "iterative-pca",
            "imputation scale zero",
            |m| m["fill"]["model"]["scale"][4] = Value::from(0.0),
            "`fill.model.scale[4]`",
        ),
        (
            "knn",
            "no neighbours",
            |m| m["fill"]["neighbours"] = Value::from(0),
            "`fill.neighbours`",
        ),
        (
            "knn",
            "reference column short",
            |m| drop_last(&mut m["fill"]["reference"][5]),
            "`fill.reference[5]`",
        ),
    ];
    for method in ["iterative-pca", "knn"] {
        let recipe = recipe_with_fill(ws.path(), method);
        let folder = analysed(ws.path(), &recipe);
        let original = fs::read_to_string(folder.join("model.json")).unwrap();
        for (_, what, edit, field) in cases.iter().filter(|c| c.0 == method) {
            let mut model: Value = serde_json::from_str(&original).unwrap();
            edit(&mut model);
            write_model(&folder, &serde_json::to_string_pretty(&model).unwrap());
            expect_refused(ws.path(), &format!("results/{method}"), what, field);
        }
    }
}

/// Bug: model::build indexed the imputation model, which was left empty when
/// the analysed rows had no missing cell: `run` panicked. The complete table's
/// model is fitted once, so new rows' gaps are filled from it.
#[test]
fn iterative_fill_without_missing_cells_runs_and_applies() {
    let ws = workspace();
    let mut rows = vec!["id,a,b,c,d".to_string()];
    for i in 0..30 {
        let x = (i as f64 * 0.37).sin();
        let y = (i as f64 * 1.3).cos();
        rows.push(format!(
            "r{i},{x},{},{},{}",
            x - y,
            2.0 * y + 0.01 * i as f64,
            (i % 7) as f64
        ));
    }
    fs::write(ws.path().join("full.csv"), rows.join("\n") + "\n").unwrap();
    fs::write(
        ws.path().join("gaps.csv"),
        "id,a,b,c,d\nn1,0.1,,0.3,2\nn2,0.2,0.4,0.1,3\n",
    )
    .unwrap();
    fs::write(
        ws.path().join("full.toml"),
        "format = 1\n[input]\nfile = \"full.csv\"\nid = \"id\"\n[missing]\nmethod = \"iterative-pca\"\n[output]\nfolder = \"out\"\n",
    )
    .unwrap();
    let out = sextant(ws.path(), &["run", "full.toml"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    let out = sextant(ws.path(), &["apply", "out", "gaps.csv", "--out", "scored"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    assert!(
        out.stdout.contains("2 rows, 2 scored") && out.stdout.contains("filled     1 missing"),
        "{}",
        out.stdout
    );
}

// --------------------------------------------------------- edited manifests

/// Bug: apply and diff never checked the manifest's digest, so an edited
/// manifest (e.g. a model.json hash swapped in by hand) was acted on.
#[test]
fn a_manifest_with_a_wrong_digest_stops_apply_and_diff() {
    let ws = workspace();
    let folder = analysed(ws.path(), "recipes/dairy-march.toml");
    let path = folder.join("manifest.json");
    let text = fs::read_to_string(&path).unwrap();
    fs::write(&path, text.replacen("\"unit-variance\"", "\"pareto\"", 1)).unwrap();
    let out = apply_to(ws.path(), "results/dairy-march", "x");
    assert_eq!(out.code, 2, "{}", out.stderr);
    assert!(
        out.stderr.contains("digest does not match"),
        "{}",
        out.stderr
    );
    assert!(!ws.path().join("x").exists());
    let out = sextant(
        ws.path(),
        &["diff", "results/dairy-march", "recipes/dairy-march.toml"],
    );
    assert_eq!(out.code, 2, "{}", out.stderr);
    assert!(
        out.stderr.contains("digest does not match"),
        "{}",
        out.stderr
    );
}

/// Runs the binary with a time limit and an address-space limit (so reading
/// an endless file whole would fail instead of passing slowly).
fn sextant_bounded(cwd: &Path, args: &[&str], limit: Duration) -> Out {
    let script = "ulimit -v 2000000; exec \"$0\" \"$@\"";
    let mut child = Command::new("sh")
        .arg("-c")
        .arg(script)
        .arg(BIN)
        .args(args)
        .current_dir(cwd)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let start = Instant::now();
    while child.try_wait().unwrap().is_none() {
        if start.elapsed() > limit {
            child.kill().unwrap();
            panic!("`sextant {}` ran longer than {limit:?}", args.join(" "));
        }
        std::thread::sleep(Duration::from_millis(20));
    }
    let out = child.wait_with_output().unwrap();
    Out {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

fn input(path: &str) -> Value {
    serde_json::json!({"path": path, "bytes": 1, "sha256": "0".repeat(64), "rows": 1, "columns": 1})
}

/// Bug: verify opened whatever a manifest named: it hashed /etc/passwd, read
/// /dev/zero into memory until it was killed, and blocked forever on a fifo.
#[test]
fn verify_opens_nothing_outside_and_never_a_device_or_fifo() {
    let ws = workspace();
    let folder = analysed(ws.path(), "recipes/dairy-march.toml");
    let status = Command::new("mkfifo")
        .arg(ws.path().join("demo-data/pipe"))
        .status()
        .unwrap();
    assert!(status.success());
    std::os::unix::fs::symlink("/dev/zero", folder.join("zero.bin")).unwrap();
    reseal(&folder, |m| {
        let inputs = m["inputs"].as_array_mut().unwrap();
        for p in [
            "/etc/passwd",
            "../../outside",
            "../demo-data/pipe",
            "/dev/zero",
        ] {
            inputs.push(input(p));
        }
        let outputs = m["outputs"].as_array_mut().unwrap();
        for p in ["zero.bin", "../../escape.csv"] {
            outputs.push(serde_json::json!({"path": p, "bytes": 1, "sha256": "0".repeat(64)}));
        }
    });
    let start = Instant::now();
    let out = sextant_bounded(
        ws.path(),
        &["verify", "results/dairy-march"],
        Duration::from_secs(30),
    );
    assert_eq!(out.code, 1, "{}{}", out.stdout, out.stderr);
    assert!(
        start.elapsed() < Duration::from_secs(10),
        "{:?}",
        start.elapsed()
    );
    let line = |name: &str| {
        out.stdout
            .lines()
            .find(|l| l.contains(name))
            .unwrap_or_else(|| panic!("no line for {name}:\n{}", out.stdout))
            .to_string()
    };
    assert!(line("/etc/passwd").contains("REFUSED") && line("/etc/passwd").contains("absolute"));
    assert!(line("/dev/zero").contains("REFUSED"), "{}", out.stdout);
    assert!(line("outside").contains("REFUSED") && line("outside").contains("outside "));
    assert!(line("pipe").contains("REFUSED") && line("pipe").contains("named pipe"));
    assert!(line("zero.bin").contains("REFUSED") && line("zero.bin").contains("symbolic link"));
    assert!(line("escape.csv").contains("REFUSED"), "{}", out.stdout);
    // The genuine files are still checked.
    assert!(
        line("dairy-lab-2026-03.csv").contains("unchanged"),
        "{}",
        out.stdout
    );
}

/// With a digest that does not match, nothing outside the folder is opened
/// (here a fifo that would block a read forever).
#[test]
fn verify_of_an_edited_manifest_opens_nothing_outside_the_folder() {
    let ws = workspace();
    let folder = analysed(ws.path(), "recipes/dairy-march.toml");
    let status = Command::new("mkfifo")
        .arg(ws.path().join("demo-data/pipe"))
        .status()
        .unwrap();
    assert!(status.success());
    let path = folder.join("manifest.json");
    let mut manifest = read_json(&path);
    manifest["inputs"][0]["path"] = Value::from("../demo-data/pipe");
    fs::write(&path, serde_json::to_string_pretty(&manifest).unwrap()).unwrap();
    let out = sextant_bounded(
        ws.path(),
        &["verify", "results/dairy-march"],
        Duration::from_secs(30),
    );
    assert_eq!(out.code, 1, "{}{}", out.stdout, out.stderr);
    assert!(out.stdout.contains("DOES NOT MATCH"), "{}", out.stdout);
    let input = out.stdout.lines().find(|l| l.contains("pipe")).unwrap();
    assert!(input.contains("NOT CHECKED"), "{input}");
    let recipe = out
        .stdout
        .lines()
        .find(|l| l.starts_with("recipe"))
        .unwrap();
    assert!(recipe.contains("NOT CHECKED"), "{recipe}");
    // Outputs inside the folder are still checked.
    assert!(
        out.stdout
            .lines()
            .any(|l| l.contains("scores.csv") && l.contains("unchanged")),
        "{}",
        out.stdout
    );
}

/// Bug: verify passed a folder holding files its manifest did not name.
#[test]
fn verify_reports_a_file_the_manifest_does_not_name() {
    let ws = workspace();
    let folder = analysed(ws.path(), "recipes/dairy-march.toml");
    fs::write(folder.join("plots/added.svg"), "<svg/>").unwrap();
    let out = sextant(ws.path(), &["verify", "results/dairy-march"]);
    assert_eq!(out.code, 1, "{}{}", out.stdout, out.stderr);
    assert!(
        out.stdout
            .lines()
            .any(|l| l.starts_with("extra") && l.contains("plots/added.svg")),
        "{}",
        out.stdout
    );
    assert!(out.stdout.contains("NOT verified"), "{}", out.stdout);
}

// --------------------------------------------------------- malformed tables

/// Bug: diff indexed the rows of variance.csv, loadings.csv and scores.csv
/// (`variance_rows[1..]`, `r[1]`) and panicked on a short or empty file.
#[test]
fn diff_names_the_file_and_line_of_a_malformed_table() {
    let ws = workspace();
    let folder = analysed(ws.path(), "recipes/dairy-march.toml");
    let cases: [(&str, Change, &str); 6] = [
        ("variance.csv", |_| String::new(), "variance.csv:1"),
        (
            "variance.csv",
            |t| t.lines().next().unwrap().to_string() + "\n",
            "variance.csv:1",
        ),
        (
            "variance.csv",
            |t| t.replacen("\nPC1,", "\nPC1,abc", 1),
            "variance.csv:2",
        ),
        (
            "loadings.csv",
            |t| t.replacen(",PC2", ",second", 1),
            "loadings.csv:1",
        ),
        (
            "scores.csv",
            |t| {
                let mut lines: Vec<String> = t.lines().map(String::from).collect();
                lines[3] = "1,2".into();
                lines.join("\n")
            },
            "scores.csv:4",
        ),
        (
            "scores.csv",
            |t| t.replacen("PC2", "PCx", 1),
            "scores.csv:1",
        ),
    ];
    for (name, change, at) in cases {
        let path = folder.join(name);
        let original = fs::read_to_string(&path).unwrap();
        fs::write(&path, change(&original)).unwrap();
        let out = sextant(
            ws.path(),
            &["diff", "results/dairy-march", "results/dairy-march"],
        );
        assert_eq!(out.code, 2, "{at}: {}{}", out.stdout, out.stderr);
        assert!(out.stderr.contains(at), "{at}: {}", out.stderr);
        assert!(!out.stderr.contains("panicked"), "{}", out.stderr);
        fs::write(&path, original).unwrap();
    }
    let out = sextant(
        ws.path(),
        &["diff", "results/dairy-march", "results/dairy-march"],
    );
    assert_eq!(out.code, 0, "{}", out.stderr);
}
