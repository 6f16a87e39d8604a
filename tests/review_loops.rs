//! The review and rerun loops as a reviewer and an auditor meet them: `diff`
//! field by field, with exit codes, from git revisions and as Markdown; `run`
//! after `pin`; `verify --rerun` on a changed pinned input; and the digests
//! `run` prints against the one the report shows. Each test runs the real
//! binary on a temporary copy of the shipped recipes and demo data.

use std::fs;
use std::path::Path;
use std::process::Command;

mod common;
use common::{Out, sextant, workspace};

/// A copy of the demo recipe as `recipes/NAME.toml` with `from` replaced by `to`.
fn variant(ws: &Path, name: &str, from: &str, to: &str) {
    let text = fs::read_to_string(ws.join("recipes/dairy-march.toml")).unwrap();
    assert!(text.contains(from), "the demo recipe lacks {from:?}");
    fs::write(
        ws.join(format!("recipes/{name}.toml")),
        text.replacen(from, to, 1),
    )
    .unwrap();
}

/// The lines of the text diff's settings section.
fn setting_lines(out: &Out) -> Vec<String> {
    let section = out
        .stdout
        .split("Recipe settings in effect that differ")
        .nth(1)
        .unwrap_or_else(|| panic!("no settings section:\n{}", out.stdout));
    section
        .lines()
        .skip(1)
        .take_while(|l| !l.is_empty())
        .map(|l| l.trim().to_string())
        .collect()
}

/// Bug: changing only `ellipse` in one `[[plot]]` printed the whole plot
/// array as a JSON cell of about 1,000 characters on each side.
#[test]
fn a_one_field_plot_change_diffs_to_one_line() {
    let ws = workspace();
    variant(ws.path(), "b", "ellipse = 0.95", "ellipse = 0.99");
    let out = sextant(
        ws.path(),
        &["diff", "recipes/dairy-march.toml", "recipes/b.toml"],
    );
    assert_eq!(out.code, 0, "{}", out.stderr);
    assert_eq!(
        setting_lines(&out),
        ["plot[2].ellipse  0.95 → 0.99"],
        "{}",
        out.stdout
    );
    assert!(!out.stdout.contains("{\""), "a JSON cell:\n{}", out.stdout);
}

/// Bug: changing `components.keep` under a mean fill listed
/// `missing.iterative_pca.components` too, a setting with no effect there.
#[test]
fn settings_without_effect_are_not_listed() {
    let ws = workspace();
    variant(ws.path(), "b", "keep = \"broken-stick\"", "keep = 4");
    let out = sextant(
        ws.path(),
        &["diff", "recipes/dairy-march.toml", "recipes/b.toml"],
    );
    assert_eq!(out.code, 0, "{}", out.stderr);
    assert_eq!(
        setting_lines(&out),
        ["components.keep  broken-stick → 4"],
        "{}",
        out.stdout
    );
    assert!(!out.stdout.contains("iterative_pca"), "{}", out.stdout);
}

/// Bug: `diff` exited 0 whatever it found, so CI could not gate on it.
#[test]
fn diff_exit_codes_say_same_different_or_invalid() {
    let ws = workspace();
    let w = ws.path();
    variant(w, "b", "method = \"unit-variance\"", "method = \"pareto\"");
    let same = sextant(
        w,
        &[
            "diff",
            "--exit-code",
            "recipes/dairy-march.toml",
            "recipes/dairy-march.toml",
        ],
    );
    assert_eq!(same.code, 0, "{}{}", same.stdout, same.stderr);
    assert!(same.stdout.contains("the same analysis"), "{}", same.stdout);
    let different = sextant(
        w,
        &[
            "diff",
            "--exit-code",
            "recipes/dairy-march.toml",
            "recipes/b.toml",
        ],
    );
    assert_eq!(
        different.code, 1,
        "{}{}",
        different.stdout, different.stderr
    );
    assert!(
        different.stdout.contains("the analyses differ"),
        "{}",
        different.stdout
    );
    // Without --exit-code a comparison made is a success.
    let plain = sextant(w, &["diff", "recipes/dairy-march.toml", "recipes/b.toml"]);
    assert_eq!(plain.code, 0, "{}", plain.stderr);
    // The same analysis written to two folders is the same analysis.
    variant(
        w,
        "elsewhere",
        "../results/dairy-march",
        "../results/elsewhere",
    );
    for recipe in ["recipes/dairy-march.toml", "recipes/elsewhere.toml"] {
        assert_eq!(sextant(w, &["run", recipe]).code, 0);
    }
    let folders = sextant(
        w,
        &[
            "diff",
            "--exit-code",
            "results/dairy-march",
            "results/elsewhere",
        ],
    );
    assert_eq!(folders.code, 0, "{}{}", folders.stdout, folders.stderr);
    assert!(
        folders.stdout.contains("output.folder"),
        "{}",
        folders.stdout
    );
    // An invalid side keeps its own exit code.
    let invalid = sextant(
        w,
        &["diff", "--exit-code", "recipes/dairy-march.toml", "nowhere"],
    );
    assert_eq!(invalid.code, 2, "{}{}", invalid.stdout, invalid.stderr);
    // The help text documents them.
    let help = sextant(w, &["diff", "--help"]);
    assert!(
        help.stdout.contains("Exit codes") && help.stdout.contains("--exit-code"),
        "{}",
        help.stdout
    );
}

fn git(dir: &Path, args: &[&str]) {
    let out = Command::new("git")
        .args([
            "-c",
            "user.name=sextant tests",
            "-c",
            "user.email=tests@example.invalid",
            "-c",
            "commit.gpgsign=false",
        ])
        .args(args)
        .current_dir(dir)
        .output()
        .expect("git runs");
    assert!(
        out.status.success(),
        "git {args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
}

/// Bug: `diff` could not read a recipe from a git revision, so a reviewer
/// had to check the old version out by hand.
#[test]
fn diff_reads_a_recipe_from_a_git_revision() {
    let ws = workspace();
    let w = ws.path();
    git(w, &["init", "-q"]);
    git(w, &["add", "recipes", "demo-data"]);
    git(w, &["commit", "-q", "-m", "recipes and data"]);
    let recipe = w.join("recipes/dairy-march.toml");
    let text = fs::read_to_string(&recipe).unwrap();
    fs::write(
        &recipe,
        text.replacen("ellipse = 0.95", "ellipse = 0.99", 1),
    )
    .unwrap();

    let out = sextant(
        w,
        &[
            "diff",
            "--exit-code",
            "HEAD:recipes/dairy-march.toml",
            "recipes/dairy-march.toml",
        ],
    );
    assert_eq!(out.code, 1, "{}{}", out.stdout, out.stderr);
    assert!(
        out.stdout.starts_with("A: HEAD:recipes/dairy-march.toml"),
        "{}",
        out.stdout
    );
    assert_eq!(
        setting_lines(&out),
        ["plot[2].ellipse  0.95 → 0.99"],
        "{}",
        out.stdout
    );
    assert!(!out.stdout.contains("note"), "{}", out.stdout);

    // --rev, from the recipe's own folder: its relative input path still
    // starts from there.
    let out = sextant(
        &w.join("recipes"),
        &["diff", "--rev", "HEAD", "dairy-march.toml"],
    );
    assert_eq!(out.code, 0, "{}{}", out.stdout, out.stderr);
    assert_eq!(setting_lines(&out), ["plot[2].ellipse  0.95 → 0.99"]);

    // A revision that does not have the file: exit 2 with git's reason.
    let out = sextant(
        w,
        &["diff", "HEAD:recipes/none.toml", "recipes/dairy-march.toml"],
    );
    assert_eq!(out.code, 2, "{}{}", out.stdout, out.stderr);
    assert!(
        out.stderr.contains("HEAD:recipes/none.toml"),
        "{}",
        out.stderr
    );
}

/// Bug: a committed recipe whose input has since gone (never committed,
/// then renamed) could not be compared, and nothing said what was read.
#[test]
fn diff_from_git_says_what_it_read_when_the_old_input_is_gone() {
    let ws = workspace();
    let w = ws.path();
    git(w, &["init", "-q"]);
    git(w, &["add", "recipes"]);
    git(
        w,
        &[
            "commit",
            "-q",
            "-m",
            "recipes only; the data stays out of git",
        ],
    );
    fs::rename(
        w.join("demo-data/dairy-lab-2026-03.csv"),
        w.join("demo-data/march.csv"),
    )
    .unwrap();
    let recipe = w.join("recipes/dairy-march.toml");
    let text = fs::read_to_string(&recipe).unwrap();
    fs::write(&recipe, text.replace("dairy-lab-2026-03.csv", "march.csv")).unwrap();
    let out = sextant(
        w,
        &[
            "diff",
            "HEAD:recipes/dairy-march.toml",
            "recipes/dairy-march.toml",
        ],
    );
    assert_eq!(out.code, 0, "{}{}", out.stdout, out.stderr);
    let note = out
        .stdout
        .lines()
        .find(|l| l.starts_with("note (A)"))
        .unwrap_or_else(|| panic!("no note on side A:\n{}", out.stdout));
    assert!(
        note.contains("dairy-lab-2026-03.csv")
            && note.contains("no longer present")
            && note.contains("march.csv")
            && note.contains("instead"),
        "{note}"
    );
    assert_eq!(
        setting_lines(&out),
        ["input.file  ../demo-data/dairy-lab-2026-03.csv → ../demo-data/march.csv"],
        "{}",
        out.stdout
    );
}

/// Bug: the Markdown output had no headline, and put every section in full
/// into the comment.
#[test]
fn markdown_opens_with_a_parseable_headline_and_folds_the_details() {
    let ws = workspace();
    let out = sextant(
        ws.path(),
        &[
            "diff",
            "--format",
            "markdown",
            "recipes/dairy-march.toml",
            "recipes/dairy-march-pareto.toml",
        ],
    );
    assert_eq!(out.code, 0, "{}", out.stderr);
    let (head, details) = out
        .stdout
        .split_once("<details>")
        .unwrap_or_else(|| panic!("no collapsible block:\n{}", out.stdout));
    let headline: std::collections::BTreeMap<&str, &str> = head
        .lines()
        .filter_map(|l| l.strip_prefix("- **")?.split_once("**: "))
        .collect();
    for key in [
        "verdict",
        "kept components",
        "eigenvalues",
        "largest principal angle",
        "largest score change",
        "flagged rows",
    ] {
        assert!(headline.contains_key(key), "no {key}:\n{head}");
    }
    assert!(
        headline["verdict"].starts_with("the analyses differ"),
        "{head}"
    );
    assert!(
        headline["kept components"].contains("2 (broken-stick) → 3 (kaiser)"),
        "{head}"
    );
    let angle: f64 = headline["largest principal angle"]
        .split('°')
        .next()
        .unwrap()
        .parse()
        .unwrap_or_else(|_| panic!("{head}"));
    assert!(angle > 1.0 && angle <= 90.0, "{head}");
    assert!(
        headline["eigenvalues"].starts_with("PC1 ") && headline["eigenvalues"].contains(" → "),
        "{head}"
    );
    assert!(
        headline["flagged rows"].contains("entered") && headline["flagged rows"].contains("left"),
        "{head}"
    );
    // Every detail block has a summary and is closed.
    let blocks = out.stdout.matches("<details>").count();
    assert!(blocks >= 4, "{details}");
    assert_eq!(out.stdout.matches("<details><summary>").count(), blocks);
    assert_eq!(out.stdout.matches("</details>").count(), blocks);
    assert!(
        out.stdout
            .contains("| `scaling.method` | unit-variance | pareto |"),
        "{}",
        out.stdout
    );
}

/// Bug: after `sextant pin`, the next run said the folder "holds results of
/// a different recipe or input", though only the pin was new.
#[test]
fn a_run_after_pin_says_the_results_predate_the_pin() {
    let ws = workspace();
    let w = ws.path();
    assert_eq!(sextant(w, &["run", "recipes/dairy-march.toml"]).code, 0);
    assert_eq!(sextant(w, &["pin", "recipes/dairy-march.toml"]).code, 0);
    let out = sextant(w, &["run", "recipes/dairy-march.toml"]);
    assert_eq!(out.code, 2, "{}{}", out.stdout, out.stderr);
    assert!(
        out.stderr
            .contains("before `sextant pin` added input.sha256")
            && out.stderr.contains("--replace"),
        "{}",
        out.stderr
    );
    assert!(
        !out.stderr.contains("different recipe or input"),
        "{}",
        out.stderr
    );
    let out = sextant(w, &["run", "--replace", "recipes/dairy-march.toml"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    // A real change of the recipe keeps the general refusal.
    let recipe = w.join("recipes/dairy-march.toml");
    let text = fs::read_to_string(&recipe).unwrap();
    fs::write(&recipe, text.replacen("compute = 10", "compute = 9", 1)).unwrap();
    let out = sextant(w, &["run", "recipes/dairy-march.toml"]);
    assert_eq!(out.code, 2);
    assert!(
        out.stderr.contains("different recipe or input"),
        "{}",
        out.stderr
    );
}

/// Bug: `verify --rerun` of results whose pinned input changed said only that
/// "the recorded input is not the file that was analysed"; an audit must name
/// the input as changed, exit 1, and never suggest moving the pin.
#[test]
fn verify_rerun_on_a_changed_pinned_input_reports_it_changed() {
    let ws = workspace();
    let w = ws.path();
    assert_eq!(sextant(w, &["pin", "recipes/dairy-march.toml"]).code, 0);
    assert_eq!(sextant(w, &["run", "recipes/dairy-march.toml"]).code, 0);
    let data = w.join("demo-data/dairy-lab-2026-03.csv");
    let text = fs::read_to_string(&data).unwrap();
    fs::write(
        &data,
        text.replacen(
            "M-0001,Alder Hill,summer,2025-06-02,4.16",
            "M-0001,Alder Hill,summer,2025-06-02,4.17",
            1,
        ),
    )
    .unwrap();
    let out = sextant(w, &["verify", "--rerun", "results/dairy-march"]);
    assert_eq!(out.code, 1, "{}{}", out.stdout, out.stderr);
    let note = out
        .stdout
        .lines()
        .find(|l| l.contains("not rerun"))
        .unwrap_or_else(|| panic!("no rerun note:\n{}", out.stdout));
    assert!(
        note.contains("dairy-lab-2026-03.csv") && note.contains("changed"),
        "{note}"
    );
    let all = format!("{}{}", out.stdout, out.stderr);
    for advice in ["update the pin", "sextant pin", "input.sha256"] {
        assert!(
            !all.contains(advice),
            "advice about the pin in an audit:\n{all}"
        );
    }
}

/// The hex digest that follows `name ` in `text`.
fn digest_after<'a>(text: &'a str, name: &str) -> &'a str {
    let rest = text
        .split(name)
        .nth(1)
        .unwrap_or_else(|| panic!("no {name:?} in:\n{text}"));
    let hex = rest.get(..64).unwrap_or(rest);
    assert!(
        hex.len() == 64 && hex.chars().all(|c| c.is_ascii_hexdigit()),
        "{name}: {rest:.80}"
    );
    hex
}

/// Bug: the report's "results digest" and the digest `run` printed differed,
/// with nothing to say that they were two different digests.
#[test]
fn run_prints_the_results_digest_the_report_shows() {
    let ws = workspace();
    let w = ws.path();
    let out = sextant(w, &["run", "recipes/dairy-march.toml"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    let report = fs::read_to_string(w.join("results/dairy-march/report.html")).unwrap();
    let shown = report
        .split("results digest</th><td><code>")
        .nth(1)
        .and_then(|r| r.get(..64))
        .expect("a results digest in the report");
    assert_eq!(digest_after(&out.stdout, "results digest "), shown);
    assert!(
        report.contains("prints it under the same name"),
        "the report explains its digest"
    );
    let manifest: serde_json::Value =
        serde_json::from_slice(&fs::read(w.join("results/dairy-march/manifest.json")).unwrap())
            .unwrap();
    assert_eq!(
        digest_after(&out.stdout, "manifest digest "),
        manifest["digest"].as_str().unwrap()
    );
}
