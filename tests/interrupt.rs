//! An interrupted run leaves nothing behind: Ctrl-C (SIGINT) in the middle of a
//! run removes its scratch file, staging folder and lock, exits with 130, and
//! leaves the previous results exactly as they were; an interrupted `new`
//! leaves no half-made recipe. A run killed outright (SIGKILL) cannot clean up:
//! the next run (or `verify`) removes what it left and says so. A running
//! run's lock refuses a second run, naming the first.

#![cfg(unix)]

#[allow(dead_code)] // not every shared helper is used here
mod common;

use common::{BIN, sextant};
use std::fs;
use std::path::Path;
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

/// A generated table of about 40 MB: large enough for the passes engine and
/// for a run that lasts long enough to be interrupted at a chosen stage.
fn write_table(path: &Path) {
    let mut text = String::from("id,site");
    for j in 0..30 {
        text.push_str(&format!(",x{j:02}"));
    }
    text.push('\n');
    let mut state = 12_345u64;
    for i in 0..140_000 {
        text.push_str(&format!("r{i},s{}", i % 4));
        for j in 0..30 {
            state = state
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            let noise = (state >> 11) as f64 / (1u64 << 53) as f64;
            text.push_str(&format!(
                ",{:.6}",
                (i % 97) as f64 * (j + 1) as f64 * 0.01 + noise
            ));
        }
        text.push('\n');
    }
    fs::write(path, text).unwrap();
}

fn start(dir: &Path, args: &[&str]) -> Child {
    Command::new(BIN)
        .args(args)
        .current_dir(dir)
        .env("SEXTANT_NO_PROGRESS", "1")
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap()
}

/// Waits until an entry whose name starts with `prefix` appears in `dir`, then
/// sends SIGINT; returns false if the run ended first.
fn interrupt_when(child: &mut Child, dir: &Path, prefix: &str) -> bool {
    signal_when(child, dir, prefix, "-INT")
}

/// Waits until an entry whose name starts with `prefix` appears in `dir`, then
/// sends `signal`; returns false if the run ended first.
fn signal_when(child: &mut Child, dir: &Path, prefix: &str, signal: &str) -> bool {
    let deadline = Instant::now() + Duration::from_secs(60);
    while Instant::now() < deadline {
        if child.try_wait().unwrap().is_some() {
            return false;
        }
        let seen = fs::read_dir(dir)
            .unwrap()
            .any(|e| e.unwrap().file_name().to_string_lossy().starts_with(prefix));
        if seen {
            let status = Command::new("kill")
                .args([signal, &child.id().to_string()])
                .status()
                .unwrap();
            assert!(status.success(), "kill {signal} failed");
            return true;
        }
        std::thread::sleep(Duration::from_millis(1));
    }
    panic!("{prefix}* never appeared");
}

#[test]
fn ctrl_c_removes_the_scratch_file_staging_folder_and_lock() {
    let ws = tempfile::tempdir().unwrap();
    let dir = ws.path();
    write_table(&dir.join("t.csv"));
    fs::write(
        dir.join("r.toml"),
        "format = 1\n[input]\nfile = \"t.csv\"\nid = \"id\"\ngroups = [\"site\"]\n[components]\nkeep = 3\n[output]\nfolder = \"out\"\n",
    )
    .unwrap();

    // During the passes, with the values in a scratch file.
    let args = [
        "run",
        "r.toml",
        "--engine",
        "passes",
        "--memory-budget",
        "1MB",
    ];
    let mut child = start(dir, &args);
    assert!(
        interrupt_when(&mut child, dir, ".out.sextant-scratch-"),
        "the run ended before its scratch file was seen"
    );
    let out = child.wait_with_output().unwrap();
    assert_eq!(out.status.code(), Some(130), "{:?}", out);
    assert!(String::from_utf8_lossy(&out.stderr).contains("interrupted"));
    assert_eq!(common::hidden_entries(dir), Vec::<String>::new());
    assert!(
        !dir.join("out").exists(),
        "no results folder from an interrupted run"
    );

    // While the results are being written, with earlier results in place.
    let done = sextant(dir, &args);
    assert_eq!(done.code, 0, "{}", done.stderr);
    let before = fs::read(dir.join("out/manifest.json")).unwrap();
    let mut child = start(dir, &[&args[..], &["--replace"]].concat());
    assert!(
        interrupt_when(&mut child, dir, ".out.sextant-new-"),
        "the run ended before its staging folder was seen"
    );
    let out = child.wait_with_output().unwrap();
    assert_eq!(out.status.code(), Some(130), "{:?}", out);
    assert_eq!(common::hidden_entries(dir), Vec::<String>::new());
    assert_eq!(
        fs::read(dir.join("out/manifest.json")).unwrap(),
        before,
        "the earlier results are untouched"
    );
    let verify = sextant(dir, &["verify", "out"]);
    assert_eq!(verify.code, 0, "{}{}", verify.stdout, verify.stderr);
}

#[test]
fn ctrl_c_during_new_leaves_no_recipe_behind() {
    let ws = tempfile::tempdir().unwrap();
    let dir = ws.path();
    write_table(&dir.join("t.csv"));
    // `new` checks its starter recipe against the whole table before renaming
    // it into place; the temporary recipe is the moment to interrupt.
    let mut child = start(dir, &["new", "t.csv", "-o", "starter.toml"]);
    assert!(
        interrupt_when(&mut child, dir, ".sextant-new-"),
        "`new` ended before its temporary recipe was seen"
    );
    let out = child.wait_with_output().unwrap();
    assert_eq!(out.status.code(), Some(130), "{:?}", out);
    assert_eq!(common::hidden_entries(dir), Vec::<String>::new());
    assert!(!dir.join("starter.toml").exists());
}

fn passes_recipe(dir: &Path) {
    write_table(&dir.join("t.csv"));
    fs::write(
        dir.join("r.toml"),
        "format = 1\n[input]\nfile = \"t.csv\"\nid = \"id\"\ngroups = [\"site\"]\n[components]\nkeep = 3\n[output]\nfolder = \"out\"\n",
    )
    .unwrap();
}

const PASSES: [&str; 7] = [
    "run",
    "r.toml",
    "--engine",
    "passes",
    "--memory-budget",
    "1MB",
    "--replace",
];

/// Regression: after `kill -9` the hidden scratch files and staging folder
/// stayed forever beside the results folder.
#[test]
fn after_kill_9_the_next_run_removes_what_was_left_and_says_so() {
    let ws = tempfile::tempdir().unwrap();
    let dir = ws.path();
    passes_recipe(dir);
    let done = sextant(dir, &PASSES);
    assert_eq!(done.code, 0, "{}", done.stderr);
    let before = fs::read(dir.join("out/manifest.json")).unwrap();

    // Killed during the passes: a scratch file and the lock file stay.
    let mut child = start(dir, &PASSES);
    assert!(
        signal_when(&mut child, dir, ".out.sextant-scratch-", "-KILL"),
        "the run ended before its scratch file was seen"
    );
    child.wait().unwrap();
    let left = common::hidden_entries(dir);
    let scratch: Vec<&String> = left.iter().filter(|n| n.contains("-scratch-")).collect();
    assert!(
        !scratch.is_empty(),
        "a killed run leaves its scratch file: {left:?}"
    );
    assert_eq!(
        fs::read(dir.join("out/manifest.json")).unwrap(),
        before,
        "the earlier results are untouched"
    );
    let next = sextant(dir, &PASSES);
    assert_eq!(next.code, 0, "{}", next.stderr);
    assert!(
        next.stdout.contains("removed") && next.stdout.contains(scratch[0].as_str()),
        "{}",
        next.stdout
    );
    assert_eq!(common::hidden_entries(dir), Vec::<String>::new());

    // Killed while writing the results: the staging folder stays; `verify`
    // removes it and the results still verify.
    let mut child = start(dir, &PASSES);
    assert!(
        signal_when(&mut child, dir, ".out.sextant-new-", "-KILL"),
        "the run ended before its staging folder was seen"
    );
    child.wait().unwrap();
    let left = common::hidden_entries(dir);
    assert!(
        left.iter().any(|n| n.starts_with(".out.sextant-new-")),
        "{left:?}"
    );
    let verify = sextant(dir, &["verify", "out"]);
    assert_eq!(verify.code, 0, "{}{}", verify.stdout, verify.stderr);
    assert!(
        verify.stdout.contains("removed") && verify.stdout.contains(".out.sextant-new-"),
        "{}",
        verify.stdout
    );
    assert_eq!(common::hidden_entries(dir), Vec::<String>::new());
    let next = sextant(dir, &PASSES);
    assert_eq!(next.code, 0, "{}", next.stderr);
    assert_eq!(common::hidden_entries(dir), Vec::<String>::new());
}

#[test]
fn a_second_run_is_refused_while_the_first_holds_the_lock() {
    let ws = tempfile::tempdir().unwrap();
    let dir = ws.path();
    passes_recipe(dir);
    let mut first = start(dir, &PASSES);
    // The lock is taken before the first scratch file is made.
    let deadline = Instant::now() + Duration::from_secs(60);
    while !common::hidden_entries(dir)
        .iter()
        .any(|n| n.starts_with(".out.sextant-scratch-"))
    {
        assert!(Instant::now() < deadline, "no scratch file appeared");
        assert!(
            first.try_wait().unwrap().is_none(),
            "the first run ended early"
        );
        std::thread::sleep(Duration::from_millis(1));
    }
    let second = sextant(dir, &PASSES);
    assert_eq!(second.code, 2, "{}{}", second.stdout, second.stderr);
    let host = fs::read_to_string("/proc/sys/kernel/hostname").unwrap_or_default();
    assert!(
        second.stderr.contains(&format!(
            "another sextant run (process {} on host `{}`, started ",
            first.id(),
            host.trim()
        )) && second.stderr.contains("is writing this folder"),
        "{}",
        second.stderr
    );
    // The refused run removed nothing of the first's.
    assert!(
        common::hidden_entries(dir)
            .iter()
            .any(|n| n.starts_with(".out.sextant-scratch-"))
            || first.try_wait().unwrap().is_some()
    );
    let out = first.wait_with_output().unwrap();
    assert_eq!(out.status.code(), Some(0), "{:?}", out);
    assert_eq!(common::hidden_entries(dir), Vec::<String>::new());
}

/// The top-level help listed exit codes 0, 1 and 2 but not 130, which every
/// interrupted command returns; the README's install line was missing too.
#[test]
fn help_and_readme_name_exit_130_and_the_install_command() {
    let out = Command::new(env!("CARGO_BIN_EXE_sextant"))
        .arg("--help")
        .output()
        .unwrap();
    let help = String::from_utf8_lossy(&out.stdout);
    assert!(out.status.success());
    assert!(
        help.contains("130 interrupted"),
        "help lacks exit 130:\n{help}"
    );
    let readme =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("README.md")).unwrap();
    assert!(readme.contains("cargo install --path . --locked"));
    assert!(readme.contains("**130**"));
}
