//! Scoring a new batch as a quality engineer does, run as the real binary on
//! temporary copies of the demo: reruns into the same folder, the batch's
//! report.html (control chart, score plot, flagged rows, provenance), and
//! batches written with another delimiter or decimal mark.

use std::fs;
use std::os::unix::fs::MetadataExt;
use std::path::Path;

mod common;
use common::{sextant, workspace};

const APRIL: &str = "demo-data/dairy-lab-2026-04.csv";
const MARCH: &str = "demo-data/dairy-lab-2026-03.csv";
const FOLDER: &str = "results/dairy-march-apply-dairy-lab-2026-04";

/// A workspace with the demo analysed.
fn analysed() -> tempfile::TempDir {
    let ws = workspace();
    let out = sextant(ws.path(), &["run", "recipes/dairy-march.toml"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    ws
}

fn apply(ws: &Path, args: &[&str]) -> common::Out {
    let mut all = vec!["apply", "results/dairy-march"];
    all.extend_from_slice(args);
    sextant(ws, &all)
}

fn manifest(folder: &Path) -> serde_json::Value {
    serde_json::from_slice(&fs::read(folder.join("manifest.json")).unwrap()).unwrap()
}

/// Every `<svg>…</svg>` element of a page, each parsed as XML.
fn svg_elements(html: &str) -> Vec<String> {
    let mut found = Vec::new();
    let mut rest = html;
    while let Some(start) = rest.find("<svg") {
        let end = rest[start..].find("</svg>").expect("an <svg> is closed") + start + 6;
        found.push(rest[start..end].to_string());
        rest = &rest[end..];
    }
    found
}

/// The section of the page with this id.
fn section<'a>(html: &'a str, id: &str) -> &'a str {
    let start = html
        .find(&format!("<section id=\"{id}\">"))
        .unwrap_or_else(|| panic!("no section {id}"));
    let end = html[start..].find("</section>").unwrap() + start;
    &html[start..end]
}

#[test]
fn apply_twice_with_the_same_model_and_table_replaces_its_own_folder() {
    // The second apply was refused with a message naming `output.folder`, an
    // option of recipes that apply does not have.
    let ws = analysed();
    let first = apply(ws.path(), &[APRIL]);
    assert_eq!(first.code, 0, "{}", first.stderr);
    let folder = ws.path().join(FOLDER);
    let before = fs::metadata(&folder).unwrap().ino();
    let second = apply(ws.path(), &[APRIL]);
    assert_eq!(second.code, 0, "{}", second.stderr);
    assert_ne!(
        fs::metadata(&folder).unwrap().ino(),
        before,
        "a new folder is moved into place"
    );
    assert_eq!(sextant(ws.path(), &["verify", FOLDER]).code, 0);
    assert!(common::hidden_entries(&ws.path().join("results")).is_empty());
}

#[test]
fn another_table_at_the_same_folder_is_refused_naming_out_and_nothing_is_deleted() {
    let ws = analysed();
    assert_eq!(apply(ws.path(), &[APRIL, "--out", "scored"]).code, 0);
    let kept = fs::read(ws.path().join("scored/scores.csv")).unwrap();
    let out = apply(ws.path(), &[MARCH, "--out", "scored"]);
    assert_eq!(out.code, 2, "{}", out.stderr);
    assert!(
        out.stderr.contains("different model, table") && out.stderr.contains("--out"),
        "{}",
        out.stderr
    );
    assert!(!out.stderr.contains("output.folder"), "{}", out.stderr);
    assert_eq!(fs::read(ws.path().join("scored/scores.csv")).unwrap(), kept);
    // With --replace it may.
    assert_eq!(
        apply(ws.path(), &[MARCH, "--out", "scored", "--replace"]).code,
        0
    );
}

#[test]
fn apply_never_replaces_the_results_of_a_run_even_with_replace() {
    // --replace let apply delete a run's results folder given as --out.
    let ws = analysed();
    let run = sextant(ws.path(), &["run", "recipes/dairy-march-pareto.toml"]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let other = ws.path().join("results/dairy-march-pareto");
    let model = fs::read(other.join("model.json")).unwrap();
    let out = apply(
        ws.path(),
        &[APRIL, "--out", "results/dairy-march-pareto", "--replace"],
    );
    assert_eq!(out.code, 2, "{}", out.stderr);
    assert!(out.stderr.contains("results of a run"), "{}", out.stderr);
    assert_eq!(fs::read(other.join("model.json")).unwrap(), model);
}

#[test]
fn the_batch_report_charts_both_statistics_with_every_limit_and_lists_the_flagged_rows() {
    let ws = analysed();
    let out = apply(ws.path(), &[APRIL]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    let folder = ws.path().join(FOLDER);
    let bytes = fs::read(folder.join("report.html")).expect("report.html is written");
    let html = String::from_utf8(bytes.clone()).unwrap();
    let m = manifest(&folder);

    // Listed and hashed like every output.
    let listed = m["outputs"]
        .as_array()
        .unwrap()
        .iter()
        .find(|o| o["path"] == "report.html")
        .expect("the manifest lists report.html");
    assert_eq!(
        listed["sha256"],
        sextant::outputs::hashing::sha256_hex(&bytes)
    );
    // The manifest, with how the batch was read, keeps to the published schema.
    let schema: serde_json::Value = serde_json::from_str(
        &fs::read_to_string(
            Path::new(env!("CARGO_MANIFEST_DIR")).join("src/schemas/manifest.schema.json"),
        )
        .unwrap(),
    )
    .unwrap();
    let validator = jsonschema::draft202012::new(&schema).unwrap();
    let problems: Vec<String> = validator.iter_errors(&m).map(|e| e.to_string()).collect();
    assert!(problems.is_empty(), "{problems:?}");
    assert_eq!(m["batch"]["delimiter"], ",");

    // Self-contained: nothing is loaded.
    for loads in ["<script", "<link", "src=", "href=\"http", "url("] {
        assert!(!html.contains(loads), "the page has {loads}");
    }

    // The control chart: well-formed SVG, T² and SPE series of all 60 rows,
    // a limit line per statistic at 95 % and 99 %.
    let svgs = svg_elements(&html);
    assert_eq!(svgs.len(), 2, "control chart and score plot");
    let chart = roxmltree::Document::parse(&svgs[0]).unwrap_or_else(|e| panic!("{e}"));
    let class = |n: &roxmltree::Node, c: &str| {
        n.attribute("class")
            .is_some_and(|v| v.split(' ').any(|x| x == c))
    };
    for (series, limit) in [("control-t2", "t2-limit"), ("control-spe", "spe-limit")] {
        let g = chart
            .descendants()
            .find(|n| class(n, series))
            .unwrap_or_else(|| panic!("no {series}"));
        let levels: Vec<&str> = g
            .descendants()
            .filter(|n| class(n, limit))
            .map(|n| n.attribute("data-confidence").unwrap())
            .collect();
        assert_eq!(levels, ["0.95", "0.99"], "{series}");
        let line = g.descendants().find(|n| class(n, "series")).unwrap();
        let points = line.attribute("points").unwrap().split(' ').count();
        assert_eq!(points, 60, "{series}: one point per new row");
    }
    // The score plot: the 400 training rows muted, the 60 new rows on top.
    let plot = roxmltree::Document::parse(&svgs[1]).unwrap_or_else(|e| panic!("{e}"));
    let count_in = |c: &str| {
        plot.descendants()
            .find(|n| class(n, c))
            .map_or(0, |g| g.children().filter(|n| n.is_element()).count())
    };
    assert_eq!(count_in("training"), 400);
    assert_eq!(count_in("new-rows"), 60);
    let labels: Vec<String> = plot
        .descendants()
        .filter(|n| class(n, "labels"))
        .flat_map(|g| g.descendants().filter_map(|t| t.text()).map(String::from))
        .collect();
    // demo-data/README.md: M-0427 and M-0451 in the April batch are watered.
    for id in ["M-0427", "M-0451"] {
        assert!(labels.iter().any(|l| l == id), "{id} labelled: {labels:?}");
    }

    // The rows above a limit with their largest contributions: a watered
    // sample freezes at a higher point.
    let flagged = section(&html, "flagged");
    for id in ["M-0427", "M-0451"] {
        let at = flagged
            .find(id)
            .unwrap_or_else(|| panic!("{id} not listed"));
        let row = &flagged[at..at + flagged[at..].find("</tr>").unwrap()];
        assert!(row.contains("freezing_point_mdegc"), "{row}");
    }
    // The fills and the provenance: the model's and the batch's SHA-256.
    assert!(section(&html, "fills").contains("<table"));
    let provenance = section(&html, "provenance");
    assert!(provenance.contains(m["model"]["sha256"].as_str().unwrap()));
    assert!(provenance.contains(m["inputs"][0]["sha256"].as_str().unwrap()));

    // Same model, same batch: the same bytes.
    assert_eq!(apply(ws.path(), &[APRIL]).code, 0);
    assert_eq!(fs::read(folder.join("report.html")).unwrap(), bytes);
}

#[test]
fn the_control_chart_follows_an_order_column() {
    let ws = analysed();
    // The rows reversed, with a column giving their original position.
    let text = fs::read_to_string(ws.path().join(APRIL)).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    let mut reversed = vec![format!("{},seq", lines[0])];
    for (k, line) in lines.iter().enumerate().skip(1).rev() {
        reversed.push(format!("{line},{k}"));
    }
    fs::write(
        ws.path().join("demo-data/reversed.csv"),
        reversed.join("\n") + "\n",
    )
    .unwrap();
    let chart = |folder: &str| {
        let html = fs::read_to_string(ws.path().join(folder).join("report.html")).unwrap();
        let svg = svg_elements(&html).remove(0);
        let doc = roxmltree::Document::parse(&svg).unwrap();
        let series: Vec<String> = doc
            .descendants()
            .filter(|n| n.attribute("class") == Some("series"))
            .map(|n| n.attribute("points").unwrap().to_string())
            .collect();
        (html, series)
    };
    assert_eq!(apply(ws.path(), &[APRIL, "--out", "a"]).code, 0);
    for (args, folder) in [(vec![], "b"), (vec!["--order", "seq"], "c")] {
        let mut all = vec!["demo-data/reversed.csv", "--out", folder];
        all.extend(args);
        let out = apply(ws.path(), &all);
        assert_eq!(out.code, 0, "{}", out.stderr);
    }
    let (_, in_file_order) = chart("a");
    let (_, reversed_order) = chart("b");
    let (html, by_seq) = chart("c");
    assert_eq!(in_file_order.len(), 2);
    assert_ne!(reversed_order, in_file_order);
    assert_eq!(by_seq, in_file_order, "ordered by seq, the original order");
    assert!(html.contains("ordered by the column <code>seq</code>"));
    let missing = apply(ws.path(), &[APRIL, "--out", "d", "--order", "when"]);
    assert_eq!(missing.code, 2);
    assert!(
        missing
            .stderr
            .contains("the order column `when` is not in the table's header"),
        "{}",
        missing.stderr
    );
    assert!(!ws.path().join("d").exists());
}

/// The April batch written with `;` between fields, decimal commas when
/// `comma`, and a quoted note holding both marks.
fn european_twin(ws: &Path, name: &str, comma: bool) {
    let text = fs::read_to_string(ws.join(APRIL)).unwrap();
    let mut out = String::new();
    for (i, line) in text.lines().enumerate() {
        let cells: Vec<String> = line
            .split(',')
            .map(|c| {
                if comma && c.parse::<f64>().is_ok() {
                    c.replace('.', ",")
                } else {
                    c.to_string()
                }
            })
            .collect();
        let note = if i == 0 {
            "note"
        } else {
            "\"checked; 2,5 ml\""
        };
        out.push_str(&format!("{};{note}\n", cells.join(";")));
    }
    fs::write(ws.join(name), out).unwrap();
}

#[test]
fn a_semicolon_batch_scores_as_its_comma_twin() {
    let ws = analysed();
    european_twin(ws.path(), "demo-data/semi.csv", false);
    european_twin(ws.path(), "demo-data/semi-comma.csv", true);
    assert_eq!(apply(ws.path(), &[APRIL, "--out", "plain"]).code, 0);
    let plain = fs::read(ws.path().join("plain/scores.csv")).unwrap();
    for (table, args, folder) in [
        ("demo-data/semi.csv", vec!["--delimiter", ";"], "given"),
        ("demo-data/semi.csv", vec![], "found"),
        (
            "demo-data/semi-comma.csv",
            vec!["--delimiter", ";", "--decimal", ","],
            "comma-given",
        ),
        ("demo-data/semi-comma.csv", vec![], "comma-found"),
    ] {
        let mut all = vec![table, "--out", folder];
        all.extend(args.iter());
        let out = apply(ws.path(), &all);
        assert_eq!(out.code, 0, "{folder}: {}", out.stderr);
        assert_eq!(
            fs::read(ws.path().join(folder).join("scores.csv")).unwrap(),
            plain,
            "{folder}"
        );
        if args.is_empty() {
            assert!(out.stdout.contains("delimiter `;` found"), "{}", out.stdout);
        }
        if folder == "comma-found" {
            assert!(out.stdout.contains("decimal commas"), "{}", out.stdout);
        }
        let m = manifest(&ws.path().join(folder));
        assert_eq!(m["batch"]["delimiter"], ";");
    }
}

#[test]
fn a_header_without_the_models_features_says_the_delimiter_may_be_wrong() {
    let ws = analysed();
    european_twin(ws.path(), "demo-data/semi.csv", false);
    let out = apply(
        ws.path(),
        &["demo-data/semi.csv", "--delimiter", ",", "--out", "x"],
    );
    assert_eq!(out.code, 2, "{}", out.stderr);
    assert!(
        out.stderr.contains("none of the model's 17 features")
            && out.stderr.contains("delimiter may be wrong")
            && out
                .stderr
                .contains("1 field: `sample;collected;season;farm;"),
        "{}",
        out.stderr
    );
    assert!(!ws.path().join("x").exists());
    // A decimal point where commas were asked for names the cell.
    european_twin(ws.path(), "demo-data/semi-point.csv", false);
    let out = apply(
        ws.path(),
        &["demo-data/semi-point.csv", "--decimal", ",", "--out", "x"],
    );
    assert_eq!(out.code, 2, "{}", out.stderr);
    assert!(
        out.stderr.contains(":2: column `") && out.stderr.contains("decimal mark `,`"),
        "{}",
        out.stderr
    );
}

#[test]
fn without_trusted_training_scores_only_the_new_rows_are_drawn() {
    let ws = analysed();
    let scores = ws.path().join("results/dairy-march/scores.csv");
    let mut text = fs::read_to_string(&scores).unwrap();
    text.push('\n');
    fs::write(&scores, text).unwrap();
    let out = apply(ws.path(), &[APRIL, "--out", "x"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    let html = fs::read_to_string(ws.path().join("x/report.html")).unwrap();
    assert!(
        html.contains("Only the new rows are drawn: the training scores are not shown (the results&#39; scores.csv changed after the run)"),
        "{}",
        section(&html, "scores")
    );
    let plot = svg_elements(&html).remove(1);
    assert!(!plot.contains("class=\"training"));
}

/// Regression: a large batch drew every new row as a point over the training
/// cells, hiding them. Above 3,000 rows in all, every training and new row is
/// counted in exactly one density cell of its kind, and only the labelled
/// flagged rows are also drawn as points.
#[test]
fn a_large_batch_counts_every_row_in_the_density_and_draws_only_labelled_points() {
    let ws = analysed();
    let april = fs::read_to_string(ws.path().join(APRIL)).unwrap();
    let mut lines = april.lines();
    let mut text = format!("{}\n", lines.next().unwrap());
    let rows: Vec<&str> = lines.collect();
    for copy in 0..60 {
        for row in &rows {
            // A fresh sample id per copy; the values repeat.
            let (id, rest) = row.split_once(',').unwrap();
            text.push_str(&format!("{id}-{copy},{rest}\n"));
        }
    }
    fs::write(ws.path().join("big.csv"), text).unwrap();
    let out = apply(ws.path(), &["big.csv", "--out", "big"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    let html = fs::read_to_string(ws.path().join("big/report.html")).unwrap();
    let svgs = svg_elements(&html);
    let plot = roxmltree::Document::parse(&svgs[1]).unwrap_or_else(|e| panic!("{e}"));
    let counted = |category: &str| -> usize {
        plot.descendants()
            .filter(|n| n.attribute("data-category") == Some(category))
            .flat_map(|g| g.descendants())
            .filter_map(|n| n.attribute("data-n"))
            .map(|n| n.parse::<usize>().unwrap())
            .sum()
    };
    let scores = fs::read_to_string(ws.path().join("big/scores.csv")).unwrap();
    let scored = scores.lines().count() - 1;
    let flagged = scores.lines().skip(1).filter(|l| l.contains("yes")).count();
    assert_eq!(counted("training"), 400);
    assert_eq!(counted("new-within") + counted("new-above"), scored);
    assert!(flagged >= 60, "two watered samples per copy: {flagged}");
    let points = plot
        .descendants()
        .find(|n| n.attribute("class") == Some("new-rows"))
        .map_or(0, |g| g.children().filter(|n| n.is_element()).count());
    assert!(
        (1..=12).contains(&points),
        "{points} new rows drawn as points"
    );
}

/// Regression: a batch of one sample printed "1 rows, 1 scored", and a batch
/// with a header only said "0 usable rows that can be scored; at least 2 are
/// needed", though one row is enough to score.
#[test]
fn a_batch_of_one_row_is_scored_and_an_empty_one_says_one_row_is_enough() {
    let ws = analysed();
    let april = fs::read_to_string(ws.path().join(APRIL)).unwrap();
    let mut lines = april.lines();
    let header = lines.next().unwrap();
    fs::write(
        ws.path().join("one.csv"),
        format!("{header}\n{}\n", lines.next().unwrap()),
    )
    .unwrap();
    let out = apply(ws.path(), &["one.csv", "--out", "one"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    assert!(
        out.stdout.contains("one.csv: 1 row, 1 scored"),
        "{}",
        out.stdout
    );
    fs::write(ws.path().join("none.csv"), format!("{header}\n")).unwrap();
    let out = apply(ws.path(), &["none.csv", "--out", "none"]);
    assert_eq!(out.code, 2);
    assert!(
        out.stderr.contains("no row can be scored")
            && out.stderr.contains("one scorable row is enough"),
        "{}",
        out.stderr
    );
    assert!(!ws.path().join("none").exists());
}
