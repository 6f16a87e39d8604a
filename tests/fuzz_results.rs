//! Seeded fuzzing of what `apply`, `verify` and `diff` read from a results
//! folder: model.json, manifest.json and the result tables.
//!
//! Genuine results folders are made once (several fill methods, scalings and
//! transforms); each case then mutates one file with JSON-aware (or, for the
//! tables, CSV-aware) edits drawn from a fixed-seed ChaCha8 stream, re-hashes
//! the manifest most of the time so the mutation reaches the checks behind the
//! digest, and runs the library code in this process under `catch_unwind`.
//! Every case must end without a panic, and every error must carry exit code 1
//! or 2.
//!
//! `cargo test --release --test fuzz_results` runs a few thousand cases per
//! target. The long run is
//! `SEXTANT_FUZZ_CASES=250000 cargo test --release --test fuzz_results -- --ignored --nocapture fuzz`
//! and prints how many inputs each target ran.

use rand_chacha::ChaCha8Rng;
use rand_core::{Rng, SeedableRng};
use serde_json::Value;
use sextant::apply::{ScoreSettings, model_from_bytes, score};
use sextant::diff::{DiffFormat, Side, compare, render_comparison, side_from_tables};
use sextant::error::Error;
use sextant::outputs::hashing::sha256_hex;
use sextant::verify::{check_trusted, describe, manifest_from_bytes, verify};
use std::collections::BTreeMap;
use std::fs;
use std::panic::{AssertUnwindSafe, catch_unwind};
use std::path::{Path, PathBuf};
use std::time::Instant;

/// Cases per target in the short run.
const SHORT_CASES: usize = 1_000;

/// One genuine results folder and what the targets need of it.
struct Base {
    folder: PathBuf,
    /// A copy of the folder whose manifest.json `verify` cases overwrite.
    scratch: PathBuf,
    manifest: Value,
    model: Value,
    model_bytes: Vec<u8>,
    tables: BTreeMap<String, Vec<u8>>,
    side: Side,
}

/// The genuine folders, the table to score, and the workspace that holds them.
struct Corpus {
    _dir: tempfile::TempDir,
    bases: Vec<Base>,
    new_table: Vec<u8>,
}

/// A small table with groups, an id and a few missing cells (fixed numbers).
fn training_table(rng: &mut ChaCha8Rng, rows: usize, missing: bool) -> String {
    let mut lines = vec!["id,site,a,b,c,d,e,f".to_string()];
    for i in 0..rows {
        let x = unit(rng) * 2.0 - 1.0;
        let y = unit(rng) * 2.0 - 1.0;
        let mut cells = [
            format!("{:.4}", x + 0.1 * unit(rng)),
            format!("{:.4}", x - y),
            format!("{:.4}", 2.0 * y + 0.2 * unit(rng)),
            format!("{:.4}", 10.0 + 5.0 * unit(rng) + 3.0 * x),
            format!("{:.4}", 1.0 + unit(rng) * 100.0),
            format!("{:.4}", y * x + unit(rng)),
        ];
        if missing && i % 7 == 3 {
            cells[(i / 7) % 6] = "NA".into();
        }
        lines.push(format!("r{i},s{},{}", i % 3, cells.join(",")));
    }
    lines.join("\n") + "\n"
}

fn unit(rng: &mut ChaCha8Rng) -> f64 {
    (rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64
}

fn below(rng: &mut ChaCha8Rng, n: usize) -> usize {
    (rng.next_u64() % n as u64) as usize
}

/// The recipes behind the genuine folders: (name, missing method, extra TOML).
const RECIPES: &[(&str, &str, &str)] = &[
    ("mean", "mean", "[transform]\nlog10 = [\"e\"]\n"),
    (
        "median-pareto",
        "median",
        "[scaling]\nmethod = \"pareto\"\n[diagnostics]\nconfidence = [0.9, 0.99]\nspe_limit = \"box\"\n",
    ),
    ("iterative", "iterative-pca", "[components]\nkeep = 3\n"),
    ("knn-range", "knn", "[scaling]\nmethod = \"range\"\n"),
    (
        "drop-center",
        "drop-rows",
        "[scaling]\nmethod = \"center\"\n",
    ),
    (
        "none",
        "mean",
        "[scaling]\nmethod = \"none\"\n[transform]\nsqrt = [\"d\"]\n",
    ),
];

fn corpus() -> Corpus {
    let dir = tempfile::tempdir().unwrap();
    let ws = dir.path();
    let mut rng = ChaCha8Rng::seed_from_u64(20_260_301);
    fs::create_dir_all(ws.join("data")).unwrap();
    fs::create_dir_all(ws.join("recipes")).unwrap();
    fs::write(
        ws.join("data/train.csv"),
        training_table(&mut rng, 40, true),
    )
    .unwrap();
    let mut new_table = training_table(&mut rng, 12, true);
    new_table.push_str("r99,s1,NA,NA,NA,NA,NA,NA\n");
    let mut bases = Vec::new();
    for (name, method, extra) in RECIPES {
        let recipe = ws.join(format!("recipes/{name}.toml"));
        fs::write(
            &recipe,
            format!(
                "format = 1\n[input]\nfile = \"../data/train.csv\"\nid = \"id\"\ngroups = [\"site\"]\n[missing]\nmethod = \"{method}\"\n{extra}[output]\nfolder = \"../results/{name}\"\n"
            ),
        )
        .unwrap();
        sextant::run::run(&recipe, &Default::default()).unwrap_or_else(|e| panic!("{name}: {e}"));
        let folder = ws.join("results").join(name);
        let scratch = ws.join("results").join(format!("{name}-scratch"));
        copy_folder(&folder, &scratch);
        let manifest: Value =
            serde_json::from_slice(&fs::read(folder.join("manifest.json")).unwrap()).unwrap();
        let model_bytes = fs::read(folder.join("model.json")).unwrap();
        let tables: BTreeMap<String, Vec<u8>> = ["variance.csv", "loadings.csv", "scores.csv"]
            .iter()
            .map(|n| (n.to_string(), fs::read(folder.join(n)).unwrap()))
            .collect();
        let side = sextant::diff::load_side(&folder).unwrap();
        bases.push(Base {
            model: serde_json::from_slice(&model_bytes).unwrap(),
            folder,
            scratch,
            manifest,
            model_bytes,
            tables,
            side,
        });
    }
    Corpus {
        _dir: dir,
        bases,
        new_table: new_table.into_bytes(),
    }
}

fn copy_folder(from: &Path, to: &Path) {
    fs::create_dir_all(to).unwrap();
    for entry in fs::read_dir(from).unwrap() {
        let entry = entry.unwrap();
        let target = to.join(entry.file_name());
        if entry.file_type().unwrap().is_dir() {
            copy_folder(&entry.path(), &target);
        } else {
            fs::copy(entry.path(), target).unwrap();
        }
    }
}

// ------------------------------------------------------------ JSON mutation

#[derive(Clone, Debug)]
enum Seg {
    Key(String),
    Index(usize),
}

/// Every node's path, the root included.
fn paths(v: &Value, at: &mut Vec<Seg>, out: &mut Vec<Vec<Seg>>) {
    out.push(at.clone());
    match v {
        Value::Object(map) => {
            for (k, x) in map {
                at.push(Seg::Key(k.clone()));
                paths(x, at, out);
                at.pop();
            }
        }
        Value::Array(items) => {
            for (i, x) in items.iter().enumerate() {
                at.push(Seg::Index(i));
                paths(x, at, out);
                at.pop();
            }
        }
        _ => {}
    }
}

fn node<'a>(v: &'a mut Value, path: &[Seg]) -> &'a mut Value {
    path.iter().fold(v, |v, s| match s {
        Seg::Key(k) => &mut v[k.as_str()],
        Seg::Index(i) => &mut v[*i],
    })
}

/// Texts that mean something somewhere in a model or manifest, or that
/// should never be opened.
const STRINGS: &[&str] = &[
    "",
    "sextant",
    "log10",
    "ln",
    "sqrt",
    "log2",
    "none",
    "center",
    "unit-variance",
    "pareto",
    "range",
    "box",
    "jackson-mudholkar",
    "drop-rows",
    "constant",
    "iterative-pca",
    "knn",
    "model.json",
    "scores.csv",
    "plots/scree.svg",
    "../recipes/mean.toml",
    "../../recipes/mean.toml",
    "../../data/train.csv",
    "../data/train.csv",
    "../mean",
    "/etc/passwd",
    "/dev/zero",
    "/dev/stdin",
    "../../../../../../../../../../../dev/zero",
    "..",
    ".",
    "a/../../b",
    "é€😀",
    ";",
    "\t",
    "\"",
    "\n",
    "id",
    "site",
    "a",
    "NaN",
];

/// A marker that is replaced, after serialising, by a number JSON cannot
/// hold in a double (or by a bare word), so that the parser meets it.
const RAW: &str = "\u{1}raw\u{1}";
const RAW_TEXTS: &[&str] = &["1e999", "-1e999", "NaN", "Infinity", "1e-999", "-0"];

fn extreme_number(rng: &mut ChaCha8Rng) -> Value {
    let choices: [Value; 18] = [
        Value::from(0),
        Value::from(-1),
        Value::from(1),
        Value::from(2),
        Value::from(-0.0),
        Value::from(1e308),
        Value::from(-1e308),
        Value::from(5e-324),
        Value::from(1e-300),
        Value::from(u64::MAX),
        Value::from(i64::MIN),
        Value::from(usize::MAX as f64),
        Value::from(0.5),
        Value::from(0.999_999),
        Value::from(1.000_001),
        Value::from(1e9),
        Value::from(4_294_967_296u64),
        Value::String(RAW.into()),
    ];
    let pick = below(rng, choices.len() + 1);
    if pick == choices.len() {
        return Value::from((unit(rng) - 0.5) * 10f64.powi(below(rng, 12) as i32 - 4));
    }
    choices[pick].clone()
}

fn any_value(rng: &mut ChaCha8Rng) -> Value {
    match below(rng, 7) {
        0 => Value::Null,
        1 => Value::Bool(below(rng, 2) == 0),
        2 => Value::String(STRINGS[below(rng, STRINGS.len())].into()),
        3 => Value::Array(vec![]),
        4 => Value::Object(Default::default()),
        5 => Value::Array(vec![extreme_number(rng); below(rng, 4)]),
        _ => extreme_number(rng),
    }
}

/// One JSON-aware edit at a node chosen uniformly.
fn mutate(rng: &mut ChaCha8Rng, doc: &mut Value) {
    let mut all = Vec::new();
    paths(doc, &mut Vec::new(), &mut all);
    let path = all[below(rng, all.len())].clone();
    // Deleting a key or an element acts on the parent.
    if below(rng, 5) == 0
        && let Some((last, parent)) = path.split_last()
    {
        match (node(doc, parent), last) {
            (Value::Object(map), Seg::Key(k)) => {
                map.remove(k);
            }
            (Value::Array(items), Seg::Index(i)) => {
                items.remove(*i);
            }
            _ => {}
        }
        return;
    }
    let target = node(doc, &path);
    match target {
        Value::Number(n) => {
            *target = match below(rng, 4) {
                0 => Value::from(-n.as_f64().unwrap_or(0.0)),
                1 => Value::from(n.as_i64().map_or(1, |i| i.wrapping_add(1))),
                2 => Value::from(n.as_i64().map_or(-1, |i| i.wrapping_sub(1))),
                _ => extreme_number(rng),
            }
        }
        Value::Array(items) => match below(rng, 6) {
            0 => items.truncate(below(rng, items.len() + 1)),
            1 if !items.is_empty() => {
                let i = below(rng, items.len());
                let copy = items[i].clone();
                items.insert(i, copy);
            }
            2 => items.clear(),
            3 => items.reverse(),
            4 if items.len() > 1 => {
                let (i, j) = (below(rng, items.len()), below(rng, items.len()));
                items.swap(i, j);
            }
            _ => items.push(any_value(rng)),
        },
        Value::String(s) => {
            *target = match below(rng, 4) {
                0 => Value::String(format!("{s}{}", STRINGS[below(rng, STRINGS.len())])),
                1 => Value::String(s.chars().skip(1).collect()),
                _ => Value::String(STRINGS[below(rng, STRINGS.len())].into()),
            }
        }
        Value::Object(map) => {
            if below(rng, 2) == 0 && !map.is_empty() {
                let keys: Vec<String> = map.keys().cloned().collect();
                let k = &keys[below(rng, keys.len())];
                map.insert(k.clone(), any_value(rng));
            } else {
                map.insert(STRINGS[below(rng, STRINGS.len())].into(), any_value(rng));
            }
        }
        _ => *target = any_value(rng),
    }
    // Sometimes swap the type outright.
    if below(rng, 8) == 0 {
        *node(doc, &path) = any_value(rng);
    }
}

/// The document as text, pretty or compact, with every marker replaced.
fn text_of(rng: &mut ChaCha8Rng, doc: &Value) -> Vec<u8> {
    let text = if below(rng, 2) == 0 {
        serde_json::to_string_pretty(doc).unwrap()
    } else {
        serde_json::to_string(doc).unwrap()
    };
    let marker = serde_json::to_string(RAW).unwrap();
    let mut out = text.clone();
    while out.contains(&marker) {
        out = out.replacen(&marker, RAW_TEXTS[below(rng, RAW_TEXTS.len())], 1);
    }
    out.into_bytes()
}

/// The manifest's digest, as sextant computes it (SHA-256 of the compact JSON
/// without `digest` and `run`).
fn reseal(manifest: &mut Value) {
    let mut body = manifest.clone();
    if let Some(map) = body.as_object_mut() {
        map.remove("digest");
        map.remove("run");
        let digest = sha256_hex(&serde_json::to_vec(&body).unwrap());
        manifest["digest"] = Value::String(digest);
    }
}

/// Records `bytes` as model.json's hash in the manifest, if it has one.
fn rehash_model(manifest: &mut Value, bytes: &[u8]) {
    if let Some(outputs) = manifest.get_mut("outputs").and_then(Value::as_array_mut) {
        for o in outputs.iter_mut().filter(|o| o["path"] == "model.json") {
            if o.is_object() {
                o["sha256"] = Value::String(sha256_hex(bytes));
            }
        }
    }
}

// --------------------------------------------------------------- the runs

/// Counts of what the cases of one target ended in.
#[derive(Default, Debug)]
struct Tally {
    cases: usize,
    ok: usize,
    exit1: usize,
    exit2: usize,
}

impl Tally {
    /// Runs one call under `catch_unwind`; a panic or an exit code other than
    /// 1 or 2 fails the test, showing the input.
    fn run<T>(&mut self, input: &dyn Fn() -> String, call: impl FnOnce() -> Result<T, Error>) {
        match catch_unwind(AssertUnwindSafe(call)) {
            Ok(Ok(_)) => self.ok += 1,
            Ok(Err(e)) => match e.exit_code() {
                1 => self.exit1 += 1,
                2 => self.exit2 += 1,
                code => panic!("exit code {code} for {e}\ninput:\n{}", input()),
            },
            Err(_) => panic!("panicked on this input:\n{}", input()),
        }
    }
}

fn shown(bytes: &[u8]) -> String {
    let text = String::from_utf8_lossy(bytes);
    text.chars().take(20_000).collect()
}

/// Mutated model.json files, through the checks and the scoring of `apply`.
fn fuzz_models(corpus: &Corpus, cases: usize, seed: u64) -> Tally {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut tally = Tally::default();
    for _ in 0..cases {
        let base = &corpus.bases[below(&mut rng, corpus.bases.len())];
        let mut model = base.model.clone();
        for _ in 0..1 + below(&mut rng, 3) {
            mutate(&mut rng, &mut model);
        }
        let bytes = text_of(&mut rng, &model);
        let mut manifest = base.manifest.clone();
        if below(&mut rng, 10) != 0 {
            rehash_model(&mut manifest, &bytes);
            reseal(&mut manifest);
        }
        tally.cases += 1;
        tally.run(&|| shown(&bytes), || {
            apply_in_memory(base, &manifest, &bytes, corpus)
        });
    }
    tally
}

/// What `apply` does up to writing its folder.
fn apply_in_memory(
    base: &Base,
    manifest: &Value,
    model_bytes: &[u8],
    corpus: &Corpus,
) -> Result<(), Error> {
    check_trusted(&base.folder, manifest)?;
    let (model, _) = model_from_bytes(&base.folder, manifest, model_bytes)?;
    let settings = ScoreSettings::from_manifest(&base.folder, manifest)?;
    let scored = score(
        &model,
        &settings,
        settings.delimiter,
        &Default::default(),
        &corpus.new_table,
        "new.csv",
    )?;
    assert_eq!(scored.files.len(), 3);
    Ok(())
}

/// Mutated manifest.json files, through `apply` and `diff` in memory and
/// `verify` on a copy of the folder.
fn fuzz_manifests(corpus: &Corpus, cases: usize, seed: u64) -> (Tally, Tally, Tally) {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let (mut apply, mut diff, mut check) = (Tally::default(), Tally::default(), Tally::default());
    for _ in 0..cases {
        let base = &corpus.bases[below(&mut rng, corpus.bases.len())];
        let mut manifest = base.manifest.clone();
        for _ in 0..1 + below(&mut rng, 3) {
            mutate(&mut rng, &mut manifest);
        }
        if below(&mut rng, 10) != 0 {
            reseal(&mut manifest);
        }
        let bytes = text_of(&mut rng, &manifest);
        let input = || shown(&bytes);
        apply.cases += 1;
        apply.run(&input, || {
            let m = manifest_from_bytes(&base.folder, &bytes)?;
            apply_in_memory(base, &m, &base.model_bytes, corpus)
        });
        diff.cases += 1;
        diff.run(&input, || {
            let m = manifest_from_bytes(&base.folder, &bytes)?;
            check_trusted(&base.folder, &m)?;
            let side = side_from_tables("A".into(), m, &base.tables, &|n| n.to_string())?;
            let other = &corpus.bases[0].side;
            for (a, b) in [(&side, other), (other, &side)] {
                let c = compare(a, b);
                render_comparison(a, b, &c, DiffFormat::Text);
                render_comparison(a, b, &c, DiffFormat::Markdown);
            }
            Ok(())
        });
        check.cases += 1;
        fs::write(base.scratch.join("manifest.json"), &bytes).unwrap();
        check.run(&input, || {
            let v = verify(&base.scratch, false)?;
            describe(&base.scratch, &v);
            Ok(())
        });
    }
    (apply, diff, check)
}

/// One CSV-aware edit of a result table.
fn mutate_table(rng: &mut ChaCha8Rng, bytes: &[u8]) -> Vec<u8> {
    let text = String::from_utf8_lossy(bytes).into_owned();
    let mut lines: Vec<String> = text.lines().map(String::from).collect();
    match below(rng, 7) {
        0 if !lines.is_empty() => {
            let i = below(rng, lines.len());
            lines.remove(i);
        }
        1 => {
            let cut = below(rng, text.len() + 1);
            return text.as_bytes()[..cut].to_vec();
        }
        2 if !lines.is_empty() => {
            let i = below(rng, lines.len());
            let copy = lines[i].clone();
            lines.insert(i, copy);
        }
        3 if !lines.is_empty() => {
            let i = below(rng, lines.len());
            lines[i].push_str(",x");
        }
        _ if !lines.is_empty() => {
            let i = below(rng, lines.len());
            let mut cells: Vec<String> = lines[i].split(',').map(String::from).collect();
            let j = below(rng, cells.len());
            let texts = [
                "", "NaN", "inf", "-inf", "1e999", "1e308", "-1e308", "abc", "yes", "no", "PC1",
                "PC9", "feature", "kept", "\"", "1.5", "-2", "0",
            ];
            cells[j] = texts[below(rng, texts.len())].into();
            lines[i] = cells.join(",");
        }
        _ => {}
    }
    (lines.join("\n") + "\n").into_bytes()
}

/// Mutated variance.csv, loadings.csv and scores.csv through `diff`.
fn fuzz_tables(corpus: &Corpus, cases: usize, seed: u64) -> Tally {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut tally = Tally::default();
    let names = ["variance.csv", "loadings.csv", "scores.csv"];
    for _ in 0..cases {
        let base = &corpus.bases[below(&mut rng, corpus.bases.len())];
        let mut tables = base.tables.clone();
        for _ in 0..1 + below(&mut rng, 3) {
            let name = names[below(&mut rng, names.len())];
            let changed = mutate_table(&mut rng, &tables[name]);
            tables.insert(name.to_string(), changed);
        }
        tally.cases += 1;
        let input = || {
            names
                .iter()
                .map(|n| format!("--- {n}\n{}", shown(&tables[*n])))
                .collect::<String>()
        };
        tally.run(&input, || {
            let side = side_from_tables("A".into(), base.manifest.clone(), &tables, &|n| {
                n.to_string()
            })?;
            let other = &corpus.bases[0].side;
            for (a, b) in [(&side, other), (other, &side)] {
                let c = compare(a, b);
                render_comparison(a, b, &c, DiffFormat::Text);
            }
            Ok(())
        });
    }
    tally
}

fn run_all(cases: usize) {
    let corpus = corpus();
    // The genuine folders pass every target.
    for base in &corpus.bases {
        apply_in_memory(base, &base.manifest, &base.model_bytes, &corpus).unwrap();
        assert!(verify(&base.folder, false).unwrap().passed());
    }
    let start = Instant::now();
    let models = fuzz_models(&corpus, cases, 1);
    println!(
        "model.json → apply: {} inputs in {:.1} s ({models:?})",
        models.cases,
        start.elapsed().as_secs_f64()
    );
    let start = Instant::now();
    let (apply, diff, check) = fuzz_manifests(&corpus, cases, 2);
    println!(
        "manifest.json → apply, diff, verify: {} inputs each in {:.1} s\n  apply {apply:?}\n  diff {diff:?}\n  verify {check:?}",
        apply.cases,
        start.elapsed().as_secs_f64()
    );
    let start = Instant::now();
    let tables = fuzz_tables(&corpus, cases, 3);
    println!(
        "result tables → diff: {} inputs in {:.1} s ({tables:?})",
        tables.cases,
        start.elapsed().as_secs_f64()
    );
    // The mutations reach past the first checks: some models still score,
    // some manifests are refused only by the later checks.
    assert!(models.ok > 0 && models.exit2 > 0, "{models:?}");
    assert!(
        apply.exit2 > 0 && diff.ok > 0 && check.ok > 0,
        "{apply:?} {diff:?} {check:?}"
    );
    assert!(tables.exit2 > 0 && tables.ok > 0, "{tables:?}");
}

#[test]
fn results_folder_inputs_never_panic() {
    run_all(SHORT_CASES);
}

#[test]
#[ignore = "long: set SEXTANT_FUZZ_CASES (default 250000 per target)"]
fn fuzz_results_folders_long() {
    let cases = std::env::var("SEXTANT_FUZZ_CASES")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(250_000);
    run_all(cases);
}
