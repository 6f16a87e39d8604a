//! Moving finished results into place survives a kill or a failure at any
//! step: the commit's file-system steps (each flush, rename and removal) are
//! made to fail, or to stop dead as a killed process would, one at a time, and
//! at every step the results folder holds either the complete earlier results
//! or the complete new ones. Then taking the folder lock again puts back and
//! removes whatever was left, and the next commit succeeds with nothing left
//! beside the folder. Both with the atomic exchange and with the two-rename
//! way used where there is none; with and without earlier results.

use sextant::outputs::folder::{FaultPlan, Staging, write_folder};
use sextant::outputs::lock::lock;
use std::collections::BTreeMap;
use std::fs;
use std::io::Write;
use std::path::Path;

type Files = BTreeMap<String, Vec<u8>>;

fn files(list: &[(&str, &str)]) -> Files {
    list.iter()
        .map(|(n, b)| (n.to_string(), b.as_bytes().to_vec()))
        .collect()
}

/// The earlier results and the new ones: different names and different bytes,
/// so a mixture of the two shows.
fn old_results() -> Files {
    files(&[
        ("manifest.json", "{\"old\": true}\n"),
        ("scores.csv", "row,pc1\n1,0.5\n"),
        ("plots/scree.svg", "<svg>old</svg>"),
        ("only-old.csv", "a\n1\n"),
    ])
}

fn new_results() -> Files {
    files(&[
        ("manifest.json", "{\"new\": true}\n"),
        ("scores.csv", "row,pc1,pc2\n1,0.25,0.75\n2,1,2\n"),
        ("plots/scree.svg", "<svg>new</svg>"),
        ("plots/scores.svg", "<svg>scores</svg>"),
        ("only-new.csv", "b\n2\n"),
    ])
}

/// Every file under `dir` with its bytes; `None` if `dir` does not exist.
fn contents(dir: &Path) -> Option<Files> {
    fn walk(root: &Path, dir: &Path, out: &mut Files) {
        for entry in fs::read_dir(dir).unwrap() {
            let path = entry.unwrap().path();
            if path.is_dir() {
                walk(root, &path, out);
            } else {
                let name = path.strip_prefix(root).unwrap().to_string_lossy();
                out.insert(name.replace('\\', "/"), fs::read(&path).unwrap());
            }
        }
    }
    if !dir.exists() {
        return None;
    }
    let mut out = Files::new();
    walk(dir, dir, &mut out);
    Some(out)
}

/// Names in `dir` other than the results folder.
fn others(dir: &Path) -> Vec<String> {
    let mut names: Vec<String> = fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n != "out")
        .collect();
    names.sort();
    names
}

/// Stages the new results: the small files written whole, the scores streamed
/// through a file the caller writes (as `run` does with large tables).
fn stage_new(target: &Path) -> Staging {
    let staging = Staging::new(target).unwrap();
    for (name, bytes) in new_results() {
        if name == "scores.csv" {
            let (_, mut file) = staging.create(&name).unwrap();
            file.write_all(&bytes).unwrap();
        } else {
            staging.write(&name, &bytes).unwrap();
        }
    }
    staging
}

fn name_of(existing: bool, exchange: bool, abort: bool, k: usize) -> String {
    format!(
        "{} at step {k}, {} earlier results, {}",
        if abort { "stopped dead" } else { "failed" },
        if existing { "with" } else { "without" },
        if exchange { "exchange" } else { "two renames" }
    )
}

/// One commit with step `k` faulty; false once `k` is past the last step.
fn commit_with_fault_at(k: usize, existing: bool, exchange: bool, abort: bool) -> bool {
    let case = name_of(existing, exchange, abort, k);
    let ws = tempfile::tempdir().unwrap();
    let target = ws.path().join("out");
    let old = existing.then(|| {
        let list: Vec<(String, Vec<u8>)> = old_results().into_iter().collect();
        write_folder(&target, &list).unwrap();
        old_results()
    });
    let held = lock(&target).unwrap();
    assert_eq!(held.notes, Vec::<String>::new(), "{case}");
    let staging = stage_new(&target);
    let mut plan = if abort {
        FaultPlan::abort_at(k)
    } else {
        FaultPlan::fail_at(k)
    };
    if !exchange {
        plan = plan.without_exchange();
    }
    let result = staging.commit_with(&mut plan);
    if !plan.fired() {
        assert!(result.is_ok(), "{case}: {result:?}");
        assert_eq!(contents(&target), Some(new_results()), "{case}");
        drop(held);
        assert_eq!(others(ws.path()), Vec::<String>::new(), "{case}");
        return false;
    }
    if abort {
        // The process is dead: its lock is released, its file stays.
        held.abandon();
    } else {
        drop(held);
    }

    // Right after the fault: the complete old results or the complete new.
    let now = contents(&target);
    let whole = now == Some(new_results()) || now == old;
    if exchange && existing {
        // With the exchange the folder is never missing, not even for a moment.
        assert!(whole, "{case}: {now:?}");
    } else {
        // The two renames leave a moment without it, which the next lock holder
        // repairs (below).
        assert!(whole || now.is_none(), "{case}: {now:?}");
    }
    if !abort && result.is_ok() {
        assert_eq!(now, Some(new_results()), "{case}: a commit that succeeded");
    }
    if !abort && result.is_err() && now != Some(new_results()) {
        // A failed commit undoes itself: nothing is left to repair.
        assert_eq!(now, old, "{case}");
    }

    // The next lock holder repairs and removes what was left.
    let left = others(ws.path());
    let again = lock(&target).unwrap();
    let repaired = contents(&target);
    assert!(
        repaired == Some(new_results()) || repaired == old,
        "{case}: {repaired:?}"
    );
    if now.is_none() && existing {
        assert_eq!(repaired, old, "{case}: the earlier results are put back");
        assert!(
            again
                .notes
                .iter()
                .any(|n| n.contains("put the earlier results back")),
            "{case}: {:?}",
            again.notes
        );
    }
    let debris: Vec<&String> = left
        .iter()
        .filter(|n| !n.ends_with(".sextant-lock"))
        .collect();
    assert_eq!(
        again.notes.len(),
        debris.len(),
        "{case}: one note for each entry left: {left:?} {:?}",
        again.notes
    );
    assert_eq!(
        others(ws.path()),
        vec![".out.sextant-lock".to_string()],
        "{case}: only the lock is left while held"
    );

    // And the next commit succeeds, leaving nothing beside the folder.
    stage_new(&target).commit().unwrap();
    assert_eq!(contents(&target), Some(new_results()), "{case}");
    drop(again);
    assert_eq!(others(ws.path()), Vec::<String>::new(), "{case}");
    true
}

fn every_step(existing: bool, exchange: bool) {
    for abort in [false, true] {
        let mut k = 1;
        while commit_with_fault_at(k, existing, exchange, abort) {
            k += 1;
        }
        // Five files and two folders to flush, a rename (two without the
        // exchange), the parent's flush, and over earlier results their
        // rename and removal: a plan that fired less often proves less.
        let least = match (existing, exchange) {
            (false, _) => 9,
            (true, true) => 11,
            (true, false) => 12,
        };
        assert_eq!(k - 1, least, "the commit's steps");
    }
}

#[test]
fn a_fault_at_any_step_of_replacing_results_leaves_old_or_new_with_exchange() {
    every_step(true, true);
}

#[test]
fn a_fault_at_any_step_of_replacing_results_leaves_old_or_new_with_two_renames() {
    every_step(true, false);
}

#[test]
fn a_fault_at_any_step_of_a_first_commit_leaves_nothing_or_new_results() {
    every_step(false, true);
    every_step(false, false);
}

/// Regression: a kill between the two renames of a commit left no results
/// folder at all, the earlier one hidden under a temporary name.
#[test]
fn earlier_results_moved_aside_by_a_killed_run_are_put_back() {
    let ws = tempfile::tempdir().unwrap();
    let target = ws.path().join("out");
    let list: Vec<(String, Vec<u8>)> = old_results().into_iter().collect();
    write_folder(&target, &list).unwrap();
    // The state a killed commit leaves: the old folder aside, the new one staged.
    fs::rename(&target, ws.path().join(".out.sextant-old-99-0")).unwrap();
    fs::create_dir(ws.path().join(".out.sextant-new-abc")).unwrap();
    let held = lock(&target).unwrap();
    assert_eq!(contents(&target), Some(old_results()));
    assert_eq!(held.notes.len(), 2, "{:?}", held.notes);
    drop(held);
    assert_eq!(others(ws.path()), Vec::<String>::new());
}
