//! The passes engine (the table read in chunks, each statistic a pass over a
//! store that may live in a scratch file) against the in-memory engine: every
//! result file must be the same bytes, on the demo and on generated tables that
//! exercise transforms, fills, dropped rows and features, every centred scaling,
//! the k rules that work in passes, one and several threads. Only the manifest's
//! unhashed `run` block (time, host) may differ.

mod common;

use common::{BIN, sextant, workspace};
use std::fs;
use std::path::Path;
use std::process::Command;

/// Every file of a results folder, by relative path; the manifest without its
/// unhashed `run` block.
fn folder_bytes(dir: &Path) -> Vec<(String, Vec<u8>)> {
    let mut files = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for entry in fs::read_dir(&d).unwrap() {
            let path = entry.unwrap().path();
            if path.is_dir() {
                stack.push(path);
                continue;
            }
            let name = path.strip_prefix(dir).unwrap().display().to_string();
            let mut bytes = fs::read(&path).unwrap();
            if name == "manifest.json" {
                let mut json: serde_json::Value = serde_json::from_slice(&bytes).unwrap();
                json.as_object_mut().unwrap().remove("run");
                bytes = serde_json::to_vec(&json).unwrap();
            }
            files.push((name, bytes));
        }
    }
    files.sort();
    files
}

/// Runs `recipe` (relative to `dir`) with the extra arguments and moves its
/// results folder `folder` to `into`.
fn run_into(
    dir: &Path,
    recipe: &str,
    folder: &str,
    args: &[&str],
    into: &str,
    threads: Option<usize>,
) {
    let mut cmd = Command::new(BIN);
    cmd.arg("run").arg(recipe).args(args).current_dir(dir);
    if let Some(t) = threads {
        cmd.env("RAYON_NUM_THREADS", t.to_string());
    }
    let out = cmd.output().unwrap();
    assert!(
        out.status.success(),
        "{recipe} {args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    fs::rename(dir.join(folder), dir.join(into)).unwrap();
}

fn assert_same_folders(a: &Path, b: &Path, what: &str) {
    let (fa, fb) = (folder_bytes(a), folder_bytes(b));
    let names = |f: &[(String, Vec<u8>)]| f.iter().map(|(n, _)| n.clone()).collect::<Vec<_>>();
    assert_eq!(names(&fa), names(&fb), "{what}: different files");
    assert!(fa.len() >= 8, "{what}: too few files: {:?}", names(&fa));
    for ((name, x), (_, y)) in fa.iter().zip(&fb) {
        assert!(x == y, "{what}: {name} differs between the engines");
    }
}

/// In memory, in passes held in memory, and in passes over a scratch file
/// (a 64 KB budget): all the same bytes.
fn check_engines(dir: &Path, recipe: &str, folder: &str) {
    run_into(
        dir,
        recipe,
        folder,
        &["--engine", "in-memory"],
        "memory",
        None,
    );
    run_into(dir, recipe, folder, &["--engine", "passes"], "passes", None);
    run_into(
        dir,
        recipe,
        folder,
        &["--engine", "passes", "--memory-budget", "64KB"],
        "scratch",
        None,
    );
    run_into(
        dir,
        recipe,
        folder,
        &["--engine", "passes", "--memory-budget", "64KB"],
        "scratch-one-thread",
        Some(1),
    );
    for other in ["passes", "scratch", "scratch-one-thread"] {
        assert_same_folders(
            &dir.join("memory"),
            &dir.join(other),
            &format!("{recipe} {other}"),
        );
    }
    for d in ["memory", "passes", "scratch", "scratch-one-thread"] {
        fs::remove_dir_all(dir.join(d)).unwrap();
    }
    // The scratch files are gone.
    let left: Vec<String> = fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.starts_with(".sextant"))
        .collect();
    assert!(left.is_empty(), "left behind: {left:?}");
}

#[test]
fn the_demo_gives_the_same_bytes_in_passes() {
    let ws = workspace();
    check_engines(
        &ws.path().join("recipes"),
        "dairy-march.toml",
        "../results/dairy-march",
    );
    check_engines(
        &ws.path().join("recipes"),
        "dairy-march-composition.toml",
        "../results/dairy-march-composition",
    );
}

/// A generated table (a linear congruential generator, no seed involved):
/// three latent factors, a skewed positive column, a constant column, a column
/// missing too often, a text column, ids that need quoting, and NA cells.
fn generated(rows: usize) -> String {
    let mut state: u64 = 0x9e37_79b9_7f4a_7c15;
    let mut next = || {
        state = state
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        (state >> 11) as f64 / (1u64 << 53) as f64 - 0.5
    };
    let mut out = String::from("id,site,x1,x2,x3,x4,x5,x6,x7,skewed,flat,sparse,note\n");
    for i in 0..rows {
        let (a, b, c) = (next() * 4.0, next() * 2.0, next());
        let x = [
            a + 0.3 * next(),
            a - b + 0.3 * next(),
            b + c + 0.3 * next(),
            2.0 * c - a + 0.3 * next(),
            a + b + c + 0.3 * next(),
            next(),
            10.0 * b + next(),
        ];
        out.push_str(&format!("\"r,{i}\",site{}", i % 4));
        for (j, v) in x.iter().enumerate() {
            if (i * 7 + j * 13) % 53 == 0 {
                out.push_str(",NA");
            } else {
                out.push_str(&format!(",{v:.5}"));
            }
        }
        let skewed = (a + 3.0 * next()).exp();
        let sparse = if i % 3 == 0 {
            format!("{:.3}", next())
        } else {
            "NA".into()
        };
        out.push_str(&format!(",{skewed:.6},7.5,{sparse},\"note {i}\"\n"));
    }
    out
}

#[test]
fn generated_tables_give_the_same_bytes_in_passes() {
    let ws = workspace();
    let dir = ws.path();
    fs::write(dir.join("table.csv"), generated(5000)).unwrap();
    let plots = "[[plot]]\nkind = \"scree\"\n[[plot]]\nkind = \"scores\"\ncolor = \"site\"\nellipse = 0.95\n[[plot]]\nkind = \"loadings\"\n[[plot]]\nkind = \"biplot\"\n[[plot]]\nkind = \"correlation-circle\"\n[[plot]]\nkind = \"outlier-map\"\n";
    let variants = [
        "[missing]\nmethod = \"mean\"\n[transform]\nlog10 = [\"skewed\"]\n[scaling]\nmethod = \"unit-variance\"\nconstant_features = \"drop\"\n[components]\nkeep = \"broken-stick\"\n[diagnostics]\nconfidence = [0.9, 0.99]\n",
        "[missing]\nmethod = \"drop-rows\"\nmax_feature_missing = 0.5\n[transform]\nln = [\"skewed\"]\n[scaling]\nmethod = \"pareto\"\nconstant_features = \"drop\"\n[components]\nkeep = { variance = 0.8 }\n[diagnostics]\nspe_limit = \"box\"\n",
        "[input.x]\n[missing]\nmethod = \"mean\"\n[transform]\nsqrt = [\"skewed\"]\n[scaling]\nmethod = \"range\"\nconstant_features = \"drop\"\n[components]\nkeep = \"kaiser\"\ncompute = 6\n",
        "[scaling]\nmethod = \"center\"\n[components]\nkeep = 3\n[diagnostics]\ncontributions_max_rows = 7\n",
    ];
    for (v, body) in variants.iter().enumerate() {
        let body = body.replace("[input.x]\n", "");
        let recipe = format!(
            "format = 1\ntitle = \"generated variant {v}\"\n[input]\nfile = \"table.csv\"\nid = \"id\"\ngroups = [\"site\"]\nexclude = [\"note\"]\nmissing = [\"NA\"]\n{body}{plots}[output]\nfolder = \"out\"\n"
        );
        fs::write(dir.join("variant.toml"), recipe).unwrap();
        check_engines(dir, "variant.toml", "out");
    }
}

/// Runs `recipe` in memory and in passes (with the rows in a scratch file):
/// both must fail the same way, leaving no results; returns the message.
fn same_error(dir: &Path, recipe: &str) -> String {
    let a = sextant(dir, &["run", recipe, "--engine", "in-memory"]);
    let b = sextant(
        dir,
        &[
            "run",
            recipe,
            "--engine",
            "passes",
            "--memory-budget",
            "8KB",
        ],
    );
    assert_ne!(a.code, 0);
    assert_eq!(a.code, b.code);
    assert_eq!(a.stderr, b.stderr);
    assert!(!dir.join("out").exists());
    a.stderr
}

/// The generated table with cell `column` (counted from the right when
/// negative) of file line `line` replaced.
fn with_cell(table: &str, line: usize, column: isize, text: &str) -> String {
    let mut lines: Vec<String> = table.lines().map(String::from).collect();
    let mut cells: Vec<String> = lines[line - 1].split(',').map(String::from).collect();
    let at = if column < 0 {
        (cells.len() as isize + column) as usize
    } else {
        column as usize
    };
    cells[at] = text.into();
    lines[line - 1] = cells.join(",");
    lines.join("\n") + "\n"
}

#[test]
fn both_engines_report_the_same_error() {
    let ws = workspace();
    let dir = ws.path();
    let table = generated(300);
    let recipe = |transform: &str| {
        format!(
            "format = 1\n[input]\nfile = \"bad.csv\"\nid = \"id\"\ngroups = [\"site\"]\nexclude = [\"note\"]\nmissing = [\"NA\"]\n[missing]\nmax_feature_missing = 0.9\n{transform}[output]\nfolder = \"out\"\n"
        )
    };
    // A negative value where a logarithm is asked for, on line 200.
    fs::write(dir.join("bad.csv"), with_cell(&table, 200, -4, "-2.5")).unwrap();
    fs::write(
        dir.join("bad.toml"),
        recipe("[transform]\nlog10 = [\"skewed\"]\n"),
    )
    .unwrap();
    let e = same_error(dir, "bad.toml");
    assert!(e.contains("bad.csv:200"), "{e}");
    // The id of line 120 again on line 250 (the ids are kept with the rows in
    // passes, and checked by sorting them in runs). Line L holds id "r,L−2".
    let id = |line: usize| format!("\"r,{}\"", line - 2);
    let swap = |table: &str, line: usize, to: &str| {
        table.replacen(&format!("{},", id(line)), &format!("{to},"), 1)
    };
    fs::write(dir.join("bad.csv"), swap(&table, 250, &id(120))).unwrap();
    fs::write(dir.join("bad.toml"), recipe("")).unwrap();
    let e = same_error(dir, "bad.toml");
    assert!(e.contains("bad.csv:250") && e.contains("line 120"), "{e}");
    // An empty id on line 90, before a repeat on line 150.
    let twice = swap(&table, 150, &id(120));
    fs::write(dir.join("bad.csv"), swap(&twice, 90, "")).unwrap();
    let e = same_error(dir, "bad.toml");
    assert!(e.contains("bad.csv:90") && e.contains("empty"), "{e}");
}

#[test]
fn recipes_that_need_memory_say_so_when_forced_into_passes() {
    let ws = workspace();
    let dir = ws.path();
    fs::write(dir.join("table.csv"), generated(200)).unwrap();
    fs::write(
        dir.join("median.toml"),
        "format = 1\n[input]\nfile = \"table.csv\"\nid = \"id\"\ngroups = [\"site\"]\nexclude = [\"note\", \"flat\"]\nmissing = [\"NA\"]\n[missing]\nmethod = \"median\"\nmax_feature_missing = 0.9\n[output]\nfolder = \"out\"\n",
    )
    .unwrap();
    let forced = sextant(dir, &["run", "median.toml", "--engine", "passes"]);
    assert_ne!(forced.code, 0);
    assert!(forced.stderr.contains("median"), "{}", forced.stderr);
    // Over the budget, the automatic choice refuses rather than switching method.
    let over = sextant(dir, &["run", "median.toml", "--memory-budget", "1KB"]);
    assert_ne!(over.code, 0);
    assert!(over.stderr.contains("memory budget"), "{}", over.stderr);
    assert!(!dir.join("out").exists());
    // Within the budget it runs in memory.
    let fine = sextant(dir, &["run", "median.toml"]);
    assert_eq!(fine.code, 0, "{}", fine.stderr);
    assert!(fine.stdout.contains("results"), "{}", fine.stdout);
}

#[test]
fn a_large_wide_table_is_analysed_in_memory_when_it_fits() {
    // 480 rows × 10,000 features, about 36 MB: above the size from which the
    // passes engine reads the file, but only the in-memory engine can analyse a
    // table with fewer rows than features; read in chunks, it moves there.
    let ws = workspace();
    let dir = ws.path();
    let mut state: u64 = 7;
    let mut text = String::from("id");
    for j in 0..10_000 {
        text.push_str(&format!(",f{j}"));
    }
    text.push('\n');
    for i in 0..480 {
        text.push_str(&format!("r{i}"));
        let latent = (i % 7) as f64 - 3.0;
        for j in 0..10_000 {
            state = state
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            let noise = (state >> 11) as f64 / (1u64 << 53) as f64 - 0.5;
            text.push_str(&format!(",{:.4}", latent * ((j % 5) as f64) + noise));
        }
        text.push('\n');
    }
    assert!(text.len() > 33 << 20, "{} bytes", text.len());
    fs::write(dir.join("wide.csv"), text).unwrap();
    fs::write(
        dir.join("wide.toml"),
        "format = 1\n[input]\nfile = \"wide.csv\"\nid = \"id\"\n[components]\nkeep = 3\n[[plot]]\nkind = \"scree\"\n[output]\nfolder = \"out\"\n",
    )
    .unwrap();
    run_into(dir, "wide.toml", "out", &[], "auto", None);
    run_into(
        dir,
        "wide.toml",
        "out",
        &["--engine", "in-memory"],
        "memory",
        None,
    );
    assert_same_folders(&dir.join("auto"), &dir.join("memory"), "wide table");
    // Forced into passes, it says why it cannot.
    let forced = sextant(dir, &["run", "wide.toml", "--engine", "passes"]);
    assert_ne!(forced.code, 0);
    assert!(forced.stderr.contains("fewer rows"), "{}", forced.stderr);
}

#[test]
fn check_reports_the_same_in_passes() {
    let ws = workspace();
    let dir = ws.path();
    fs::write(dir.join("table.csv"), generated(3000)).unwrap();
    fs::write(
        dir.join("check.toml"),
        "format = 1\n[input]\nfile = \"table.csv\"\nid = \"id\"\ngroups = [\"site\"]\nexclude = [\"note\"]\nmissing = [\"NA\"]\n[transform]\nlog10 = [\"skewed\"]\n[scaling]\nconstant_features = \"drop\"\n[output]\nfolder = \"out\"\n",
    )
    .unwrap();
    let memory = sextant(dir, &["check", "check.toml", "--engine", "in-memory"]);
    let passes = sextant(
        dir,
        &[
            "check",
            "check.toml",
            "--engine",
            "passes",
            "--memory-budget",
            "16KB",
        ],
    );
    assert_eq!(memory.code, 0, "{}", memory.stderr);
    assert_eq!(memory.code, passes.code);
    assert_eq!(memory.stdout, passes.stdout);
    assert!(memory.stdout.contains("sparse"), "{}", memory.stdout);
}
