//! The folder lock is the operating system's advisory lock on
//! `.<name>.sextant-lock`: a lock held by a live process refuses a run with a
//! message naming that process, and whatever text a lock file holds (empty,
//! garbled, a dead process's id) never blocks a run by itself.

#[allow(dead_code)] // not every shared helper is used here
mod common;

use common::sextant;
use std::fs;
use std::path::Path;

fn demo_copy() -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    let repo = Path::new(env!("CARGO_MANIFEST_DIR"));
    fs::copy(
        repo.join("demo-data/dairy-lab-2026-03.csv"),
        dir.path().join("data.csv"),
    )
    .unwrap();
    fs::write(
        dir.path().join("r.toml"),
        "format = 1\n[input]\nfile = \"data.csv\"\nid = \"sample\"\ngroups = [\"farm\"]\nexclude = [\"season\", \"collected\"]\n[output]\nfolder = \"out\"\n",
    )
    .unwrap();
    dir
}

/// Regression: a lock file left empty (a full disk while it was written) or
/// holding anything else blocked every later run until deleted by hand.
#[test]
fn a_lock_file_with_empty_or_garbled_text_does_not_block() {
    let dir = demo_copy();
    let lock = dir.path().join(".out.sextant-lock");
    for text in [
        &b""[..],
        b"\xff\xfe not a process \x00",
        b"1 some-other-host\n",
    ] {
        fs::write(&lock, text).unwrap();
        let out = sextant(dir.path(), &["run", "r.toml"]);
        assert_eq!(out.code, 0, "{:?}: {}", text, out.stderr);
        assert!(dir.path().join("out/manifest.json").exists());
        assert_eq!(
            common::hidden_entries(dir.path()),
            Vec::<String>::new(),
            "{text:?}"
        );
    }
}

/// Regression: a lock naming a process id that was reused by another program
/// blocked forever; now only a held lock blocks.
#[test]
fn a_lock_naming_a_live_process_that_holds_nothing_does_not_block() {
    let dir = demo_copy();
    let host = fs::read_to_string("/proc/sys/kernel/hostname").unwrap_or_default();
    // This test process is alive, but holds no lock.
    fs::write(
        dir.path().join(".out.sextant-lock"),
        format!("{} {}\n", std::process::id(), host.trim()),
    )
    .unwrap();
    let out = sextant(dir.path(), &["run", "r.toml"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    assert_eq!(common::hidden_entries(dir.path()), Vec::<String>::new());
}

#[test]
fn a_held_lock_refuses_the_run_and_names_its_holder() {
    let dir = demo_copy();
    let first = sextant(dir.path(), &["run", "r.toml"]);
    assert_eq!(first.code, 0, "{}", first.stderr);
    let before = fs::read(dir.path().join("out/scores.csv")).unwrap();
    // Hold the lock from here, as a running sextant would, with its text.
    let path = dir.path().join(".out.sextant-lock");
    let file = fs::OpenOptions::new()
        .read(true)
        .write(true)
        .create(true)
        .truncate(true)
        .open(&path)
        .unwrap();
    file.lock().unwrap();
    fs::write(&path, "4242 lab-host 2026-03-01T10:20:30Z\n").unwrap();
    let out = sextant(dir.path(), &["run", "r.toml"]);
    assert_eq!(out.code, 2, "{}{}", out.stdout, out.stderr);
    assert!(
        out.stderr.contains(
            "another sextant run (process 4242 on host `lab-host`, started 2026-03-01T10:20:30Z) is writing this folder"
        ),
        "{}",
        out.stderr
    );
    assert_eq!(
        fs::read(dir.path().join("out/scores.csv")).unwrap(),
        before,
        "earlier results intact"
    );
    assert!(path.exists(), "someone else's lock is left alone");
    // `verify` does not touch a folder that a run holds, and still verifies it.
    let verify = sextant(dir.path(), &["verify", "out"]);
    assert_eq!(verify.code, 0, "{}{}", verify.stdout, verify.stderr);
    // Once released, the next run takes it.
    drop(file);
    let out = sextant(dir.path(), &["run", "r.toml"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    assert_eq!(common::hidden_entries(dir.path()), Vec::<String>::new());
}
