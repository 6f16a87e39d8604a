//! The JSON Schemas shipped in src/schemas/ (draft 2020-12) describe what sextant
//! really reads and writes: every shipped recipe validates against the recipe
//! schema, every manifest the runs here write validates against the manifest
//! schema, and known mistakes are rejected by both the schema and the binary.

use serde_json::Value;
use std::fs;
use std::path::{Path, PathBuf};
use std::process::Command;

const BIN: &str = env!("CARGO_BIN_EXE_sextant");

fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn schema(name: &str) -> jsonschema::Validator {
    let text = fs::read_to_string(repo().join("src/schemas").join(name)).unwrap();
    let value: Value = serde_json::from_str(&text).unwrap();
    jsonschema::draft202012::meta::validate(&value).expect("a valid draft 2020-12 schema");
    jsonschema::draft202012::new(&value).unwrap()
}

fn errors(validator: &jsonschema::Validator, instance: &Value) -> Vec<String> {
    validator
        .iter_errors(instance)
        .map(|e| format!("{} at {}", e, e.instance_path()))
        .collect()
}

fn toml_as_json(text: &str) -> Value {
    toml::from_str::<Value>(text).unwrap()
}

fn shipped_recipes() -> Vec<PathBuf> {
    let mut list: Vec<PathBuf> = fs::read_dir(repo().join("recipes"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "toml"))
        .collect();
    list.sort();
    list
}

#[test]
fn shipped_recipes_follow_the_recipe_schema() {
    let v = schema("recipe.schema.json");
    for path in shipped_recipes() {
        let found = errors(&v, &toml_as_json(&fs::read_to_string(&path).unwrap()));
        assert!(found.is_empty(), "{}: {found:?}", path.display());
    }
}

#[test]
fn recipe_schema_rejects_what_the_parser_rejects() {
    let v = schema("recipe.schema.json");
    let base = fs::read_to_string(repo().join("recipes/dairy-march.toml")).unwrap();
    let mistakes = [
        ("method = \"unit-variance\"", "method = \"zscore\""),
        ("keep = \"broken-stick\"", "keep = 0"),
        ("max_feature_missing = 0.3", "max_feature_missing = 1.5"),
        ("compute = 10", "compute = 10\ncomputed = 3"),
        ("format = 1", "format = 2"),
    ];
    for (from, to) in mistakes {
        let text = base.replacen(from, to, 1);
        assert!(
            !errors(&v, &toml_as_json(&text)).is_empty(),
            "schema accepts {to:?}"
        );
        let dir = tempfile::tempdir().unwrap();
        fs::create_dir(dir.path().join("recipes")).unwrap();
        fs::write(dir.path().join("recipes/r.toml"), &text).unwrap();
        let out = Command::new(BIN)
            .args(["check", "recipes/r.toml"])
            .current_dir(dir.path())
            .output()
            .unwrap();
        assert_eq!(out.status.code(), Some(2), "the binary accepts {to:?}");
    }
}

/// Every fill method with its settings table: the schema accepts what the
/// parser accepts. It used to list only three of the five methods, so an
/// editor flagged valid `knn` and `iterative-pca` recipes as wrong.
#[test]
fn recipe_schema_accepts_every_fill_method_and_its_settings() {
    let v = schema("recipe.schema.json");
    let base = fs::read_to_string(repo().join("recipes/dairy-march.toml")).unwrap();
    let fills = [
        "[missing]\nmethod = \"drop-rows\"",
        "[missing]\nmethod = \"median\"",
        "[missing]\nmethod = \"knn\"\n[missing.knn]\nneighbours = 3",
        "[missing]\nmethod = \"iterative-pca\"\n[missing.iterative_pca]\ncomponents = 2\nvariant = \"em\"\ntolerance = 1e-10\nmax_iterations = 50\nstart = \"median\"\nallow_unconverged = true",
    ];
    let start = base
        .find("[missing]")
        .expect("the demo recipe has [missing]");
    let end = base[start + 1..]
        .find("\n[")
        .map_or(base.len(), |e| start + 1 + e);
    for fill in fills {
        let text = format!("{}{fill}{}", &base[..start], &base[end..]);
        let found = errors(&v, &toml_as_json(&text));
        assert!(found.is_empty(), "{fill:?}: {found:?}");
        let dir = tempfile::tempdir().unwrap();
        fs::create_dir(dir.path().join("recipes")).unwrap();
        fs::write(dir.path().join("recipes/r.toml"), &text).unwrap();
        let out = Command::new(BIN)
            .args(["explain", "recipes/r.toml"])
            .current_dir(dir.path())
            .output()
            .unwrap();
        assert_eq!(
            out.status.code(),
            Some(0),
            "the parser refuses {fill:?}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
    }
    // A tolerance below rounding is refused by both.
    let text = format!(
        "{}[missing]\nmethod = \"iterative-pca\"\n[missing.iterative_pca]\ntolerance = 1e-24{}",
        &base[..start],
        &base[end..]
    );
    assert!(!errors(&v, &toml_as_json(&text)).is_empty());
}

/// Runs a recipe in a copy of the demo workspace and returns its manifest.
fn manifest_of(recipe_text: &str, ws: &Path) -> Value {
    fs::write(ws.join("recipes/t.toml"), recipe_text).unwrap();
    let out = Command::new(BIN)
        .args(["run", "--replace", "recipes/t.toml"])
        .current_dir(ws)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let folder = recipe_text
        .lines()
        .find_map(|l| l.strip_prefix("folder = \"../"))
        .unwrap()
        .trim_end_matches('"');
    serde_json::from_slice(&fs::read(ws.join(folder).join("manifest.json")).unwrap()).unwrap()
}

#[test]
fn manifests_follow_the_manifest_schema() {
    let v = schema("manifest.schema.json");
    let ws = tempfile::tempdir().unwrap();
    for sub in ["recipes", "demo-data"] {
        fs::create_dir(ws.path().join(sub)).unwrap();
        for entry in fs::read_dir(repo().join(sub)).unwrap() {
            let p = entry.unwrap().path();
            fs::copy(&p, ws.path().join(sub).join(p.file_name().unwrap())).unwrap();
        }
    }
    let mut texts: Vec<String> = shipped_recipes()
        .iter()
        .map(|p| fs::read_to_string(p).unwrap())
        .collect();
    // Variants that reach other branches: drop-rows, no centring, a rule that
    // keeps one component, a constant feature dropped.
    let demo = texts
        .iter()
        .find(|t| t.contains("results/dairy-march\""))
        .unwrap()
        .clone();
    texts.push(
        demo.replace("method = \"mean\"", "method = \"drop-rows\"")
            .replace("unit-variance", "none"),
    );
    texts.push(demo.replace("keep = \"broken-stick\"", "keep = { variance = 0.01 }"));
    texts.push(demo.replace(
        "\"unit-variance\"",
        "\"range\"\nconstant_features = \"drop\"",
    ));
    for text in texts {
        let manifest = manifest_of(&text, ws.path());
        let found = errors(&v, &manifest);
        assert!(found.is_empty(), "{found:?}\n{text}");
    }

    // The schema can fail: an extra key, a malformed digest, an absolute path.
    let manifest = manifest_of(&demo, ws.path());
    let mut extra = manifest.clone();
    extra["surprise"] = Value::Bool(true);
    let mut digest = manifest.clone();
    digest["digest"] = "not-a-digest".into();
    let mut absolute = manifest.clone();
    absolute["inputs"][0]["path"] = "/somewhere/data.csv".into();
    for bad in [extra, digest, absolute] {
        assert!(!errors(&v, &bad).is_empty());
    }
}
