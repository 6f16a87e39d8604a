//! Same recipe, same data, same bytes: whatever the thread count, and whether
//! the table is tall (p × p route) or wide (n × n route). (The folder lock is
//! tested in `tests/lock.rs`.)

use std::fs;
use std::process::Command;

const BIN: &str = env!("CARGO_BIN_EXE_sextant");

/// A deterministic table with correlated columns and a few missing cells
/// (a linear congruential generator, so no crate or seed is involved).
fn generated_table(rows: usize, cols: usize) -> String {
    let mut state: u64 = 0x2545_f491_4f6c_dd1d;
    let mut next = || {
        state = state
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        (state >> 11) as f64 / (1u64 << 53) as f64 - 0.5
    };
    let mut out = String::from("id,batch");
    for j in 0..cols {
        out.push_str(&format!(",x{j}"));
    }
    out.push('\n');
    for i in 0..rows {
        let (f1, f2) = (next() * 4.0, next() * 2.0);
        out.push_str(&format!("r{i},b{}", i % 3));
        for j in 0..cols {
            let v = f1 * ((j % 5) as f64 - 2.0) + f2 * ((j % 3) as f64) + next();
            if (i * 31 + j * 17) % 97 == 0 {
                out.push_str(",NA");
            } else {
                out.push_str(&format!(",{v:.6}"));
            }
        }
        out.push('\n');
    }
    out
}

fn recipe(folder: &str) -> String {
    format!(
        "format = 1\n[input]\nfile = \"data.csv\"\nid = \"id\"\ngroups = [\"batch\"]\n[components]\nkeep = 3\n[output]\nfolder = \"{folder}\"\n"
    )
}

/// Runs the recipe in a fresh folder with a given thread count; returns every
/// result file's bytes (the manifest without its `run` block, digest included).
fn run_with_threads(table: &str, threads: usize) -> Vec<(String, Vec<u8>)> {
    let dir = tempfile::tempdir().unwrap();
    fs::write(dir.path().join("data.csv"), table).unwrap();
    fs::write(dir.path().join("r.toml"), recipe("out")).unwrap();
    let out = Command::new(BIN)
        .args(["run", "r.toml"])
        .current_dir(dir.path())
        .env("RAYON_NUM_THREADS", threads.to_string())
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let mut files: Vec<(String, Vec<u8>)> = fs::read_dir(dir.path().join("out"))
        .unwrap()
        .map(|e| {
            let p = e.unwrap().path();
            let name = p.file_name().unwrap().to_string_lossy().into_owned();
            let mut bytes = fs::read(&p).unwrap();
            if name == "manifest.json" {
                let mut v: serde_json::Value = serde_json::from_slice(&bytes).unwrap();
                assert_eq!(
                    v["run"]["threads"], threads,
                    "the run block records the thread count"
                );
                v.as_object_mut().unwrap().remove("run");
                bytes = serde_json::to_vec(&v).unwrap();
            }
            (name, bytes)
        })
        .collect();
    files.sort();
    files
}

fn assert_same_bytes(shape: (usize, usize)) {
    let table = generated_table(shape.0, shape.1);
    let one = run_with_threads(&table, 1);
    let two = run_with_threads(&table, 2);
    let eight = run_with_threads(&table, 8);
    assert_eq!(one.len(), 9, "the nine result files");
    for ((name, a), ((_, b), (_, c))) in one.iter().zip(two.iter().zip(&eight)) {
        assert!(
            a == b && a == c,
            "{name} differs between thread counts for a {shape:?} table"
        );
    }
}

#[test]
fn tall_table_is_identical_on_1_2_and_8_threads() {
    // 5,000 rows span several 1,024-row blocks of the cross-product kernel.
    assert_same_bytes((5_000, 12));
}

#[test]
fn wide_table_is_identical_on_1_2_and_8_threads() {
    // More features than rows: the n × n route.
    assert_same_bytes((40, 150));
}
