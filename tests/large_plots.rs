//! Figures at large n and labels at small n, from real runs of the binary:
//! an outlier map and a score plot of a generated 110,000-row table (every
//! row counted in exactly one density cell, kinds of rows kept apart, a
//! bounded number of labels that never overlap, the ones left out named in
//! the caption), and the biplot and correlation circle of open data sets
//! whose feature names used to pile up.

mod common;

use common::sextant;
use sextant::outputs::plots::label_box;
use std::collections::{BTreeMap, BTreeSet};
use std::fs;
use std::path::Path;

// ---------------------------------------------------------------- data ----

/// A deterministic sequence in [-0.5, 0.5) (a linear congruential generator).
struct Lcg(u64);

impl Lcg {
    fn next(&mut self) -> f64 {
        self.0 = self
            .0
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        (self.0 >> 11) as f64 / (1u64 << 53) as f64 - 0.5
    }
}

const ROWS: usize = 110_000;
const LIMIT: usize = 12;

/// Rows planted far beyond a limit: two far along the model (T²), two far
/// from it (SPE), one both.
const PLANTED: [(usize, f64, f64); 5] = [
    (20_000, 14.0, 0.0),
    (70_000, -12.0, 0.0),
    (1_000, 0.0, 5.0),
    (50_000, 0.0, -4.0),
    (100_000, 12.0, 5.0),
];

/// A generated table (no licence needed: made here, seeded): `ROWS` rows of
/// six features driven by two latent factors plus noise, an id column, and
/// the planted rows of [`PLANTED`].
fn write_table(path: &Path) {
    let mut rng = Lcg(2026);
    let mut bell = || (0..4).map(|_| rng.next()).sum::<f64>() * 1.732;
    let load = [
        [1.0, 0.2],
        [0.8, -0.5],
        [0.6, 0.7],
        [-0.4, 0.9],
        [0.3, 0.3],
        [0.9, 0.1],
    ];
    let mut out = String::from("sample,f1,f2,f3,f4,f5,f6\n");
    for i in 0..ROWS {
        let (mut t1, t2) = (2.0 * bell(), bell());
        let mut off = 0.0;
        if let Some(&(_, along, away)) = PLANTED.iter().find(|p| p.0 == i) {
            t1 += along;
            off = away;
        }
        out.push_str(&format!("s{i:06}"));
        for (j, l) in load.iter().enumerate() {
            let mut v = l[0] * t1 + l[1] * t2 + 0.3 * bell();
            if j == 4 {
                v += off;
            }
            out.push_str(&format!(",{v:.4}"));
        }
        out.push('\n');
    }
    fs::write(path, out).unwrap();
}

/// Runs the 110,000-row recipe once and gives its folder (shared by the tests
/// that read its figures).
fn large_run() -> &'static Path {
    use std::sync::OnceLock;
    static DIR: OnceLock<tempfile::TempDir> = OnceLock::new();
    DIR.get_or_init(|| {
        let dir = tempfile::tempdir().unwrap();
        write_table(&dir.path().join("large.csv"));
        fs::write(
            dir.path().join("large.toml"),
            format!(
                r#"format = 1
[input]
file = "large.csv"
id = "sample"
[components]
keep = 2
[[plot]]
kind = "outlier-map"
max_labels = {LIMIT}
[[plot]]
kind = "scores"
max_labels = {LIMIT}
[output]
folder = "out"
"#
            ),
        )
        .unwrap();
        let out = sextant(dir.path(), &["run", "large.toml"]);
        assert_eq!(out.code, 0, "{}{}", out.stdout, out.stderr);
        if let Some(to) = std::env::var_os("SEXTANT_PLOTS_DUMP") {
            fs::create_dir_all(&to).unwrap();
            for f in ["outlier-map.svg", "scores-pc1-pc2.svg"] {
                fs::copy(dir.path().join("out/plots").join(f), Path::new(&to).join(f)).unwrap();
            }
        }
        dir
    })
    .path()
}

/// Each row of scores.csv: id, T², SPE and whether it is above the T² and the
/// SPE limit.
fn score_rows(folder: &Path) -> Vec<(String, f64, f64, bool, bool)> {
    let text = fs::read_to_string(folder.join("scores.csv")).unwrap();
    let mut lines = text.lines();
    let head: Vec<&str> = lines.next().unwrap().split(',').collect();
    let at = |name: &str| head.iter().position(|h| *h == name).unwrap();
    let (id, t2, spe) = (at("sample"), at("T2"), at("SPE"));
    let (a, b) = (at("T2_above_95"), at("SPE_above_95"));
    lines
        .map(|l| {
            let c: Vec<&str> = l.split(',').collect();
            (
                c[id].to_string(),
                c[t2].parse().unwrap(),
                c[spe].parse().unwrap(),
                c[a] == "yes",
                c[b] == "yes",
            )
        })
        .collect()
}

// ------------------------------------------------------------- reading ----

fn parse(svg: &str) -> roxmltree::Document<'_> {
    roxmltree::Document::parse(svg).unwrap_or_else(|e| panic!("not XML: {e}"))
}

fn has_class(node: &roxmltree::Node, class: &str) -> bool {
    node.attribute("class")
        .is_some_and(|c| c.split_whitespace().any(|w| w == class))
}

fn with_class<'a>(doc: &'a roxmltree::Document, class: &str) -> Vec<roxmltree::Node<'a, 'a>> {
    doc.descendants()
        .filter(|n| n.is_element() && has_class(n, class))
        .collect()
}

fn num(n: &roxmltree::Node, a: &str) -> f64 {
    n.attribute(a).unwrap().parse().unwrap()
}

/// A density cell: its box and rows.
struct Square {
    x: f64,
    y: f64,
    w: f64,
    h: f64,
    n: usize,
    fill: String,
}

/// The density's cells by category name (`data-category`).
fn density(doc: &roxmltree::Document) -> BTreeMap<String, Vec<Square>> {
    let mut out: BTreeMap<String, Vec<Square>> = BTreeMap::new();
    for g in with_class(doc, "density-category") {
        let name = g.attribute("data-category").unwrap().to_string();
        let cells = out.entry(name).or_default();
        for class in g.children().filter(|c| has_class(c, "density-class")) {
            let fill = class.attribute("fill").unwrap().to_string();
            for r in class.children().filter(|r| r.has_tag_name("rect")) {
                cells.push(Square {
                    x: num(&r, "x"),
                    y: num(&r, "y"),
                    w: num(&r, "width"),
                    h: num(&r, "height"),
                    n: r.attribute("data-n").unwrap().parse().unwrap(),
                    fill: fill.clone(),
                });
            }
        }
    }
    out
}

/// The centres of the markers drawn as points (circle, rect, polygon, path).
fn markers(doc: &roxmltree::Document) -> Vec<(f64, f64, f64)> {
    let mut out = Vec::new();
    for g in with_class(doc, "points") {
        for n in g.descendants().filter(|n| n.is_element()) {
            match n.tag_name().name() {
                "circle" => out.push((num(&n, "cx"), num(&n, "cy"), num(&n, "r"))),
                "rect" => {
                    let w = num(&n, "width");
                    out.push((num(&n, "x") + w / 2.0, num(&n, "y") + w / 2.0, w / 2.0));
                }
                "polygon" => {
                    let pts: Vec<f64> = n
                        .attribute("points")
                        .unwrap()
                        .split([' ', ','])
                        .filter(|s| !s.is_empty())
                        .map(|s| s.parse().unwrap())
                        .collect();
                    let k = pts.len() / 2;
                    let cx = (0..k).map(|i| pts[2 * i]).sum::<f64>() / k as f64;
                    let cy = (0..k).map(|i| pts[2 * i + 1]).sum::<f64>() / k as f64;
                    let r = (0..k)
                        .map(|i| (pts[2 * i] - cx).abs().max((pts[2 * i + 1] - cy).abs()))
                        .fold(0.0, f64::max);
                    out.push((cx, cy, r));
                }
                _ => {}
            }
        }
    }
    out
}

/// A label's text and its box in pixels (left, top, right, bottom).
type Labelled = (String, (f64, f64, f64, f64));

/// Each label of the classes given: its text and box, as the figures reckon it.
fn label_boxes(doc: &roxmltree::Document, classes: &[&str]) -> Vec<Labelled> {
    let mut out = Vec::new();
    for class in classes {
        for g in with_class(doc, class) {
            for t in g.descendants().filter(|n| n.has_tag_name("text")) {
                let text = t.text().unwrap_or("").to_string();
                let anchor = t.attribute("text-anchor").unwrap_or("start");
                let b = label_box(num(&t, "x"), num(&t, "y"), anchor, &text);
                out.push((text, b));
            }
        }
    }
    out
}

/// Every pair of labels whose boxes overlap.
fn overlapping(boxes: &[Labelled]) -> Vec<(String, String)> {
    let mut out = Vec::new();
    for (i, (a, p)) in boxes.iter().enumerate() {
        for (b, q) in &boxes[i + 1..] {
            // A tenth of a pixel of slack: coordinates are written rounded.
            if p.0 < q.2 - 0.1 && q.0 < p.2 - 0.1 && p.1 < q.3 - 0.1 && q.1 < p.3 - 0.1 {
                out.push((a.clone(), b.clone()));
            }
        }
    }
    out
}

fn caption(doc: &roxmltree::Document) -> String {
    doc.descendants()
        .find(|n| n.has_tag_name("desc"))
        .and_then(|n| n.text())
        .unwrap_or("")
        .to_string()
}

/// The names a caption says were left out after `lead` (up to the full stop
/// that ends the list).
fn listed_after(caption: &str, lead: &str) -> Vec<String> {
    let Some(at) = caption.find(lead) else {
        return Vec::new();
    };
    let rest = &caption[at + lead.len()..];
    let end = rest.find(". ").unwrap_or(rest.len() - 1);
    rest[..end]
        .split(", ")
        .map(|s| s.trim().to_string())
        .collect()
}

// --------------------------------------------------------------- tests ----

#[test]
fn outlier_map_at_110k_rows_counts_every_row_once_by_kind_without_an_edge() {
    // Regression: at 110,000 rows the map binned rows of every kind together
    // in grey and drew the most severe flagged rows as points instead of in
    // the density, so the density stopped at a hard edge far above the limit,
    // and labels piled up.
    let folder = large_run().join("out");
    let svg = fs::read_to_string(folder.join("plots/outlier-map.svg")).unwrap();
    let doc = parse(&svg);
    let rows = score_rows(&folder);
    assert_eq!(rows.len(), ROWS);
    let mut kinds = [0usize; 4];
    for r in &rows {
        kinds[usize::from(r.3) + 2 * usize::from(r.4)] += 1;
    }
    let names = [
        "within both limits",
        "above the T² limit",
        "above the SPE limit",
        "above both limits",
    ];
    let cells = density(&doc);
    assert_eq!(
        cells.keys().cloned().collect::<BTreeSet<_>>(),
        names.iter().map(|s| s.to_string()).collect::<BTreeSet<_>>(),
        "one density category per kind of row"
    );
    // Every row in exactly one cell of its kind: each kind's cells sum to its rows.
    for (k, name) in names.iter().enumerate() {
        let sum: usize = cells[*name].iter().map(|c| c.n).sum();
        assert_eq!(sum, kinds[k], "{name}");
    }
    // The kinds are told apart: no fill shared between two kinds, and no
    // cell position holding rows of two kinds.
    let mut fills: BTreeMap<&str, &str> = BTreeMap::new();
    let mut at: BTreeMap<(i64, i64), &str> = BTreeMap::new();
    for (name, list) in &cells {
        for c in list {
            let owner = fills.entry(&c.fill).or_insert(name);
            assert_eq!(*owner, name.as_str(), "fill {} in two kinds", c.fill);
            let key = ((c.x * 10.0) as i64, (c.y * 10.0) as i64);
            let owner = at.entry(key).or_insert(name);
            assert_eq!(*owner, name.as_str(), "a square at {key:?} in two kinds");
        }
    }
    // No edge: every row drawn as a point lies in a density square (it is
    // counted there too), planted rows far beyond the limits included.
    let points = markers(&doc);
    assert!(
        !points.is_empty() && points.len() <= LIMIT,
        "{}",
        points.len()
    );
    let all: Vec<&Square> = cells.values().flatten().collect();
    for &(x, y, _) in &points {
        assert!(
            all.iter().any(|c| x >= c.x - 0.2
                && x <= c.x + c.w + 0.2
                && y >= c.y - 0.2
                && y <= c.y + c.h + 0.2),
            "the point at ({x}, {y}) has no density square under it"
        );
    }
    // Labels: at most the limit, never overlapping, the rest named in the caption.
    let labels = label_boxes(&doc, &["labels"]);
    assert!(labels.len() <= LIMIT, "{} labels", labels.len());
    assert!(
        overlapping(&labels).is_empty(),
        "{:?}",
        overlapping(&labels)
    );
    let caption = caption(&doc);
    let left_out = listed_after(&caption, "Left out where the label would overlap another: ");
    let flagged: BTreeSet<&str> = rows
        .iter()
        .filter(|r| r.3 || r.4)
        .map(|r| r.0.as_str())
        .collect();
    let named: BTreeSet<&str> = labels
        .iter()
        .map(|l| l.0.as_str())
        .chain(left_out.iter().map(String::as_str))
        .collect();
    assert_eq!(named.len(), LIMIT, "{caption}");
    assert!(named.iter().all(|n| flagged.contains(n)), "{named:?}");
    for planted in PLANTED {
        let id = format!("s{:06}", planted.0);
        assert!(named.contains(id.as_str()), "{id} not labelled nor listed");
    }
    assert!(
        caption.contains(&format!("at most {LIMIT} per plot")),
        "{caption}"
    );
}

#[test]
fn score_plot_at_110k_rows_keeps_the_density_visible_under_flagged_rows() {
    // Regression: flagged rows were drawn as up to 2,000 outlined markers on
    // top of a density that left them out, hiding it. The property tested:
    // the density counts every row, flagged ones in their own category drawn
    // as squares smaller than their cell (so the cell under them shows), and
    // only the labelled rows are drawn as markers, so markers hide the middle
    // of at most one within-limits square each and of at most a tenth of them.
    let folder = large_run().join("out");
    let svg = fs::read_to_string(folder.join("plots/scores-pc1-pc2.svg")).unwrap();
    let doc = parse(&svg);
    let rows = score_rows(&folder);
    let flagged = rows.iter().filter(|r| r.3 || r.4).count();
    let cells = density(&doc);
    let count = |name: &str| {
        cells
            .get(name)
            .map_or(0, |c| c.iter().map(|c| c.n).sum::<usize>())
    };
    assert_eq!(count("within the limits"), ROWS - flagged);
    assert_eq!(count("above a limit"), flagged);
    for c in &cells["above a limit"] {
        assert!(c.w < 7.0 && c.h < 7.0, "a flagged square fills its cell");
    }
    let points = markers(&doc);
    assert!(points.len() <= LIMIT, "{} points", points.len());
    let within = &cells["within the limits"];
    let hidden = within
        .iter()
        .filter(|c| {
            let (x, y) = (c.x + c.w / 2.0, c.y + c.h / 2.0);
            points
                .iter()
                .any(|p| (x - p.0).abs() < p.2 && (y - p.1).abs() < p.2)
        })
        .count();
    assert!(
        hidden <= points.len() && hidden * 10 <= within.len(),
        "{hidden} of {}",
        within.len()
    );
    let labels = label_boxes(&doc, &["labels"]);
    assert!(labels.len() <= LIMIT);
    assert!(
        overlapping(&labels).is_empty(),
        "{:?}",
        overlapping(&labels)
    );
}

/// Runs a biplot and a correlation circle of a data set in tests/data and
/// checks their labels: no two overlap, and each feature is drawn or named in
/// the caption as left out.
fn labels_stay_apart(data: &str, group: &str) {
    let dir = tempfile::tempdir().unwrap();
    let src = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/data")
        .join(data);
    fs::copy(&src, dir.path().join(data)).unwrap();
    fs::write(
        dir.path().join("r.toml"),
        format!(
            "format = 1\n[input]\nfile = \"{data}\"\ngroups = [\"{group}\"]\n[[plot]]\nkind = \"biplot\"\ncolor = \"{group}\"\n[[plot]]\nkind = \"correlation-circle\"\n[output]\nfolder = \"out\"\n"
        ),
    )
    .unwrap();
    let out = sextant(dir.path(), &["run", "r.toml"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    let header = fs::read_to_string(&src).unwrap();
    let features: BTreeSet<String> = header
        .lines()
        .next()
        .unwrap()
        .split(',')
        .filter(|c| *c != group)
        .map(String::from)
        .collect();
    for file in ["biplot-pc1-pc2.svg", "correlation-circle-pc1-pc2.svg"] {
        let svg = fs::read_to_string(dir.path().join("out/plots").join(file)).unwrap();
        let doc = parse(&svg);
        let boxes = label_boxes(&doc, &["arrow-labels", "labels"]);
        let clashes = overlapping(&boxes);
        assert!(clashes.is_empty(), "{data} {file}: {clashes:?}");
        let caption = caption(&doc);
        let drawn = label_boxes(&doc, &["arrow-labels"]);
        let left_out = listed_after(
            &caption,
            "Feature names left out where they would overlap another: ",
        );
        // A long name is drawn cut short with an ellipsis.
        let full = |t: String| match t.strip_suffix('…') {
            Some(cut) => features
                .iter()
                .find(|f| f.starts_with(cut))
                .cloned()
                .unwrap_or(t),
            None => t,
        };
        let named: BTreeSet<String> = drawn
            .into_iter()
            .map(|d| full(d.0))
            .chain(left_out.iter().cloned())
            .collect();
        assert_eq!(named, features, "{data} {file}: {caption}");
        assert_eq!(named.len(), features.len());
    }
}

#[test]
fn biplot_and_circle_labels_of_wdbc_do_not_overlap() {
    // Regression: the 30 feature names of WDBC (tests/data/SOURCES.md) were
    // placed where they overlapped the fewest others, so many overlapped.
    labels_stay_apart("breast_cancer_wdbc.csv", "class");
}

#[test]
fn biplot_and_circle_labels_of_wine_do_not_overlap() {
    // The 13 features of the wine data (tests/data/SOURCES.md), with the
    // row labels of the biplot placed around the names.
    labels_stay_apart("wine.csv", "class");
}

#[test]
fn max_labels_is_explained_and_refused_where_no_rows_are_drawn() {
    // The key is new: explain states the limit, and a plot without rows
    // refuses it, naming the key (exit 2, nothing written).
    let dir = large_run();
    let out = sextant(dir, &["explain", "large.toml"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    assert!(
        out.stdout
            .contains(&format!("at most {LIMIT} rows per plot")),
        "{}",
        out.stdout
    );
    let recipe = "format = 1\n[input]\nfile = \"large.csv\"\n[[plot]]\nkind = \"scree\"\nmax_labels = 5\n[output]\nfolder = \"scree-out\"\n";
    fs::write(dir.join("scree.toml"), recipe).unwrap();
    let out = sextant(dir, &["run", "scree.toml"]);
    assert_eq!(out.code, 2, "{}", out.stderr);
    assert!(out.stderr.contains("max_labels"), "{}", out.stderr);
    assert!(!dir.join("scree-out").exists());
}
