//! The HTML report, through the real binary: it is written on every run and
//! listed in the manifest, it shows the summary, the variance table, the
//! loadings, the flagged rows, every figure inline, the cautions and the
//! provenance; it loads nothing from anywhere; it is the same bytes on every
//! run; and names from the data are shown as text, never as markup.

use std::collections::BTreeSet;
use std::fs;
use std::path::{Path, PathBuf};
use std::process::Command;

use serde_json::Value;
use sextant::outputs::build_views::cautions;
use sextant::outputs::hashing::sha256_hex;
use sextant::outputs::report::escape;

const BIN: &str = env!("CARGO_BIN_EXE_sextant");

fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// Copies recipes/ and demo-data/ into a fresh folder, so results land there.
fn workspace() -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    for sub in ["recipes", "demo-data"] {
        fs::create_dir(dir.path().join(sub)).unwrap();
        for entry in fs::read_dir(repo().join(sub)).unwrap() {
            let path = entry.unwrap().path();
            if path.is_file() {
                fs::copy(&path, dir.path().join(sub).join(path.file_name().unwrap())).unwrap();
            }
        }
    }
    dir
}

/// Runs the binary; panics with its messages unless it succeeds.
fn run(args: &[&str], cwd: &Path) {
    let out = Command::new(BIN)
        .args(args)
        .current_dir(cwd)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "sextant {args:?} failed:\n{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
}

/// `[[plot]]` tables of every kind, for a copy of the demo recipe.
const PLOTS: &str = r#"
[[plot]]
kind = "scree"

[[plot]]
kind = "scores"
x = 1
y = 2
color = "farm"

[[plot]]
kind = "scores"
x = 1
y = 3
file = "scores-1-3.svg"
title = "Scores on PC1 and PC3"

[[plot]]
kind = "loadings"
component = 1

[[plot]]
kind = "loadings"
x = 1
y = 2

[[plot]]
kind = "biplot"

[[plot]]
kind = "correlation-circle"

[[plot]]
kind = "outlier-map"
"#;

/// The number of `[[plot]]` tables of a recipe.
fn plot_count(recipe: &Path) -> usize {
    let value: toml::Value = toml::from_str(&fs::read_to_string(recipe).unwrap()).unwrap();
    value
        .get("plot")
        .and_then(|p| p.as_array())
        .map_or(0, |p| p.len())
}

/// Runs the demo recipe in a fresh copy; with `plots`, a copy of it whose
/// own `[[plot]]` tables are replaced by `plots`. Returns the workspace, the
/// recipe (relative to the workspace) and the results folder.
fn demo(plots: Option<&str>) -> (tempfile::TempDir, String, PathBuf) {
    let ws = workspace();
    let recipe = match plots {
        None => "recipes/dairy-march.toml".to_string(),
        Some(plots) => {
            let text = fs::read_to_string(ws.path().join("recipes/dairy-march.toml")).unwrap();
            let mut doc: toml_edit::DocumentMut = text.parse().unwrap();
            doc.remove("plot");
            doc["output"]["folder"] = toml_edit::value("../results/dairy-march-plots");
            fs::write(
                ws.path().join("recipes/dairy-march-plots.toml"),
                format!("{doc}\n{plots}"),
            )
            .unwrap();
            "recipes/dairy-march-plots.toml".to_string()
        }
    };
    run(&["run", &recipe], ws.path());
    let value: toml::Value =
        toml::from_str(&fs::read_to_string(ws.path().join(&recipe)).unwrap()).unwrap();
    let folder = ws
        .path()
        .join("recipes")
        .join(value["output"]["folder"].as_str().unwrap());
    (ws, recipe, folder)
}

fn manifest(folder: &Path) -> Value {
    serde_json::from_slice(&fs::read(folder.join("manifest.json")).unwrap()).unwrap()
}

fn report(folder: &Path) -> String {
    fs::read_to_string(folder.join("report.html")).expect("report.html is written on every run")
}

/// The text between `start` (included) and the next `end` after it (included).
fn between<'a>(text: &'a str, start: &str, end: &str) -> &'a str {
    let from = text
        .find(start)
        .unwrap_or_else(|| panic!("the report has no {start}"));
    let to = text[from..]
        .find(end)
        .unwrap_or_else(|| panic!("{start} is not closed by {end}"))
        + from
        + end.len();
    &text[from..to]
}

/// Every value of a double-quoted attribute `name` (case-insensitive), with
/// the byte offset of the attribute.
fn attribute_values(html: &str, name: &str) -> Vec<(usize, String)> {
    let lower = html.to_ascii_lowercase();
    let pattern = format!("{name}=");
    let mut out = Vec::new();
    let mut from = 0;
    while let Some(at) = lower[from..].find(&pattern) {
        let start = from + at;
        from = start + pattern.len();
        // Only a whole attribute name: preceded by a space or a line break.
        if !html[..start].ends_with([' ', '\n', '\t']) {
            continue;
        }
        let rest = html[from..].trim_start();
        let value = match rest.chars().next() {
            Some(q @ ('"' | '\'')) => rest[1..].split(q).next().unwrap_or(""),
            _ => rest.split([' ', '>']).next().unwrap_or(""),
        };
        out.push((start, value.to_string()));
    }
    out
}

/// The embedded data of the 3-D view.
fn scores_data(html: &str) -> Value {
    let block = between(
        html,
        "<script type=\"application/json\" id=\"sx3d-data\">",
        "</script>",
    );
    let json = block
        .trim_start_matches("<script type=\"application/json\" id=\"sx3d-data\">")
        .trim_end_matches("</script>");
    serde_json::from_str(json).expect("the 3-D data is valid JSON")
}

#[test]
fn demo_report_is_listed_and_shows_every_part() {
    let (ws, recipe, folder) = demo(None);
    let bytes = fs::read(folder.join("report.html")).unwrap();
    let html = String::from_utf8(bytes.clone()).unwrap();
    let m = manifest(&folder);

    // Listed in the manifest with its SHA-256 and size.
    let listed = m["outputs"]
        .as_array()
        .unwrap()
        .iter()
        .find(|o| o["path"] == "report.html")
        .expect("report.html is listed in manifest.json's outputs");
    assert_eq!(listed["sha256"], sha256_hex(&bytes));
    assert_eq!(listed["bytes"], bytes.len());

    // A complete page with the recipe's title and notes.
    assert!(html.starts_with("<!DOCTYPE html>\n<html lang=\"en\">"));
    assert!(html.trim_end().ends_with("</html>"));
    assert!(html.contains("<title>Dairy lab, March 2026 batch (invented demo data)</title>"));
    assert!(html.contains("<h1>Dairy lab, March 2026 batch (invented demo data)</h1>"));
    assert!(html.contains("Correlation PCA of 18 milk properties; skewed counts on a log scale."));

    // The summary, in sentences.
    let summary = between(&html, "<section id=\"summary\">", "</section>");
    for fragment in [
        "has 400 rows and 22 columns; 400 rows and 17 features were analysed.",
        "Dropped features: citrate_mg_dl (41.0 % missing).",
        "178 missing cells were filled with their feature&#39;s mean",
        "Transformed before scaling: somatic_cells_k_ml (log10)",
        "Scaling: unit-variance, so the loadings are eigenvectors of the correlation matrix.",
        "2 components were kept by the rule <code>broken-stick</code>, explaining 57.1 % of the variance",
        "At 95 % confidence, 21 rows are above the T² limit and 11 above the SPE limit.",
    ] {
        assert!(
            summary.contains(fragment),
            "the summary lacks {fragment:?}:\n{summary}"
        );
    }
    assert!(
        summary.matches("<li>").count() >= 7,
        "one item per sentence"
    );

    // The variance table: one row per computed component (compute = 10).
    let variance = between(&html, "<table class=\"sx-variance\">", "</table>");
    let body = between(variance, "<tbody>", "</tbody>");
    assert_eq!(body.matches("<tr").count(), 10);
    assert_eq!(body.matches("<tr class=\"sx-kept\">").count(), 2);
    let variance_csv = fs::read_to_string(folder.join("variance.csv")).unwrap();
    assert_eq!(variance_csv.lines().count() - 1, 10);
    assert!(body.contains("<th scope=\"row\">PC1</th>"));
    assert!(body.contains("<th scope=\"row\">PC10</th>"));
    assert!(body.contains("40.5 %") && body.contains("57.1 %"), "{body}");
    // Eigenvalues to four significant digits.
    let first_eigenvalue: f64 = variance_csv
        .lines()
        .nth(1)
        .unwrap()
        .split(',')
        .nth(1)
        .unwrap()
        .parse()
        .unwrap();
    let shown = format!("{first_eigenvalue:.3}");
    assert!(body.contains(&format!(">{shown}<")), "{shown} in {body}");

    // The largest loadings of the two kept components.
    let loadings = between(&html, "<section id=\"loadings\">", "</section>");
    assert_eq!(loadings.matches("<div class=\"sx-card\">").count(), 2);
    assert_eq!(loadings.matches("<tr><td class=\"sx-name\">").count(), 10);

    // The flagged rows with their largest contributions.
    let flagged_count = m["steps"]["diagnostics"]["flagged_rows"].as_u64().unwrap() as usize;
    assert!(flagged_count > 0);
    let flagged = between(&html, "<section id=\"flagged\">", "</section>");
    assert!(flagged.contains("Flagged rows at 95 % confidence"));
    let rows = between(flagged, "<tbody>", "</tbody>");
    assert_eq!(
        rows.matches("<tr>").count(),
        flagged_count.min(sextant::outputs::report::MAX_FLAGGED_ROWS)
    );
    assert_eq!(
        rows.matches("<ul class=\"sx-contrib\">").count(),
        rows.matches("<tr>").count()
    );
    let contributions = fs::read_to_string(folder.join("contributions.csv")).unwrap();
    let first_flagged = contributions
        .lines()
        .nth(1)
        .unwrap()
        .split(',')
        .nth(1)
        .unwrap();
    assert!(rows.contains(&format!(
        "<th scope=\"row\" class=\"sx-name\">{first_flagged}</th>"
    )));

    // The rotatable view: a canvas, a message without scripts, and the data.
    assert!(html.contains("<canvas id=\"sx3d-canvas\""));
    assert!(html.contains("<noscript>"));
    let data = scores_data(&html);
    assert_eq!(data["points"].as_array().unwrap().len(), 400);
    assert_eq!(data["labels"].as_array().unwrap().len(), 400);
    assert_eq!(data["labels"][0], "M-0001");
    assert_eq!(data["group"], "farm");
    assert_eq!(data["axes"][0], "PC1 (40.5 %)");
    assert_eq!(data["flagged"].as_array().unwrap().len(), flagged_count);
    for c in data["colours"].as_array().unwrap() {
        assert!(
            sextant::outputs::report::PALETTE.contains(&c.as_str().unwrap()),
            "{c} is not an Okabe & Ito colour"
        );
    }

    // One figure, with its <svg>, per [[plot]] table of the recipe.
    let plots = plot_count(&ws.path().join(&recipe));
    assert_eq!(html.matches("<figure").count(), plots);
    assert!(html.matches("<svg").count() >= plots);

    // The cautions, every one.
    let section = between(&html, "<section id=\"cautions\">", "</section>");
    for caution in cautions() {
        assert!(
            section.contains(&escape(&caution)),
            "missing caution: {caution}"
        );
    }

    // The provenance: tool, recipe and input hashes.
    let provenance = between(&html, "<section id=\"provenance\">", "</section>");
    let input_sha = m["inputs"][0]["sha256"].as_str().unwrap();
    assert_eq!(
        input_sha,
        sha256_hex(&fs::read(ws.path().join("demo-data/dairy-lab-2026-03.csv")).unwrap())
    );
    assert!(
        provenance.contains(&format!("(sha256 {input_sha})")),
        "{provenance}"
    );
    let recipe_sha = sha256_hex(&fs::read(ws.path().join("recipes/dairy-march.toml")).unwrap());
    assert!(provenance.contains(&recipe_sha));
    assert!(provenance.contains(&format!("sextant {}", env!("CARGO_PKG_VERSION"))));
    assert!(provenance.contains("results digest"));
}

#[test]
fn every_figure_is_inline_with_its_caption_and_unique_ids() {
    let (ws, recipe, folder) = demo(Some(PLOTS));
    let plot_count = plot_count(&ws.path().join(recipe));
    assert_eq!(plot_count, 8);
    let html = report(&folder);
    let m = manifest(&folder);
    let plot_files: Vec<String> = m["outputs"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|o| o["path"].as_str())
        .filter(|p| p.starts_with("plots/"))
        .map(String::from)
        .collect();
    assert_eq!(plot_files.len(), plot_count, "{plot_files:?}");

    let figures = between(
        &html,
        "<section id=\"figures\">",
        "</section>\n<section id=\"cautions\">",
    );
    assert_eq!(figures.matches("<figure").count(), plot_count);
    // Each figure holds its own svg element (nested ones aside).
    for figure in figures.split("<figure").skip(1) {
        assert!(
            figure.contains("<svg"),
            "a figure without its svg: {figure}"
        );
        assert!(figure.contains("<figcaption>"));
    }
    assert!(
        html.matches("<svg").count() >= plot_count,
        "every figure's <svg> is inlined"
    );
    for file in &plot_files {
        assert!(
            html.contains(&format!("<span class=\"sx-file\">{file}</span>")),
            "no caption names {file}"
        );
        let svg = fs::read_to_string(folder.join(file)).unwrap();
        assert!(svg.contains("<svg"), "{file} is an SVG document");
    }
    assert!(
        html.contains("Scores on PC1 and PC3"),
        "a plot's title reaches its caption"
    );
    assert!(!html.contains("<?xml"), "XML declarations are stripped");
    assert!(!html.to_ascii_lowercase().contains("<!doctype svg"));

    // No id appears twice in the page, whatever ids the figures use.
    let mut seen = BTreeSet::new();
    for (_, id) in attribute_values(&html, "id") {
        assert!(seen.insert(id.clone()), "the id {id:?} appears twice");
    }
    // Every in-page reference points at an id of the page.
    for (_, href) in attribute_values(&html, "href") {
        if let Some(target) = href.strip_prefix('#') {
            assert!(seen.contains(target), "href=\"#{target}\" points at no id");
        }
    }
}

#[test]
fn report_loads_nothing_from_anywhere() {
    let (_ws, _, folder) = demo(Some(PLOTS));
    let html = report(&folder);
    for attribute in ["src", "href", "xlink:href", "action", "poster", "data"] {
        for (at, value) in attribute_values(&html, attribute) {
            let v = value.trim().to_ascii_lowercase();
            assert!(
                !(v.starts_with("http:") || v.starts_with("https:") || v.starts_with("//")),
                "{attribute}={value:?} at byte {at} points outside the file"
            );
        }
    }
    let lower = html.to_ascii_lowercase();
    assert!(!lower.contains("<link"), "no <link> element");
    assert!(!lower.contains("@import"), "no @import");
    assert!(!lower.contains("url(http") && !lower.contains("url(//"));
    for tag in [
        "<img", "<iframe", "<object", "<embed", "<audio", "<video", "<base",
    ] {
        assert!(!lower.contains(tag), "no {tag} element");
    }
    // Scripts are inline only: the data block and the code.
    let scripts: Vec<&str> = lower.split("<script").skip(1).collect();
    assert_eq!(scripts.len(), 2, "one data block and one inline script");
    for s in &scripts {
        let tag = &s[..s.find('>').unwrap()];
        assert!(!tag.contains("src"), "<script{tag}> loads a file");
    }
    // And the page forbids any fetch itself.
    assert!(
        html.contains("<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none';")
    );
    // URLs, if any, are only XML namespace names.
    let mut rest = lower.as_str();
    while let Some(at) = rest.find("http") {
        let before = &rest[..at];
        assert!(
            before.ends_with("xmlns=\"")
                || before.ends_with("xmlns:xlink=\"")
                || rest[at..].starts_with("http-equiv"),
            "a URL outside a namespace declaration: {}",
            &rest[at.saturating_sub(60)..(at + 60).min(rest.len())]
        );
        rest = &rest[at + 4..];
    }
}

#[test]
fn report_bytes_are_identical_over_runs() {
    let (ws, recipe, folder) = demo(Some(PLOTS));
    let first = fs::read(folder.join("report.html")).unwrap();
    // A rerun in place, and a run in another folder.
    run(&["run", &recipe, "--replace"], ws.path());
    assert_eq!(fs::read(folder.join("report.html")).unwrap(), first);
    let (_ws2, _, folder2) = demo(Some(PLOTS));
    assert_eq!(fs::read(folder2.join("report.html")).unwrap(), first);
    // With several threads or one.
    let out = Command::new(BIN)
        .args(["run", &recipe, "--replace"])
        .current_dir(ws.path())
        .env("RAYON_NUM_THREADS", "1")
        .output()
        .unwrap();
    assert!(out.status.success());
    assert_eq!(fs::read(folder.join("report.html")).unwrap(), first);
}

/// A small table whose names, ids, groups, title and notes are all hostile.
fn hostile_workspace(plots: &str) -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    let mut csv = String::from(
        "id,\"grp <b>\",\"<script>alert(1)</script>\",\"a&b\"\"c\",plain,\"x'y\",other\n",
    );
    let mut state: u64 = 0x9e37_79b9_7f4a_7c15;
    let mut next = || {
        state = state
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        (state >> 11) as f64 / (1u64 << 53) as f64 - 0.5
    };
    for i in 0..30 {
        let id = match i {
            0 => "\"x&\"\"y<1>\"".to_string(),
            1 => "</script><script>alert(2)</script>".to_string(),
            2 => "\"<!-- not a comment\"".to_string(),
            _ => format!("r{i}"),
        };
        let group = ["<b>bold</b>", "a&amp;b", "\"q\""][i % 3];
        let group = format!("\"{}\"", group.replace('"', "\"\""));
        let (f1, f2) = (next() * 3.0, next() * 2.0);
        let mut values: Vec<f64> = (0..5)
            .map(|j| f1 * (j as f64 - 2.0) + f2 * ((j % 2) as f64) + next())
            .collect();
        if i == 0 {
            // Far from the rest, so the row is flagged and listed.
            values = vec![40.0, -35.0, 30.0, 45.0, -50.0];
        }
        let cells: Vec<String> = values.iter().map(|v| format!("{v:.5}")).collect();
        csv.push_str(&format!("{id},{group},{}\n", cells.join(",")));
    }
    fs::write(dir.path().join("data.csv"), csv).unwrap();
    let recipe = format!(
        "format = 1\ntitle = \"<i>Hostile</i> & \\\"quoted\\\" </title>\"\nnotes = \"notes with <b>tags</b> & ampersands\"\n\
         [input]\nfile = \"data.csv\"\nid = \"id\"\ngroups = [\"grp <b>\"]\n\
         [components]\nkeep = 2\ncompute = 4\n[output]\nfolder = \"out\"\n{plots}"
    );
    fs::write(dir.path().join("r.toml"), recipe).unwrap();
    run(&["run", "r.toml"], dir.path());
    dir
}

/// Checks the hostile texts are shown as text everywhere in `html`.
fn assert_hostile_texts_are_text(html: &str) {
    // No markup from the data: the only script elements are the report's own.
    assert_eq!(
        html.matches("<script").count(),
        2,
        "only the report's own scripts"
    );
    assert_eq!(html.matches("</script>").count(), 2);
    assert!(!html.contains("alert(1)</script>"));
    assert!(!html.contains("<script>alert"));
    assert!(!html.contains("<b>bold</b>"));
    assert!(!html.contains("<b>tags</b>"));
    assert!(!html.contains("<i>Hostile</i>"));
    assert!(!html.contains("<!-- not a comment"));

    // The texts themselves, escaped.
    assert!(html.contains(
        "<title>&lt;i&gt;Hostile&lt;/i&gt; &amp; &quot;quoted&quot; &lt;/title&gt;</title>"
    ));
    assert!(
        html.contains(
            "<h1>&lt;i&gt;Hostile&lt;/i&gt; &amp; &quot;quoted&quot; &lt;/title&gt;</h1>"
        )
    );
    assert!(html.contains("notes with &lt;b&gt;tags&lt;/b&gt; &amp; ampersands"));
    assert!(
        html.contains("&lt;script&gt;alert(1)&lt;/script&gt;"),
        "feature name as text"
    );
    assert!(
        html.contains("a&amp;b&quot;c"),
        "feature name with & and \""
    );
    assert!(html.contains("x&#39;y"));
    assert!(
        html.contains("x&amp;&quot;y&lt;1&gt;"),
        "id with & and \" in the flagged rows"
    );
    assert!(
        html.contains("grp &lt;b&gt;:"),
        "group column in the legend"
    );
    assert!(
        html.contains("&lt;b&gt;bold&lt;/b&gt;"),
        "group value in the legend"
    );
    assert!(html.contains("a&amp;amp;b"));
    assert!(html.contains("&quot;q&quot;"));

    // The embedded data has no "<" at all, so it cannot end its element or
    // open a comment; it reads back to the exact texts.
    let open = "<script type=\"application/json\" id=\"sx3d-data\">";
    let block = between(html, open, "</script>");
    assert!(!block[open.len()..block.len() - "</script>".len()].contains('<'));
    let data = scores_data(html);
    let labels: Vec<&str> = data["labels"]
        .as_array()
        .unwrap()
        .iter()
        .map(|l| l.as_str().unwrap())
        .collect();
    assert_eq!(labels[0], "x&\"y<1>");
    assert_eq!(labels[1], "</script><script>alert(2)</script>");
    assert_eq!(labels[2], "<!-- not a comment");
    assert_eq!(data["group"], "grp <b>");
    assert!(
        data["values"]
            .as_array()
            .unwrap()
            .iter()
            .any(|v| v == "<b>bold</b>")
    );
    assert!(data["flagged"].as_array().unwrap().iter().any(|v| v == 0));
}

#[test]
fn hostile_names_are_shown_as_text() {
    let dir = hostile_workspace("");
    let html = report(&dir.path().join("out"));
    assert_hostile_texts_are_text(&html);
}

#[test]
fn hostile_names_in_figures_are_shown_as_text() {
    let plots = "[[plot]]\nkind = \"scores\"\ncolor = \"grp <b>\"\nlabels = \"all\"\n\
                 [[plot]]\nkind = \"loadings\"\ncomponent = 1\n\
                 [[plot]]\nkind = \"biplot\"\nlabels = \"all\"\n\
                 [[plot]]\nkind = \"outlier-map\"\nlabels = \"all\"\n";
    let dir = hostile_workspace(plots);
    let html = report(&dir.path().join("out"));
    assert_eq!(html.matches("<figure").count(), 4);
    assert_hostile_texts_are_text(&html);
}

#[test]
fn two_components_give_no_3d_view_and_no_script() {
    let ws = workspace();
    let text = fs::read_to_string(ws.path().join("recipes/dairy-march.toml")).unwrap();
    fs::write(
        ws.path().join("recipes/two.toml"),
        text.replace("compute = 10", "compute = 2")
            .replace("../results/dairy-march", "../results/two"),
    )
    .unwrap();
    run(&["run", "recipes/two.toml"], ws.path());
    let html = report(&ws.path().join("results/two"));
    let variance = between(&html, "<table class=\"sx-variance\">", "</table>");
    assert_eq!(
        variance.matches("<tr").count() - 1,
        2,
        "header and two rows"
    );
    assert!(!html.contains("<canvas"));
    assert!(
        !html.contains("<script"),
        "no script at all without the 3-D view"
    );
    assert!(!html.contains("script-src"));
    assert!(html.contains("<section id=\"provenance\">"));
}

/// Markup that would run or load something if it reached the page or a
/// figure as markup: in a feature's name, in ids and in group values.
const IMG: &str = "\"><img src=x onerror=alert(3)>";

#[test]
fn image_and_script_markup_from_the_data_stays_text_in_the_report_and_every_figure() {
    let dir = tempfile::tempdir().unwrap();
    let quoted = |s: &str| format!("\"{}\"", s.replace('"', "\"\""));
    let mut csv = format!(
        "id,grp,{},{},b,c,d\n",
        quoted(IMG),
        quoted("<script>alert(1)</script>")
    );
    for i in 0..24 {
        let id = match i {
            0 => quoted(IMG),
            1 => quoted("<script>alert(2)</script>"),
            2 => "a&amp;b".to_string(),
            _ => format!("r{i}"),
        };
        let group = quoted(
            [
                "<img src=y onerror=alert(4)>",
                "&amp;",
                "<script>x</script>",
            ][i % 3],
        );
        let t = i as f64;
        let row = [
            (t * 0.37).sin() * 3.0,
            (t * 0.91).cos() * 2.0,
            t * 0.1 + (t * 1.7).sin(),
            (t * 0.23).cos() - t * 0.05,
            if i == 0 { 40.0 } else { (t * 2.3).sin() },
        ];
        let cells: Vec<String> = row.iter().map(|v| format!("{v:.4}")).collect();
        csv.push_str(&format!("{id},{group},{}\n", cells.join(",")));
    }
    fs::write(dir.path().join("data.csv"), csv).unwrap();
    let plots = "[[plot]]\nkind = \"scree\"\n\
                 [[plot]]\nkind = \"scores\"\ncolor = \"grp\"\nlabels = \"all\"\n\
                 [[plot]]\nkind = \"loadings\"\ncomponent = 1\n\
                 [[plot]]\nkind = \"loadings\"\nx = 1\ny = 2\n\
                 [[plot]]\nkind = \"biplot\"\ncolor = \"grp\"\nlabels = \"all\"\n\
                 [[plot]]\nkind = \"correlation-circle\"\n\
                 [[plot]]\nkind = \"outlier-map\"\nlabels = \"all\"\n";
    let recipe = format!(
        "format = 1\ntitle = \"{}\"\n[input]\nfile = \"data.csv\"\nid = \"id\"\ngroups = [\"grp\"]\n\
         [components]\nkeep = 2\ncompute = 4\n[output]\nfolder = \"out\"\n{plots}",
        IMG.replace('"', "\\\"")
    );
    fs::write(dir.path().join("r.toml"), recipe).unwrap();
    run(&["run", "r.toml"], dir.path());
    let out = dir.path().join("out");

    let html = report(&out);
    let mut wrong = Vec::new();
    if html.contains("<img") {
        wrong.push("report.html has an <img element".to_string());
    }
    // Only the report's own two script elements.
    if html.matches("<script").count() != 2 {
        wrong.push(format!(
            "report.html has {} <script elements, expected the report's own 2",
            html.matches("<script").count()
        ));
    }
    for escaped in [
        "&lt;img src=x onerror=alert(3)&gt;",
        "&lt;script&gt;alert(1)&lt;/script&gt;",
        "a&amp;amp;b",
    ] {
        if !html.contains(escaped) {
            wrong.push(format!("report.html does not show {escaped:?}"));
        }
    }

    // Every figure is well-formed XML, holds no element or handler from the
    // data, and shows the hostile texts as text (in a label or a tooltip's
    // attribute; labels may be shortened).
    let mut svgs: Vec<PathBuf> = fs::read_dir(out.join("plots"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    svgs.sort();
    if svgs.len() != 7 {
        wrong.push(format!("{} figures, expected 7", svgs.len()));
    }
    let mut texts = String::new();
    for svg in &svgs {
        let text = fs::read_to_string(svg).unwrap();
        match roxmltree::Document::parse(&text) {
            Err(e) => wrong.push(format!("{} does not parse: {e}", svg.display())),
            Ok(doc) => {
                for node in doc.descendants() {
                    let name = node.tag_name().name();
                    if matches!(name, "img" | "script" | "foreignObject" | "image") {
                        wrong.push(format!("{} has a <{name}> element", svg.display()));
                    }
                    if let Some(t) = node.text() {
                        texts.push_str(t);
                    }
                    for a in node.attributes() {
                        texts.push_str(a.value());
                        if a.name().starts_with("on") {
                            wrong.push(format!("{} has an {} attribute", svg.display(), a.name()));
                        }
                    }
                }
            }
        }
    }
    for shown in ["<img src=x onerror=alert(3)>", "<script>alert(1)</script>"] {
        if !texts.contains(shown) {
            wrong.push(format!("no figure shows {shown:?} as text"));
        }
    }
    assert!(wrong.is_empty(), "{}", wrong.join("\n"));
}

/// A small table with gaps, for the fill methods.
const GAPPY: &str = "id,a,b,c,d\n\
r1,1.0,2.1,3.3,0.5\n\
r2,2.0,,2.9,0.7\n\
r3,3.1,4.2,,0.2\n\
r4,3.9,5.1,1.8,\n\
r5,5.2,6.3,1.1,0.9\n\
r6,6.0,6.8,,0.4\n\
r7,7.1,8.2,0.2,0.8\n\
r8,,9.1,0.1,0.3\n\
r9,9.0,9.8,-0.6,0.6\n\
r10,10.2,11.1,-1.2,\n\
r11,11.1,12.3,-1.5,0.1\n\
r12,12.0,12.9,-2.2,0.5\n";

/// The summary sentence on filled cells for one `[missing]` table.
fn fill_sentence(missing: &str) -> String {
    let dir = tempfile::tempdir().unwrap();
    fs::write(dir.path().join("gappy.csv"), GAPPY).unwrap();
    fs::write(
        dir.path().join("r.toml"),
        format!(
            "format = 1\n[input]\nfile = \"gappy.csv\"\nid = \"id\"\n{missing}\n[components]\nkeep = 2\n[output]\nfolder = \"out\"\n"
        ),
    )
    .unwrap();
    run(&["run", "r.toml"], dir.path());
    let html = fs::read_to_string(dir.path().join("out/report.html")).unwrap();
    let start = html
        .find("missing cells were filled")
        .expect("a fill sentence");
    let line_start = html[..start].rfind("<li>").unwrap() + 4;
    let end = line_start + html[line_start..].find("</li>").unwrap();
    html[line_start..end].to_string()
}

/// Regression: the report's summary described every fill the same vague way
/// (kNN and iterative PCA without their k or components; earlier, as a fill
/// with the feature's mean); each method is now named with its settings.
#[test]
fn fill_sentence_names_each_method_with_its_settings() {
    let knn = fill_sentence("[missing]\nmethod = \"knn\"\n[missing.knn]\nneighbours = 3");
    assert!(
        knn.starts_with("6 missing cells were filled by k nearest neighbours (k = 3): each with the mean of the 3 nearest rows that observe it;"),
        "{knn}"
    );
    let one = fill_sentence("[missing]\nmethod = \"knn\"\n[missing.knn]\nneighbours = 1");
    assert!(
        one.contains("filled by the nearest neighbour (k = 1): each with the value of the nearest row that observes it;"),
        "{one}"
    );
    let ipca = fill_sentence(
        "[missing]\nmethod = \"iterative-pca\"\n[missing.iterative_pca]\ncomponents = 2",
    );
    assert!(
        ipca.starts_with("6 missing cells were filled by iterative PCA with 2 components (")
            && ipca.contains(" refits of the model; converged at a change of "),
        "{ipca}"
    );
    let mean = fill_sentence("[missing]\nmethod = \"mean\"");
    assert!(
        mean.starts_with("6 missing cells were filled with their feature&#39;s mean;"),
        "{mean}"
    );
    let median = fill_sentence("[missing]\nmethod = \"median\"");
    assert!(
        median.starts_with("6 missing cells were filled with their feature&#39;s median;"),
        "{median}"
    );
    for s in [&knn, &one, &ipca] {
        assert!(!s.contains("mean;") && !s.contains("median;"), "{s}");
    }
}
