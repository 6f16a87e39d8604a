//! Conventions the README and `explain` state: an SPE limit that does not
//! exist leaves its flags empty and says why; uncentred data carry a caution
//! on their limits; `explain` spells out the kNN distance, the contributions,
//! the iterative-PCA stopping rule and that Kaiser and the broken stick use p.

#[allow(dead_code)] // only `sextant` is used here
mod common;

use common::{hadamard, sextant};
use std::fs;
use std::path::Path;

/// 64 rows × 32 features, Σₖ cₖ uₖ vₖᵀ with uₖ column k + 1 of the order-64
/// Hadamard matrix (centred, orthogonal) and vₖ column k of the order-32 one,
/// so the eigenvalues (divisor 63) are 2048 cₖ²/63 exactly. After two kept
/// components (c = 64, 32) the residual holds one component with c = 4 and 28
/// with c = 0.75: θ₁ ∝ 16 + 28·0.5625 = 31.75, θ₂ ∝ 256 + 28·0.5625² ≈ 264.86,
/// θ₃ ∝ 4096 + 28·0.5625³ ≈ 4100.98, so h₀ = 1 − 2θ₁θ₃/(3θ₂²) ≈ −0.237: no
/// Jackson–Mudholkar limit exists (the scale cancels in h₀).
fn write_unequal_residual_table(dir: &Path) {
    let (u, v) = (hadamard(64), hadamard(32));
    let mut c = vec![64.0, 32.0, 4.0];
    c.extend([0.75; 28]);
    let mut text: String = (0..32)
        .map(|j| format!("f{j:02}"))
        .collect::<Vec<_>>()
        .join(",");
    text.push('\n');
    for i in 0..64 {
        let row: Vec<String> = (0..32)
            .map(|j| {
                let x: f64 = (0..c.len()).map(|k| c[k] * u[i][k + 1] * v[j][k]).sum();
                format!("{x}")
            })
            .collect();
        text.push_str(&(row.join(",") + "\n"));
    }
    fs::write(dir.join("data.csv"), text).unwrap();
}

fn run(dir: &Path, body: &str) -> serde_json::Value {
    fs::write(
        dir.join("r.toml"),
        format!("format = 1\n[input]\nfile = \"data.csv\"\n{body}\n[output]\nfolder = \"out\"\n"),
    )
    .unwrap();
    let out = sextant(dir, &["run", "--replace", "r.toml"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    serde_json::from_slice(&fs::read(dir.join("out/manifest.json")).unwrap()).unwrap()
}

/// Regression: with Jackson–Mudholkar and h₀ ≤ 0 no SPE limit exists, yet
/// every row of scores.csv said `no` in SPE_above, as if it had been checked
/// and passed. The column is now empty, the T² flags stay, and the manifest
/// and the report say why.
#[test]
fn spe_above_said_no_where_no_jackson_mudholkar_limit_exists() {
    let dir = tempfile::tempdir().unwrap();
    write_unequal_residual_table(dir.path());
    let m = run(
        dir.path(),
        "[scaling]\nmethod = \"center\"\n[components]\nkeep = 2\n[diagnostics]\nconfidence = [0.95, 0.99]",
    );
    let diag = &m["steps"]["diagnostics"];
    let h0 = diag["residual_moments"]["h0"].as_f64().unwrap();
    assert!((h0 - -0.237).abs() < 1e-3, "h₀ = {h0}");
    let notes: Vec<&str> = diag["notes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|n| n.as_str().unwrap())
        .collect();
    for level in ["0.95", "0.99"] {
        assert!(
            notes
                .iter()
                .any(|n| n.starts_with(&format!("no SPE limit at {level}"))
                    && n.contains("needs h₀ > 0")
                    && n.contains("left empty")),
            "{notes:?}"
        );
    }
    let scores = fs::read_to_string(dir.path().join("out/scores.csv")).unwrap();
    let mut lines = scores.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let at = |name: &str| header.iter().position(|h| *h == name).unwrap();
    let (t2_95, spe_95, spe_99) = (at("T2_above_95"), at("SPE_above_95"), at("SPE_above_99"));
    let rows: Vec<Vec<&str>> = lines.map(|l| l.split(',').collect()).collect();
    assert_eq!(rows.len(), 64);
    for row in &rows {
        assert_eq!(row.len(), header.len(), "{row:?}");
        assert_eq!((row[spe_95], row[spe_99]), ("", ""), "{row:?}");
        assert!(["yes", "no"].contains(&row[t2_95]), "{row:?}");
    }
    let report = fs::read_to_string(dir.path().join("out/report.html")).unwrap();
    assert!(
        report.contains("there is no SPE limit"),
        "the report's summary says the SPE limit is missing"
    );
    assert!(report.contains("needs h₀ &gt; 0") || report.contains("needs h₀ > 0"));
    // Box's limit exists for the same residual.
    let m = run(
        dir.path(),
        "[scaling]\nmethod = \"center\"\n[components]\nkeep = 2\n[diagnostics]\nspe_limit = \"box\"",
    );
    assert!(m["steps"]["diagnostics"]["limits"][0]["spe"].is_f64());
    let scores = fs::read_to_string(dir.path().join("out/scores.csv")).unwrap();
    assert!(
        scores
            .lines()
            .skip(1)
            .all(|l| l.ends_with(",no") || l.ends_with(",yes"))
    );
}

/// Regression: with `scaling.method = "none"` the T² and SPE limits, which
/// assume centred data, were reported without a word of caution.
#[test]
fn uncentred_limits_came_without_a_caution() {
    let dir = tempfile::tempdir().unwrap();
    fs::copy(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/iris.csv"),
        dir.path().join("data.csv"),
    )
    .unwrap();
    let caution = "the T² and SPE limits assume centred data";
    let m = run(
        dir.path(),
        "exclude = [\"class\"]\n[scaling]\nmethod = \"none\"",
    );
    let notes = m["steps"]["diagnostics"]["notes"].to_string();
    assert!(notes.contains(caution), "{notes}");
    let report = fs::read_to_string(dir.path().join("out/report.html")).unwrap();
    assert!(report.contains(caution), "the report carries the caution");
    // Centred data carry no such note.
    let m = run(dir.path(), "exclude = [\"class\"]");
    let notes = m["steps"]["diagnostics"]["notes"].to_string();
    assert!(!notes.contains(caution), "{notes}");
}

/// Regression: `explain` said "distance over the standardised features"
/// without saying mean or sum, did not describe the contributions or the
/// fill's stopping rule exactly, and did not say that Kaiser and the broken
/// stick use p features whatever the rank.
#[test]
fn explain_left_the_conventions_loose() {
    let dir = tempfile::tempdir().unwrap();
    fs::write(
        dir.path().join("data.csv"),
        "a,b,c\n1,2,3\n2,,5\n3,5,4\n4,4,8\n",
    )
    .unwrap();
    let explain = |body: &str| {
        fs::write(
            dir.path().join("r.toml"),
            format!(
                "format = 1\n[input]\nfile = \"data.csv\"\n{body}\n[output]\nfolder = \"out\"\n"
            ),
        )
        .unwrap();
        let out = sextant(dir.path(), &["explain", "r.toml"]);
        assert_eq!(out.code, 0, "{}", out.stderr);
        out.stdout
    };
    let knn = explain("[missing]\nmethod = \"knn\"");
    assert!(
        knn.contains("root of the mean squared difference over the standardised features both observe (the mean, not the sum"),
        "{knn}"
    );
    assert!(
        knn.contains("Σₐ (tₐ/λₐ) pⱼₐ zⱼ") && knn.contains("Westerhuis, Gurden & Smilde 2000"),
        "{knn}"
    );
    let ipca = explain("[missing]\nmethod = \"iterative-pca\"");
    assert!(
        ipca.contains("less than 1e-12 of their size (‖new − old‖ / ‖new‖ over the filled cells), at most 1000 refits"),
        "{ipca}"
    );
    assert!(ipca.contains("Varadhan & Roland 2008"), "{ipca}");
    assert!(ipca.contains("1 − σ̂²/λ"), "{ipca}");
    let kaiser = explain("[components]\nkeep = \"kaiser\"");
    assert!(
        kaiser.contains("over all p features")
            && kaiser.contains("even when the data's rank is below p"),
        "{kaiser}"
    );
    let stick = explain("[components]\nkeep = \"broken-stick\"");
    assert!(
        stick.contains("broken into p pieces")
            && stick.contains("even when the data's rank is below p"),
        "{stick}"
    );
}

/// Regression: sentences for people wrote "1 component(s)", "1 row(s) are" and
/// "components 1 to 1 each explain"; counts now take the right number, and
/// values for people carry four significant digits (Kaiser's mean eigenvalue
/// was cut to four decimals, "0.0001" for a tiny spectrum).
#[test]
fn sentences_for_people_count_in_the_right_number() {
    let dir = tempfile::tempdir().unwrap();
    write_unequal_residual_table(dir.path());
    let body = "groups = [\"f31\"]\n[components]\nkeep = 1\n";
    fs::write(
        dir.path().join("r.toml"),
        format!("format = 1\n[input]\nfile = \"data.csv\"\n{body}\n[output]\nfolder = \"out\"\n"),
    )
    .unwrap();
    let explained = sextant(dir.path(), &["explain", "r.toml"]);
    assert_eq!(explained.code, 0, "{}", explained.stderr);
    let text = explained.stdout;
    assert!(text.contains("Keep 1 component;"), "{text}");
    assert!(text.contains("Carry the group column `f31`"), "{text}");
    assert!(text.contains("it takes no part"), "{text}");
    assert!(!text.contains("(s)"), "{text}");
    run(dir.path(), body);
    let report = fs::read_to_string(dir.path().join("out/report.html")).unwrap();
    assert!(report.contains("1 component was kept"), "{report}");
    assert!(!report.contains("(s)"));
}
