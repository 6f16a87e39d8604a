//! Helpers shared by the end-to-end tests: a temporary copy of the shipped
//! recipes and demo data, and running the real binary in it.

use std::fs;
use std::path::{Path, PathBuf};
use std::process::Command;

/// The binary under test.
pub const BIN: &str = env!("CARGO_BIN_EXE_sextant");

/// A temporary copy of recipes/ and demo-data/, so results land inside it.
#[allow(dead_code)] // the tests that make their own tables do not use it
pub fn workspace() -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    let repo = PathBuf::from(env!("CARGO_MANIFEST_DIR"));
    for sub in ["recipes", "demo-data"] {
        fs::create_dir(dir.path().join(sub)).unwrap();
        for entry in fs::read_dir(repo.join(sub)).unwrap() {
            let path = entry.unwrap().path();
            fs::copy(&path, dir.path().join(sub).join(path.file_name().unwrap())).unwrap();
        }
    }
    dir
}

/// What a run of the binary printed and its exit code.
pub struct Out {
    pub code: i32,
    pub stdout: String,
    pub stderr: String,
}

/// Runs the binary with `args` in `cwd`.
pub fn sextant(cwd: &Path, args: &[&str]) -> Out {
    let out = Command::new(BIN)
        .args(args)
        .current_dir(cwd)
        .output()
        .unwrap();
    Out {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

/// The hidden entries sextant makes beside a results folder (lock, staging,
/// earlier results moved aside, scratch files), sorted.
#[allow(dead_code)] // only the tests of locks and interruptions look
pub fn hidden_entries(dir: &Path) -> Vec<String> {
    let mut names: Vec<String> = fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.contains(".sextant-"))
        .collect();
    names.sort();
    names
}

/// The Sylvester–Hadamard matrix of order `n` (a power of 2), entries ±1.
#[allow(dead_code)] // only the tests built from exact orthogonal factors use it
pub fn hadamard(n: usize) -> Vec<Vec<f64>> {
    let mut h = vec![vec![1.0]];
    while h.len() < n {
        let m = h.len();
        let mut next = vec![vec![0.0; 2 * m]; 2 * m];
        for i in 0..m {
            for j in 0..m {
                next[i][j] = h[i][j];
                next[i][j + m] = h[i][j];
                next[i + m][j] = h[i][j];
                next[i + m][j + m] = -h[i][j];
            }
        }
        h = next;
    }
    h
}
