//! Precision to the last digits: a column mean that large offsets do not
//! spoil, and the accurate route for the smallest eigenvalues
//! (`components.method = "qr"`), each checked through the real binary in
//! both engines.

mod common;

use common::sextant;
use std::fs;
use std::path::Path;

/// The numeric columns of a results CSV by header name (text columns skipped).
fn numeric_columns(path: &Path) -> Vec<(String, Vec<f64>)> {
    let text = fs::read_to_string(path).unwrap();
    let mut lines = text.lines();
    let header: Vec<String> = lines.next().unwrap().split(',').map(String::from).collect();
    let rows: Vec<Vec<&str>> = lines.map(|l| l.split(',').collect()).collect();
    header
        .iter()
        .enumerate()
        .filter(|(j, _)| rows.iter().all(|r| r[*j].parse::<f64>().is_ok()))
        .map(|(j, name)| {
            (
                name.clone(),
                rows.iter().map(|r| r[j].parse().unwrap()).collect(),
            )
        })
        .collect()
}

fn run(dir: &Path, recipe: &str, engine: &str) {
    let out = sextant(dir, &["run", recipe, "--engine", engine]);
    assert_eq!(out.code, 0, "{recipe} ({engine}): {}", out.stderr);
}

/// A table of `n` rows by 4 features whose values are multiples of 2⁻²⁰
/// between −2 and 2 and whose columns sum to exactly 0 (the second half of
/// each column is the first half negated, in another order per column), so
/// that `offset` + value is exactly representable for |offset| below 2²⁷ (a
/// unit in the last place of 1e8 is 2⁻²⁶) and the shifted column's exact mean
/// is `offset` itself. (Multiples of 2⁻¹⁰ would not do: their running sums are
/// exact even at 1e8, so no mean would be off.)
fn shifted_table(n: usize, offset: f64) -> String {
    let half = n / 2;
    let mut state: u64 = 0x2545_f491_4f6c_dd1d;
    let mut next = || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        (state % (1 << 22)) as i64 - (1 << 21)
    };
    // Correlated columns, so there are components to find.
    let base: Vec<[i64; 4]> = (0..half)
        .map(|_| {
            let (a, b) = (next(), next());
            [a, (a + b) / 2, (b - a) / 2, next() / 3 + a / 4]
        })
        .collect();
    let mut text = String::from("id,a,b,c,d\n");
    for i in 0..n {
        text.push_str(&format!("r{i}"));
        for j in 0..4 {
            let k = if i < half {
                base[i][j]
            } else {
                // A permutation of the first half: the multipliers have no
                // factor in common with `half` (n = 2,500 gives 1,250 = 2·5⁴).
                -base[((i - half) * [7, 11, 13, 17][j] + j) % half][j]
            };
            let v = offset + k as f64 / (1u64 << 20) as f64;
            text.push_str(&format!(",{v}"));
        }
        text.push('\n');
    }
    text
}

/// Regression: the mean was a plain running sum, several units in the last
/// place off for values near 1e8; centring moved every value by that error, so
/// a table shifted by 1e8 gave scores and T² about 1e-7 relative off the
/// unshifted table's. With a mean within one rounding of the exact mean (here
/// exactly 1e8), both engines give the shifted table the unshifted scores, T²
/// and SPE to 1e-12 relative of each column's spread.
#[test]
fn a_large_offset_moved_every_centred_value() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    // 2,500 rows: the passes engine runs several chunks and row blocks.
    let n = 2500;
    fs::write(d.join("plain.csv"), shifted_table(n, 0.0)).unwrap();
    fs::write(d.join("shifted.csv"), shifted_table(n, 1e8)).unwrap();
    for name in ["plain", "shifted"] {
        let recipe = format!(
            "format = 1\n[input]\nfile = \"{name}.csv\"\nid = \"id\"\n[scaling]\nmethod = \"unit-variance\"\n[components]\nkeep = 2\n[output]\nfolder = \"out-{name}\"\n"
        );
        fs::write(d.join(format!("{name}.toml")), recipe).unwrap();
    }
    for engine in ["in-memory", "passes"] {
        run(d, "plain.toml", engine);
        run(d, "shifted.toml", engine);
        let plain = numeric_columns(&d.join("out-plain/scores.csv"));
        let shifted = numeric_columns(&d.join("out-shifted/scores.csv"));
        assert_eq!(plain.len(), shifted.len());
        let mut checked = Vec::new();
        for ((name, a), (_, b)) in plain.iter().zip(&shifted) {
            if name == "row" {
                continue;
            }
            let spread = a.iter().fold(0.0f64, |m, v| m.max(v.abs()));
            let worst = a
                .iter()
                .zip(b)
                .map(|(x, y)| (x - y).abs() / spread)
                .fold(0.0, f64::max);
            assert!(
                worst <= 1e-12,
                "{engine}: {name} differs by {worst:e} of its spread after a shift by 1e8"
            );
            checked.push(name.clone());
        }
        assert_eq!(checked, ["PC1", "PC2", "T2", "SPE"], "{engine}");
        // The exact mean, found exactly.
        let pre = numeric_columns(&d.join("out-shifted/preprocessing.csv"));
        let means = &pre.iter().find(|(name, _)| name == "mean").unwrap().1;
        assert_eq!(means, &[1e8; 4], "{engine}");
    }
}
