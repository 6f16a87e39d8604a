//! The figures: every plot kind drawn from small hand-made views with known
//! numbers and from a real run on the demo data. Each SVG must parse as XML,
//! carry the expected number of marks (found by their class), show the right
//! axis titles, come out byte-identical twice, switch to a density above the
//! threshold, and stay small for a million rows.

use sextant::error::Position;
use sextant::outputs::plots;
use sextant::outputs::view::{PlotView, ScreeEvidence};
use sextant::recipe::plots::PlotPlan;
use sextant::recipe::raw::{PlotKind, PointLabels};
use sextant::row_results::{RowResults, RowsIn};
use std::fs;
use std::path::Path;
use std::process::Command;
use std::sync::Arc;
use std::time::Instant;

const BIN: &str = env!("CARGO_BIN_EXE_sextant");

// ---------------------------------------------------------------- views ----

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

const FEATURES: [&str; 5] = ["alpha", "beta", "gamma", "delta", "epsilon"];

/// The rows of a test view, kept apart from it so a test can change them and
/// build the view again.
#[derive(Clone)]
struct Rows {
    scores: Vec<Vec<f64>>,
    ids: Vec<String>,
    sites: Vec<String>,
    t2: Vec<f64>,
    spe: Vec<f64>,
}

const EIGENVALUES: [f64; 3] = [2.0, 1.25, 0.75];

/// `n` rows on 3 components, a group column "site" with values given in
/// scrambled order, and every `flag_every`-th row above the T² limit of 9; the
/// other rows stay within both limits (T² at most 8.5, SPE at most 0.68 < 0.75).
fn rows(n: usize, flag_every: usize) -> Rows {
    let mut rng = Lcg(7);
    let scores: Vec<Vec<f64>> = (0..n)
        .map(|_| {
            EIGENVALUES
                .iter()
                // A sum of four uniforms: bell-shaped, with variance λ.
                .map(|l: &f64| {
                    let u = rng.next() + rng.next() + rng.next() + rng.next();
                    u * 1.732 * l.sqrt()
                })
                .collect()
        })
        .collect();
    let sites = ["south", "north", "east", "west"];
    let t2: Vec<f64> = scores
        .iter()
        .enumerate()
        .map(|(i, s)| {
            let t = s[0] * s[0] / 2.0 + s[1] * s[1] / 1.25;
            if i % flag_every == 3 {
                t + 12.0
            } else {
                t.min(8.5)
            }
        })
        .collect();
    Rows {
        ids: (0..n).map(|i| format!("row-{i:04}")).collect(),
        sites: (0..n)
            .map(|i| sites[(i * 7 + i / 3) % 4].to_string())
            .collect(),
        spe: (0..n).map(|i| 0.2 + (i % 7) as f64 * 0.08).collect(),
        scores,
        t2,
    }
}

impl Rows {
    /// The rows in the opposite order.
    fn reverse(&mut self) {
        self.scores.reverse();
        self.ids.reverse();
        self.sites.reverse();
        self.t2.reverse();
        self.spe.reverse();
    }

    /// The rows' results held in memory.
    fn results(&self) -> RowResults {
        let n = self.t2.len();
        RowResults::from_parts(
            EIGENVALUES.len(),
            &(0..n).collect::<Vec<_>>(),
            &self.scores.concat(),
            &self.t2,
            &self.spe,
            Some(("id".into(), self.ids.clone())),
            vec![("site".into(), self.sites.clone())],
        )
    }
}

/// The view `v` drawn from these rows.
fn with_rows(mut v: PlotView, rows: &Rows) -> PlotView {
    v.n_rows = rows.t2.len();
    v.rows = Arc::new(rows.results());
    v
}

/// A view of `n` rows (see [`rows`]), 5 features, 3 computed and 2 kept
/// components.
fn view(n: usize, flag_every: usize) -> PlotView {
    let eigenvalues = EIGENVALUES.to_vec();
    let total = 5.0;
    let loadings = vec![
        vec![0.6, 0.1, 0.2],
        vec![0.5, -0.4, 0.1],
        vec![-0.4, 0.6, 0.3],
        vec![0.3, 0.5, -0.7],
        vec![0.37, 0.46, 0.6],
    ];
    let correlations: Vec<Vec<f64>> = loadings
        .iter()
        .map(|r| {
            r.iter()
                .zip(&eigenvalues)
                .map(|(v, l)| v * l.sqrt())
                .collect()
        })
        .collect();
    let v = PlotView {
        features: FEATURES.iter().map(|s| s.to_string()).collect(),
        n_rows: n,
        eigenvalues: eigenvalues.clone(),
        total_variance: total,
        p: 5,
        kept: 2,
        computed: 3,
        rule: "broken-stick".into(),
        rule_reason: "components 1 to 2 each explain more than the broken-stick expectation".into(),
        evidence: ScreeEvidence {
            broken_stick: vec![0.4567, 0.2567, 0.1567],
            mean_eigenvalue: 1.0,
            variance_target: None,
            parallel_thresholds: None,
            press: None,
        },
        loadings,
        correlations,
        rows: Arc::default(),
        confidence: 0.95,
        t2_limit: Some(9.0),
        spe_limit: Some(0.75),
        scaling: sextant::recipe::raw::ScalingMethod::UnitVariance,
    };
    with_rows(v, &rows(n, flag_every))
}

/// Each row of the view: its scores, label and whether it is flagged.
fn rows_of(v: &PlotView) -> Vec<(Vec<f64>, String, bool)> {
    let mut out = Vec::new();
    v.rows.scan(|b| {
        for i in 0..b.len() {
            out.push((
                b.scores(i).to_vec(),
                b.label(i).into_owned(),
                v.is_flagged(b.t2(i), b.spe(i)),
            ));
        }
    });
    assert!(v.rows.take_error().is_none());
    out
}

/// Whether each row of the view is flagged.
fn flags(v: &PlotView) -> Vec<bool> {
    rows_of(v).into_iter().map(|r| r.2).collect()
}

/// The recipe's default `max_labels`.
const MAX_LABELS: usize = sextant::recipe::plots::DEFAULT_MAX_LABELS;

fn plan(kind: PlotKind, x: usize, y: usize) -> PlotPlan {
    PlotPlan {
        kind,
        file: format!("{}.svg", kind.name()),
        title: None,
        x,
        y,
        color: None,
        labels: PointLabels::Flagged,
        max_labels: MAX_LABELS,
        ellipse: None,
        density_above: 20_000,
        at: Position {
            line: 1,
            column: 1,
            line_text: String::new(),
        },
    }
}

fn all_plans() -> Vec<PlotPlan> {
    let mut scores = plan(PlotKind::Scores, 1, 2);
    scores.color = Some("site".into());
    scores.ellipse = Some(0.95);
    let mut biplot = plan(PlotKind::Biplot, 1, 2);
    biplot.color = Some("site".into());
    vec![
        plan(PlotKind::Scree, 0, 0),
        scores,
        plan(PlotKind::Loadings, 1, 0),
        plan(PlotKind::Loadings, 2, 3),
        biplot,
        plan(PlotKind::CorrelationCircle, 1, 3),
        plan(PlotKind::OutlierMap, 0, 0),
    ]
}

// -------------------------------------------------------------- reading ----

fn parse(svg: &str) -> roxmltree::Document<'_> {
    roxmltree::Document::parse(svg).unwrap_or_else(|e| panic!("not XML: {e}\n{svg}"))
}

fn has_class(node: &roxmltree::Node, class: &str) -> bool {
    node.attribute("class")
        .is_some_and(|c| c.split_whitespace().any(|w| w == class))
}

/// The elements with a class.
fn with_class<'a>(doc: &'a roxmltree::Document, class: &str) -> Vec<roxmltree::Node<'a, 'a>> {
    doc.descendants()
        .filter(|n| n.is_element() && has_class(n, class))
        .collect()
}

/// Shape elements (circle, rect, path, polygon) inside the elements of a class.
fn marks(doc: &roxmltree::Document, class: &str) -> usize {
    with_class(doc, class)
        .iter()
        .flat_map(|g| g.descendants())
        .filter(|n| matches!(n.tag_name().name(), "circle" | "rect" | "path" | "polygon"))
        .count()
}

/// The texts inside the elements of a class, in order.
fn texts(doc: &roxmltree::Document, class: &str) -> Vec<String> {
    with_class(doc, class)
        .iter()
        .flat_map(|g| g.descendants())
        .filter(|n| n.tag_name().name() == "text")
        .map(|n| n.text().unwrap_or("").trim().to_string())
        .collect()
}

/// Every text of the document.
fn all_texts(doc: &roxmltree::Document) -> Vec<String> {
    doc.descendants()
        .filter(|n| n.tag_name().name() == "text")
        .map(|n| n.text().unwrap_or("").trim().to_string())
        .collect()
}

/// Writes an SVG into the folder named by SEXTANT_PLOTS_DUMP, if set, for a
/// person to look at.
fn dump(name: &str, svg: &str) {
    if let Some(dir) = std::env::var_os("SEXTANT_PLOTS_DUMP") {
        fs::create_dir_all(&dir).unwrap();
        fs::write(Path::new(&dir).join(name), svg).unwrap();
    }
}

fn check_clean(svg: &str, what: &str) {
    for bad in ["NaN", "inf"] {
        assert!(!svg.contains(bad), "{what} contains {bad}");
    }
}

// ---------------------------------------------------------------- tests ----

#[test]
fn every_kind_is_an_svg_document_of_the_stated_size() {
    let v = view(60, 10);
    for (k, p) in all_plans().iter().enumerate() {
        let svg = plots::render(p, &v);
        dump(&format!("small-{k}-{}", p.file), &svg);
        let doc = parse(&svg);
        let root = doc.root_element();
        assert_eq!(root.tag_name().name(), "svg", "{}", p.file);
        assert_eq!(root.attribute("width"), Some("720"));
        assert_eq!(root.attribute("height"), Some("540"));
        assert_eq!(root.attribute("font-family"), Some("sans-serif"));
        check_clean(&svg, &p.file);
        // The title is drawn, and the caption is the document's description.
        let desc = doc
            .descendants()
            .find(|n| n.tag_name().name() == "desc")
            .and_then(|n| n.text())
            .unwrap_or("");
        assert_eq!(desc, plots::caption(p, &v), "{}", p.file);
        assert!(!svg.contains("font-family=\"serif\""));
        assert!(!svg.contains("@font-face") && !svg.contains("<image"));
    }
}

#[test]
fn two_renders_are_byte_identical() {
    let v = view(80, 9);
    for p in all_plans() {
        assert_eq!(plots::render(&p, &v), plots::render(&p, &v), "{}", p.file);
        assert_eq!(plots::caption(&p, &v), plots::caption(&p, &v));
    }
}

#[test]
fn scree_marks_bars_kept_components_and_evidence() {
    let mut v = view(30, 10);
    let p = plan(PlotKind::Scree, 0, 0);
    let svg = plots::render(&p, &v);
    let doc = parse(&svg);
    assert_eq!(marks(&doc, "bars"), 3, "one bar per computed component");
    assert_eq!(with_class(&doc, "kept").len(), 2, "kept bars");
    assert_eq!(marks(&doc, "cumulative"), 3);
    assert_eq!(marks(&doc, "broken-stick"), 3);
    assert!(with_class(&doc, "parallel").is_empty());
    assert!(with_class(&doc, "press").is_empty());
    assert!(with_class(&doc, "kaiser").is_empty());
    assert!(with_class(&doc, "variance-target").is_empty());
    assert_eq!(with_class(&doc, "kept-rule").len(), 1);
    assert!(all_texts(&doc).iter().any(|t| t == "k = 2 kept"));
    assert!(all_texts(&doc).iter().any(|t| t == "cumulative share (%)"));
    // The cumulative share ends at 80 % of the total (4 of 5): its last marker
    // sits at 80 on the share axis, which runs 0–105 over the plotting area.
    // The cumulative share ends at 80 % (4 of 5): its last marker sits at 80 on
    // the share axis, which runs from 0 to 105 over the plotting area (whose
    // top and bottom the kept rule spans).
    let rule = with_class(&doc, "kept-rule")[0]
        .children()
        .find(|n| n.tag_name().name() == "line")
        .unwrap();
    let num = |n: &roxmltree::Node, a: &str| n.attribute(a).unwrap().parse::<f64>().unwrap();
    let (top, bottom) = (num(&rule, "y1"), num(&rule, "y2"));
    let last = with_class(&doc, "cumulative")[0]
        .descendants()
        .rfind(|n| n.tag_name().name() == "circle")
        .unwrap();
    let expected = bottom - 80.0 / 105.0 * (bottom - top);
    assert!((num(&last, "cy") - expected).abs() < 0.6, "{expected}");
    // The first bar reaches eigenvalue 2 from the axis at the bottom.
    let bar = with_class(&doc, "bar")[0];
    assert!((num(&bar, "y") + num(&bar, "height") - bottom).abs() < 0.6);

    // Parallel analysis, PRESS and Kaiser's rule when they are the evidence.
    v.rule = "kaiser".into();
    v.evidence.parallel_thresholds = Some(vec![1.4, 1.1, 0.9]);
    v.evidence.press = Some(vec![10.0, 6.0, 4.5, 4.4]);
    let doc_svg = plots::render(&p, &v);
    let doc = parse(&doc_svg);
    assert_eq!(marks(&doc, "parallel"), 3);
    assert_eq!(marks(&doc, "press"), 4, "PRESS for k = 0..3");
    assert_eq!(with_class(&doc, "press-choice").len(), 1);
    assert_eq!(with_class(&doc, "kaiser").len(), 1);
    let caption = plots::caption(&p, &v);
    assert!(caption.contains("parallel-analysis"));
    assert!(caption.contains("PRESS"));
    assert!(caption.contains("Kaiser"));

    v.rule = "variance".into();
    v.evidence.variance_target = Some(0.7);
    let doc_svg = plots::render(&p, &v);
    let doc = parse(&doc_svg);
    assert_eq!(with_class(&doc, "variance-target").len(), 1);
    assert!(with_class(&doc, "kaiser").is_empty());
    assert!(all_texts(&doc).iter().any(|t| t == "target 70.0 %"));
}

#[test]
fn scores_show_every_row_with_groups_labels_and_ellipse() {
    let v = view(60, 10);
    let mut p = plan(PlotKind::Scores, 1, 2);
    p.color = Some("site".into());
    p.ellipse = Some(0.95);
    let svg = plots::render(&p, &v);
    let doc = parse(&svg);
    assert_eq!(marks(&doc, "points"), 60);
    let flagged = flags(&v).iter().filter(|&&f| f).count();
    assert_eq!(flagged, 6);
    assert_eq!(with_class(&doc, "flagged").len(), flagged);
    let labels = texts(&doc, "labels");
    assert_eq!(labels.len(), flagged);
    for (_, label, _) in rows_of(&v).iter().filter(|r| r.2) {
        assert!(labels.contains(label));
    }
    // Axis titles with the shares: 2/5 and 1.25/5.
    assert_eq!(v.axis_title(0), "PC1 (40.0 %)");
    let all = all_texts(&doc);
    assert!(all.contains(&v.axis_title(0)), "{all:?}");
    assert!(all.contains(&v.axis_title(1)));
    // Legend: groups sorted by name, each with its count.
    let legend = texts(&doc, "legend");
    let groups: Vec<&String> = legend.iter().filter(|t| t.contains('(')).collect();
    assert_eq!(groups[0].split(' ').next(), Some("east"));
    assert_eq!(groups[1].split(' ').next(), Some("north"));
    assert_eq!(groups[2].split(' ').next(), Some("south"));
    assert_eq!(groups[3].split(' ').next(), Some("west"));
    // Okabe & Ito colours in order.
    let fills: Vec<&str> = with_class(&doc, "group")
        .iter()
        .map(|g| g.attribute("fill").unwrap())
        .collect();
    for f in &fills {
        assert!(["#E69F00", "#56B4E9", "#009E73", "#F0E442"].contains(f));
    }
    // The ellipse: L from the Phase I limit for 2 components.
    let l = sextant::stats::limits::t2_limit_phase1(60, 2, 0.95).unwrap();
    let e = with_class(&doc, "ellipse");
    assert_eq!(e.len(), 1);
    let rx: f64 = e[0].attribute("rx").unwrap().parse().unwrap();
    let ry: f64 = e[0].attribute("ry").unwrap().parse().unwrap();
    // Equal scaling: the pixel radii keep the ratio √(L·2) : √(L·1.25).
    let expected = (2.0f64 / 1.25).sqrt();
    assert!((rx / ry - expected).abs() < 0.01, "{rx} {ry}");
    let caption = plots::caption(&p, &v);
    assert!(caption.contains("Hotelling T²"));
    assert!(
        caption.contains(&format!("{l:.3}")),
        "caption should state L = {l}: {caption}"
    );

    // labels = "all" and "none".
    p.labels = PointLabels::All;
    let doc_svg = plots::render(&p, &v);
    let labelled = texts(&parse(&doc_svg), "labels").len();
    assert!(
        labelled <= MAX_LABELS && labelled > MAX_LABELS / 2,
        "{labelled}"
    );
    assert!(plots::caption(&p, &v).contains("40 more are not"));
    p.max_labels = 60;
    let doc_svg = plots::render(&p, &v);
    let labelled = texts(&parse(&doc_svg), "labels").len();
    let caption = plots::caption(&p, &v);
    let left_out = caption
        .split("would overlap another: ")
        .nth(1)
        .map_or(0, |r| r.split(". ").next().unwrap().split(", ").count());
    assert_eq!(labelled + left_out, 60, "{caption}");
    p.labels = PointLabels::None;
    let doc_svg = plots::render(&p, &v);
    assert!(with_class(&parse(&doc_svg), "labels").is_empty());
}

#[test]
fn scores_use_equal_scaling() {
    let v = view(50, 10);
    let p = plan(PlotKind::Scores, 1, 2);
    let svg = plots::render(&p, &v);
    let doc = parse(&svg);
    // Two points: pixel distances along x and y per score unit agree.
    let pts: Vec<(f64, f64)> = with_class(&doc, "points")[0]
        .descendants()
        .filter(|n| n.tag_name().name() == "circle")
        .map(|n| {
            (
                n.attribute("cx").unwrap().parse().unwrap(),
                n.attribute("cy").unwrap().parse().unwrap(),
            )
        })
        .collect();
    // Without a colour all rows are grey circles drawn in row order.
    assert_eq!(pts.len(), 50);
    let rows = rows_of(&v);
    let unflagged: Vec<usize> = (0..50).filter(|&i| !rows[i].2).collect();
    let (i, j) = (unflagged[0], unflagged[1]);
    let (a, b) = (pts[0], pts[1]);
    let sx = (a.0 - b.0) / (rows[i].0[0] - rows[j].0[0]);
    let sy = -(a.1 - b.1) / (rows[i].0[1] - rows[j].0[1]);
    assert!(
        (sx - sy).abs() / sx < 0.02,
        "x {sx} px/unit, y {sy} px/unit"
    );
    let neutral = with_class(&doc, "group")[0].attribute("fill").unwrap();
    assert_eq!(neutral, "#8C8C8C");
}

#[test]
fn legend_does_not_depend_on_row_order() {
    let v = view(40, 10);
    let mut r = rows(40, 10);
    r.reverse();
    let reversed = with_rows(v.clone(), &r);
    let mut p = plan(PlotKind::Scores, 1, 2);
    p.color = Some("site".into());
    let a = plots::render(&p, &v);
    let b = plots::render(&p, &reversed);
    assert_eq!(texts(&parse(&a), "legend"), texts(&parse(&b), "legend"));
}

#[test]
fn many_groups_cycle_colours_and_shapes() {
    let mut r = rows(120, 1000);
    r.sites = (0..120).map(|i| format!("g{}", i % 12)).collect();
    let v = with_rows(view(120, 1000), &r);
    let mut p = plan(PlotKind::Scores, 1, 2);
    p.color = Some("site".into());
    let svg = plots::render(&p, &v);
    let doc = parse(&svg);
    // Row 3 is flagged: its group gets a second run on top, so take the
    // first run of each group.
    let mut groups = with_class(&doc, "group");
    groups.dedup_by(|b, a| a.attribute("data-group") == b.attribute("data-group"));
    let mut seen = std::collections::BTreeSet::new();
    groups.retain(|g| seen.insert(g.attribute("data-group").unwrap().to_string()));
    assert_eq!(groups.len(), 12);
    // Natural order: g0, g1, …, g9, g10, g11.
    assert_eq!(groups[2].attribute("data-group"), Some("g2"));
    assert_eq!(groups[10].attribute("data-group"), Some("g10"));
    // Group 8 repeats group 0's colour with another shape.
    assert_eq!(groups[8].attribute("fill"), groups[0].attribute("fill"));
    let first_tag = |g: &roxmltree::Node| {
        g.children()
            .find(|n| n.is_element())
            .unwrap()
            .tag_name()
            .name()
            .to_string()
    };
    assert_eq!(first_tag(&groups[0]), "circle");
    assert_ne!(first_tag(&groups[8]), "circle");
}

#[test]
fn loadings_bars_and_scatter() {
    let v = view(20, 10);
    let p = plan(PlotKind::Loadings, 1, 0);
    let svg = plots::render(&p, &v);
    let doc = parse(&svg);
    assert_eq!(marks(&doc, "bars"), 5);
    assert_eq!(texts(&doc, "tick-labels"), FEATURES);
    let negative = with_class(&doc, "bars")[0]
        .children()
        .filter(|n| n.attribute("fill") == Some("#D55E00"))
        .count();
    assert_eq!(negative, 1, "gamma loads negatively on PC1");
    assert!(all_texts(&doc).contains(&format!("loading on {}", v.axis_title(0))));

    let p = plan(PlotKind::Loadings, 2, 3);
    let svg = plots::render(&p, &v);
    let doc = parse(&svg);
    assert_eq!(marks(&doc, "points"), 5);
    let mut labels = texts(&doc, "labels");
    labels.sort();
    let mut expected: Vec<String> = FEATURES.iter().map(|s| s.to_string()).collect();
    expected.sort();
    assert_eq!(labels, expected);
    let all = all_texts(&doc);
    assert!(all.contains(&format!("loading on {}", v.axis_title(1))));
    assert!(all.contains(&format!("loading on {}", v.axis_title(2))));
    let caption = plots::caption(&p, &v);
    assert!(caption.contains("PC3 (15.0 %"), "{caption}");
}

#[test]
fn biplot_states_its_scaling_and_draws_it() {
    let v = view(60, 10);
    let mut p = plan(PlotKind::Biplot, 1, 2);
    p.color = Some("site".into());
    let svg = plots::render(&p, &v);
    let doc = parse(&svg);
    assert_eq!(marks(&doc, "points"), 60);
    assert_eq!(marks(&doc, "arrows"), 5);
    let mut names = texts(&doc, "arrow-labels");
    names.sort();
    let mut expected: Vec<String> = FEATURES.iter().map(|s| s.to_string()).collect();
    expected.sort();
    assert_eq!(names, expected);

    // The stretch, worked out independently: the largest of 1, 2, 2.5, 5 × 10ᵉ
    // that is at most 0.9 × (largest |unit-variance score|) / (longest arrow).
    let (l1, l2) = (v.eigenvalues[0].sqrt(), v.eigenvalues[1].sqrt());
    let reach = rows_of(&v)
        .iter()
        .map(|r| &r.0)
        .flat_map(|s| [(s[0] / l1).abs(), (s[1] / l2).abs()])
        .fold(0.0, f64::max);
    let longest = v
        .loadings
        .iter()
        .map(|r| ((r[0] * l1).powi(2) + (r[1] * l2).powi(2)).sqrt())
        .fold(0.0, f64::max);
    let raw = 0.9 * reach / longest;
    let mut best = 0.0;
    for e in -3..4 {
        for m in [1.0, 2.0, 2.5, 5.0] {
            let c = m * 10f64.powi(e);
            if c <= raw && c > best {
                best = c;
            }
        }
    }
    let caption = plots::caption(&p, &v);
    assert!(caption.contains("Gabriel 1971"), "{caption}");
    assert!(caption.contains("covariance form"));
    assert!(caption.contains("divided by √λ"));
    assert!(caption.contains("multiplied by √λ"));
    let factor = format!("common factor {}", format_factor(best));
    assert!(caption.contains(&factor), "{factor} in {caption}");

    // The arrow of the first feature ends at loading × √λ × factor, in the
    // same pixels per unit as the points.
    let arrow = with_class(&doc, "arrows")[0]
        .children()
        .find(|n| n.tag_name().name() == "path")
        .unwrap();
    let d = arrow.attribute("d").unwrap();
    let nums: Vec<f64> = d
        .split(['M', 'L', ' '])
        .filter(|s| !s.is_empty())
        .map(|s| s.parse().unwrap())
        .collect();
    let (ox, oy, tx, ty) = (nums[0], nums[1], nums[2], nums[3]);
    let ux = v.loadings[0][0] * l1 * best;
    let uy = v.loadings[0][1] * l2 * best;
    let sx = (tx - ox) / ux;
    let sy = -(ty - oy) / uy;
    assert!((sx - sy).abs() / sx < 0.03, "{sx} {sy}");
    let all = all_texts(&doc);
    assert!(all.iter().any(|t| t.starts_with(&v.axis_title(0))));
}

fn format_factor(f: f64) -> String {
    let s = format!("{f:.2}");
    s.trim_end_matches('0').trim_end_matches('.').to_string()
}

#[test]
fn correlation_circle_has_unit_circle_and_arrows() {
    let v = view(20, 10);
    let p = plan(PlotKind::CorrelationCircle, 1, 3);
    let svg = plots::render(&p, &v);
    let doc = parse(&svg);
    assert_eq!(with_class(&doc, "unit-circle").len(), 1);
    assert_eq!(marks(&doc, "arrows"), 5);
    assert_eq!(texts(&doc, "arrow-labels").len(), 5);
    let all = all_texts(&doc);
    assert!(all.contains(&format!("correlation with {}", v.axis_title(0))));
    assert!(all.contains(&format!("correlation with {}", v.axis_title(2))));
    // Equal axes from −1 to 1: the circle's radius is the same in both.
    let circle = &with_class(&doc, "unit-circle")[0];
    let r: f64 = circle.attribute("r").unwrap().parse().unwrap();
    assert!(r > 150.0);
    for tick in ["-1", "-0.5", "0", "0.5", "1"] {
        assert!(all.iter().filter(|t| *t == tick).count() >= 2, "{tick}");
    }
}

#[test]
fn outlier_map_has_limits_or_says_why_not() {
    let mut v = view(50, 10);
    let p = plan(PlotKind::OutlierMap, 0, 0);
    let svg = plots::render(&p, &v);
    let doc = parse(&svg);
    assert_eq!(marks(&doc, "points"), 50);
    assert_eq!(with_class(&doc, "t2-limit").len(), 1);
    assert_eq!(with_class(&doc, "spe-limit").len(), 1);
    assert_eq!(texts(&doc, "labels").len(), 5, "flagged rows labelled");
    assert!(
        all_texts(&doc)
            .iter()
            .any(|t| t.starts_with("Hotelling's T²"))
    );

    // A row far beyond the T² limit puts that axis on a square-root scale.
    let mut r = rows(50, 10);
    r.t2[0] = 100.0 * 9.0;
    let far = with_rows(v.clone(), &r);
    let svg = plots::render(&p, &far);
    let doc = parse(&svg);
    assert!(
        all_texts(&doc)
            .iter()
            .any(|t| t.starts_with("Hotelling's T²") && t.ends_with("square-root scale"))
    );
    assert!(plots::caption(&p, &far).contains("The T² axis has a square-root scale"));
    assert!(!plots::caption(&p, &v).contains("square-root"));
    // The limit line sits at √9 = 3 of √900 = 30 (plus 5 % padding): the
    // farthest point's x is 10 times the limit line's x from the axis.
    let line = &with_class(&doc, "t2-limit")[0];
    let lx: f64 = line.attribute("x1").unwrap().parse().unwrap();
    let xs: Vec<f64> = with_class(&doc, "points")[0]
        .descendants()
        .filter_map(|n| n.attribute("x").or(n.attribute("cx")))
        .map(|x| x.parse().unwrap())
        .collect();
    let max_x = xs.iter().cloned().fold(f64::MIN, f64::max);
    let origin = 70.0; // the plotting area's left edge
    assert!(
        ((max_x + 3.6 * 0.89 - origin) / (lx - origin) - 10.0).abs() < 0.2,
        "{max_x} {lx}"
    );

    v.spe_limit = None;
    let svg = plots::render(&p, &v);
    let doc = parse(&svg);
    assert_eq!(with_class(&doc, "t2-limit").len(), 1);
    assert!(with_class(&doc, "spe-limit").is_empty());
    let caption = plots::caption(&p, &v);
    assert!(caption.contains("No SPE limit is defined"), "{caption}");
    v.t2_limit = None;
    let svg = plots::render(&p, &v);
    assert!(with_class(&parse(&svg), "t2-limit").is_empty());
    assert!(plots::caption(&p, &v).contains("No T² limit is defined"));
}

#[test]
fn density_replaces_points_above_the_threshold() {
    let v = view(5_000, 50);
    let flagged = flags(&v).iter().filter(|&&f| f).count();
    for kind in [PlotKind::Scores, PlotKind::Biplot, PlotKind::OutlierMap] {
        let (x, y) = if kind == PlotKind::OutlierMap {
            (0, 0)
        } else {
            (1, 2)
        };
        let mut p = plan(kind, x, y);
        p.density_above = 1_000;
        let svg = plots::render(&p, &v);
        let doc = parse(&svg);
        // Only the labelled rows are drawn as points on top of the density.
        assert_eq!(
            marks(&doc, "points"),
            flagged.min(MAX_LABELS),
            "{}",
            kind.name()
        );
        assert_eq!(with_class(&doc, "flagged").len(), flagged.min(MAX_LABELS));
        assert!(marks(&doc, "density") > 10, "{}", kind.name());
        assert!(texts(&doc, "legend").iter().any(|t| t == "rows per square"));
        assert!(plots::caption(&p, &v).contains("instead of every point"));
        // At the threshold itself every point is drawn.
        p.density_above = 5_000;
        let svg = plots::render(&p, &v);
        let doc = parse(&svg);
        assert_eq!(marks(&doc, "points"), 5_000);
        assert!(with_class(&doc, "density").is_empty());
    }
}

#[test]
fn a_million_rows_render_small_and_fast() {
    let v = view(1_000_000, 37);
    let flagged = flags(&v).iter().filter(|&&f| f).count();
    assert!(flagged > 2 * MAX_LABELS);
    for kind in [PlotKind::Scores, PlotKind::Biplot, PlotKind::OutlierMap] {
        let (x, y) = if kind == PlotKind::OutlierMap {
            (0, 0)
        } else {
            (1, 2)
        };
        let mut p = plan(kind, x, y);
        if kind != PlotKind::OutlierMap {
            p.color = Some("site".into());
        }
        let start = Instant::now();
        let svg = plots::render(&p, &v);
        let caption = plots::caption(&p, &v);
        let took = start.elapsed();
        eprintln!(
            "{}: 1,000,000 rows -> {} bytes in {:.2} s",
            kind.name(),
            svg.len(),
            took.as_secs_f64()
        );
        dump(&format!("million-{}.svg", kind.name()), &svg);
        assert!(svg.len() < 1_000_000, "{} bytes", svg.len());
        assert!(took.as_secs() < 30, "{took:?}");
        check_clean(&svg, kind.name());
        let doc = parse(&svg);
        assert_eq!(marks(&doc, "points"), MAX_LABELS);
        assert!(texts(&doc, "labels").len() <= MAX_LABELS);
        assert!(caption.contains("every row is counted in exactly one square"));
        assert!(caption.contains(&format!("{} more are not", flagged - MAX_LABELS)));
    }
}

#[test]
fn row_layers_count_every_row_once_at_110k_rows() {
    // Regression: in density mode the most severe flagged rows were drawn as
    // points instead of being counted in the density, so each kind's density
    // stopped at a hard edge. Design: every finite row is in exactly one
    // density cell of its kind; the rows drawn as points are in it too.
    let mut r = rows(110_000, 37);
    r.spe[3] = 40.0; // above both limits (row 3 is above the T² limit)
    r.spe[6] = 40.0; // above the SPE limit only
    r.t2[8] = f64::NAN; // left out
    let v = with_rows(view(110_000, 37), &r);
    let kind = |t2: f64, spe: f64| usize::from(t2 > 9.0) + 2 * usize::from(spe > 0.75);
    let mut p = plan(PlotKind::OutlierMap, 0, 0);
    assert!(plots::row_layers(&p, &view(300, 7)).is_none(), "point mode");
    let layers = plots::row_layers(&p, &v).expect("density mode");
    assert_eq!(layers.cells.len(), 110_000);
    assert_eq!(layers.categories.len(), 4);
    let mut per_kind = [0usize; 4];
    let mut owner = std::collections::BTreeMap::new();
    for (i, cell) in layers.cells.iter().enumerate() {
        let Some(c) = cell else {
            assert_eq!(i, 8, "only the row with a NaN is left out");
            continue;
        };
        assert_eq!(c.category, kind(r.t2[i], r.spe[i]), "row {i}");
        per_kind[c.category] += 1;
        // Cells are pure: the grid's borders fall on the limit lines.
        let first = *owner.entry((c.cx, c.cy)).or_insert(c.category);
        assert_eq!(first, c.category, "cell {:?} holds two kinds", (c.cx, c.cy));
    }
    let mut expected = [0usize; 4];
    for i in (0..110_000).filter(|&i| i != 8) {
        expected[kind(r.t2[i], r.spe[i])] += 1;
    }
    assert_eq!(per_kind, expected);
    assert_eq!(per_kind.iter().sum::<usize>(), 109_999);
    assert!(!layers.points.is_empty() && layers.points.len() <= MAX_LABELS);
    assert!(layers.points.iter().all(|&row| layers.cells[row].is_some()));
    assert!(layers.points.contains(&3) && layers.points.contains(&6));
    // The score plot: two kinds (within, above a limit), every row counted.
    p = plan(PlotKind::Scores, 1, 2);
    let layers = plots::row_layers(&p, &v).expect("density mode");
    let above = layers
        .cells
        .iter()
        .flatten()
        .filter(|c| c.category == 1)
        .count();
    let flagged = flags(&v).iter().filter(|&&f| f).count();
    assert_eq!(above, flagged);
    assert_eq!(layers.cells.iter().flatten().count(), 110_000);
}

#[test]
fn degenerate_views_give_no_nan_or_inf() {
    // All scores zero, one eigenvalue zero, non-finite values in places.
    let mut r = rows(6, 2);
    r.scores.iter_mut().flatten().for_each(|s| *s = 0.0);
    r.t2 = vec![0.0; 6];
    r.spe = vec![0.0; 6];
    let mut v = with_rows(view(6, 2), &r);
    v.eigenvalues[2] = 0.0;
    for p in all_plans() {
        let svg = plots::render(&p, &v);
        parse(&svg);
        check_clean(&svg, &p.file);
    }
    let mut r = rows(10, 3);
    r.scores[1][0] = f64::NAN;
    r.scores[2][1] = f64::INFINITY;
    r.t2[4] = f64::INFINITY;
    let mut w = with_rows(view(10, 3), &r);
    w.loadings[1][0] = f64::NAN;
    w.correlations[2][1] = f64::NAN;
    for p in all_plans() {
        let svg = plots::render(&p, &w);
        parse(&svg);
        check_clean(&svg, &p.file);
        check_clean(&plots::caption(&p, &w), &p.file);
    }
    // A zero total variance leaves shares undefined, still without NaN.
    let mut z = view(8, 3);
    z.total_variance = 0.0;
    for p in all_plans() {
        let svg = plots::render(&p, &z);
        parse(&svg);
        check_clean(&svg, &p.file);
        check_clean(&plots::caption(&p, &z), &p.file);
    }
    // An empty view draws a placeholder instead of panicking.
    let empty = PlotView::default();
    for p in all_plans() {
        let svg = plots::render(&p, &empty);
        parse(&svg);
        check_clean(&svg, &p.file);
    }
}

#[test]
fn rows_in_a_scratch_file_draw_the_same_bytes() {
    // Invariant: where the rows are kept (memory or a scratch file, one run or
    // many) must not change a figure. A 64-byte budget spills every run; runs
    // of 7 rows put run edges everywhere, and 3,000 flagged rows of 6,000 make
    // the density mode prune its candidates (more than 2 × max_labels).
    let dir = tempfile::tempdir().unwrap();
    for (n, flag_every, density_above) in [(300, 7, 20_000), (6_000, 2, 1_000)] {
        let r = rows(n, flag_every);
        let held = view(n, flag_every);
        let mut spilled =
            RowResults::new(3, Some("id".into()), vec!["site".into()], 64, dir.path());
        for first in (0..n).step_by(7) {
            let last = n.min(first + 7);
            let table_rows: Vec<usize> = (first..last).collect();
            spilled
                .push(RowsIn {
                    table_rows: &table_rows,
                    scores: &r.scores[first..last].concat(),
                    t2: &r.t2[first..last],
                    spe: &r.spe[first..last],
                    texts: (first..last)
                        .flat_map(|i| [r.ids[i].clone(), r.sites[i].clone()])
                        .collect(),
                })
                .unwrap();
        }
        assert!(spilled.spilled() && !held.rows.spilled());
        let mut from_file = held.clone();
        from_file.rows = Arc::new(spilled);
        for mut p in all_plans() {
            p.density_above = density_above;
            for labels in [PointLabels::Flagged, PointLabels::All] {
                p.labels = labels;
                let svg = plots::render(&p, &held);
                if n > density_above && p.kind == PlotKind::Scores {
                    assert!(svg.contains("density-class"), "density mode");
                }
                assert_eq!(svg, plots::render(&p, &from_file), "{} {n}", p.file);
                assert_eq!(plots::caption(&p, &held), plots::caption(&p, &from_file));
            }
        }
        assert!(from_file.rows.take_error().is_none());
    }
}

/// Rows for the pinned figures: `n` rows on 3 components; every
/// `flag_every`-th row above the T² limit with one of five T² values (ties in
/// severity), every 13th above the SPE limit; `far` puts row 1 far beyond the
/// T² limit (bit 1) and row 2 far beyond the SPE limit (bit 2); `odd` puts
/// non-finite values, a zero T² and a negative zero among the rows. The group
/// "site" has an empty value and names with digit runs; table rows are 1, 3, 5, …
fn pinned_view(n: usize, flag_every: usize, far: u32, odd: bool, seed: u64, ids: bool) -> PlotView {
    let mut rng = Lcg(seed);
    let mut scores = Vec::with_capacity(3 * n);
    for _ in 0..n {
        for l in EIGENVALUES {
            let u = rng.next() + rng.next() + rng.next() + rng.next();
            scores.push(u * 1.732 * l.sqrt());
        }
    }
    let mut t2: Vec<f64> = (0..n)
        .map(|i| {
            let s = &scores[3 * i..3 * i + 3];
            if i % flag_every == 3 {
                12.0 + (i % 5) as f64
            } else {
                s[0] * s[0] / 2.0 + s[1] * s[1] / 1.25
            }
        })
        .collect();
    let mut spe: Vec<f64> = (0..n)
        .map(|i| {
            if i % 13 == 5 {
                0.9 + (i % 3) as f64 * 0.1
            } else {
                0.2 + (i % 7) as f64 * 0.07
            }
        })
        .collect();
    if far & 1 != 0 {
        t2[1] = 900.0;
    }
    if far & 2 != 0 {
        spe[2] = 80.0;
    }
    if odd {
        scores[3 * 4] = f64::NAN;
        scores[3 * 7 + 1] = f64::INFINITY;
        scores[3 * 9 + 2] = f64::NEG_INFINITY;
        t2[11] = f64::INFINITY;
        spe[17] = f64::NAN;
        t2[13] = 0.0;
        scores[3 * 13] = -0.0;
    }
    let sites = ["south", "north", "east", "west", "", "site 10", "site 2"];
    let mut v = view(0, 1);
    v.n_rows = n;
    v.correlations = v.loadings.clone();
    v.rows = Arc::new(RowResults::from_parts(
        3,
        &(0..n).map(|i| 2 * i + 1).collect::<Vec<_>>(),
        &scores,
        &t2,
        &spe,
        ids.then(|| ("id".to_string(), (0..n).map(|i| format!("r{i}")).collect())),
        vec![(
            "site".into(),
            (0..n)
                .map(|i| sites[(i * 7 + i / 3) % 7].to_string())
                .collect(),
        )],
    ));
    v
}

#[test]
fn pinned_figures_keep_their_bytes() {
    // Regression pin (tests/data/plot_digests.txt): figures drawn from whole
    // per-row vectors, before the rows were read in passes, in point mode
    // (300 rows) and density mode (30,000 rows, more than 2,000 flagged), with
    // and without ids, groups, labels, root scales and non-finite values.
    let pinned = fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/plot_digests.txt"),
    )
    .unwrap();
    let expected: Vec<(&str, &str)> = pinned
        .lines()
        .filter(|l| !l.starts_with('#'))
        .map(|l| (&l[66..], &l[..64]))
        .collect();
    let views = [
        ("small", pinned_view(300, 10, 0, true, 7, true)),
        ("small-far-noid", pinned_view(300, 10, 3, true, 8, false)),
        ("big", pinned_view(30_000, 10, 0, true, 11, true)),
        ("big-far", pinned_view(30_000, 25, 3, true, 12, true)),
    ];
    let mut drawn = Vec::new();
    for (name, v) in &views {
        for (kind, x, y) in [
            (PlotKind::Scores, 1, 2),
            (PlotKind::Biplot, 1, 3),
            (PlotKind::OutlierMap, 0, 0),
        ] {
            for labels in [PointLabels::Flagged, PointLabels::All] {
                for colour in [None, Some("site")] {
                    if kind == PlotKind::OutlierMap && colour.is_some() {
                        continue;
                    }
                    let mut p = plan(kind, x, y);
                    p.labels = labels;
                    p.color = colour.map(String::from);
                    if kind == PlotKind::Scores {
                        p.ellipse = Some(0.95);
                    }
                    let key = format!(
                        "{name}--{}-{x}{y}-{labels:?}-{}",
                        kind.name(),
                        colour.unwrap_or("none")
                    );
                    let svg = plots::render(&p, v);
                    drawn.push((key, sextant::outputs::hashing::sha256_hex(svg.as_bytes())));
                }
            }
        }
    }
    if std::env::var_os("SEXTANT_REWRITE_PINS").is_some() {
        // On purpose only: a change meant to alter these figures.
        let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/plot_digests.txt");
        let mut text: String = pinned
            .lines()
            .filter(|l| l.starts_with('#'))
            .map(|l| format!("{l}\n"))
            .collect();
        for (key, digest) in &drawn {
            text.push_str(&format!("{digest}  {key}\n"));
        }
        fs::write(path, text).unwrap();
        return;
    }
    assert_eq!(drawn.len(), expected.len());
    for ((key, digest), (want_key, want)) in drawn.iter().zip(&expected) {
        assert_eq!((key.as_str(), digest.as_str()), (*want_key, *want));
    }
}

// ------------------------------------------------------------ real runs ----

fn copy_dir(from: &Path, to: &Path) {
    fs::create_dir_all(to).unwrap();
    for entry in fs::read_dir(from).unwrap() {
        let entry = entry.unwrap();
        let target = to.join(entry.file_name());
        if entry.file_type().unwrap().is_dir() {
            copy_dir(&entry.path(), &target);
        } else {
            fs::copy(entry.path(), target).unwrap();
        }
    }
}

const PLOTS: &str = r#"
[[plot]]
kind = "scree"
[[plot]]
kind = "scores"
color = "farm"
ellipse = 0.95
[[plot]]
kind = "loadings"
[[plot]]
kind = "loadings"
x = 1
y = 2
[[plot]]
kind = "biplot"
color = "season"
[[plot]]
kind = "correlation-circle"
[[plot]]
kind = "outlier-map"
labels = "all"
"#;

/// Runs the dairy demo recipe with every plot kind in a fresh copy; returns
/// the plots/ folder's files (name, text).
fn run_demo(dir: &Path) -> Vec<(String, String)> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    copy_dir(&root.join("recipes"), &dir.join("recipes"));
    copy_dir(&root.join("demo-data"), &dir.join("demo-data"));
    let base = fs::read_to_string(dir.join("recipes/dairy-march.toml")).unwrap();
    // The demo recipe's own plots are replaced by one of every kind.
    let mut doc: toml_edit::DocumentMut = base.parse().unwrap();
    doc.remove("plot");
    let recipe = format!("{}\n{PLOTS}", doc.to_string().trim_end());
    fs::write(dir.join("recipes/every-plot.toml"), recipe).unwrap();
    let out = Command::new(BIN)
        .args(["run", "every-plot.toml"])
        .current_dir(dir.join("recipes"))
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "run failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let toml: toml::Table = base.parse().unwrap();
    let folder = toml["output"]["folder"].as_str().unwrap().to_string();
    let plots = dir.join("recipes").join(folder).join("plots");
    let mut files: Vec<(String, String)> = fs::read_dir(&plots)
        .unwrap()
        .map(|e| {
            let e = e.unwrap();
            (
                e.file_name().to_string_lossy().into_owned(),
                fs::read_to_string(e.path()).unwrap(),
            )
        })
        .collect();
    files.sort();
    files
}

/// "PC1 (40.5 %)" from variance.csv, as the view's axis_title writes it.
fn shares_from_variance(dir: &Path) -> Vec<String> {
    let root = dir.join("recipes");
    let base = fs::read_to_string(root.join("dairy-march.toml")).unwrap();
    let toml: toml::Table = base.parse().unwrap();
    let folder = toml["output"]["folder"].as_str().unwrap();
    let text = fs::read_to_string(root.join(folder).join("variance.csv")).unwrap();
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let share = header.iter().position(|h| *h == "share").unwrap();
    lines
        .enumerate()
        .map(|(i, l)| {
            let v: f64 = l.split(',').nth(share).unwrap().parse().unwrap();
            format!("PC{} ({:.1} %)", i + 1, 100.0 * v)
        })
        .collect()
}

#[test]
fn the_demo_run_draws_every_kind() {
    let dir = tempfile::tempdir().unwrap();
    let files = run_demo(dir.path());
    let names: Vec<&str> = files.iter().map(|f| f.0.as_str()).collect();
    assert_eq!(
        names,
        [
            "biplot-pc1-pc2.svg",
            "correlation-circle-pc1-pc2.svg",
            "loadings-pc1-pc2.svg",
            "loadings-pc1.svg",
            "outlier-map.svg",
            "scores-pc1-pc2.svg",
            "scree.svg"
        ]
    );
    let titles = shares_from_variance(dir.path());
    let rows = 400;
    let features = 17;
    for (name, svg) in &files {
        let doc = parse(svg);
        check_clean(svg, name);
        assert!(svg.len() < 200_000, "{name}: {} bytes", svg.len());
        let all = all_texts(&doc);
        let has_title = |t: &str| all.iter().any(|x| x.contains(t));
        match name.as_str() {
            "scree.svg" => {
                assert_eq!(marks(&doc, "bars"), 10);
                assert_eq!(marks(&doc, "broken-stick"), 10);
            }
            "scores-pc1-pc2.svg" => {
                assert_eq!(marks(&doc, "points"), rows);
                let farms: std::collections::BTreeSet<&str> = with_class(&doc, "group")
                    .iter()
                    .map(|g| g.attribute("data-group").unwrap())
                    .collect();
                assert_eq!(farms.len(), 6, "six farms");
                assert_eq!(with_class(&doc, "ellipse").len(), 1);
                assert!(has_title(&titles[0]) && has_title(&titles[1]), "{all:?}");
            }
            "loadings-pc1.svg" => {
                assert_eq!(marks(&doc, "bars"), features);
                assert!(has_title(&titles[0]));
            }
            "loadings-pc1-pc2.svg" => {
                assert_eq!(marks(&doc, "points"), features);
                assert!(has_title(&titles[0]) && has_title(&titles[1]));
            }
            "biplot-pc1-pc2.svg" => {
                assert_eq!(marks(&doc, "points"), rows);
                assert_eq!(marks(&doc, "arrows"), features);
                assert!(has_title(&titles[0]) && has_title(&titles[1]));
            }
            "correlation-circle-pc1-pc2.svg" => {
                assert_eq!(marks(&doc, "arrows"), features);
                assert!(has_title(&titles[0]) && has_title(&titles[1]));
            }
            "outlier-map.svg" => {
                assert_eq!(marks(&doc, "points"), rows);
                // labels = "all": the 20 most severe rows (max_labels), each
                // drawn or named in the caption as left out for want of room.
                let caption = doc
                    .descendants()
                    .find(|n| n.has_tag_name("desc"))
                    .and_then(|n| n.text())
                    .unwrap_or("");
                let left_out = caption
                    .split("Left out where the label would overlap another: ")
                    .nth(1)
                    .map_or(0, |rest| {
                        rest.split(". ").next().unwrap().split(", ").count()
                    });
                assert_eq!(texts(&doc, "labels").len() + left_out, MAX_LABELS.min(rows));
            }
            _ => unreachable!(),
        }
    }
    // A second run in another folder gives the same bytes.
    let again = tempfile::tempdir().unwrap();
    assert_eq!(files, run_demo(again.path()));
}
