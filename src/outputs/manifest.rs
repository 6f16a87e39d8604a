//! The provenance manifest: what was run, on what, and what came out.
//!
//! The manifest is JSON with keys in sorted order. Its `digest` is the SHA-256 of
//! the compact JSON of everything except `digest` and `run`; `run` (start time,
//! duration, host, threads, platform) is the only part that may differ between
//! reruns, and nothing hashes it.
//!
//! Commands that read a results folder trust its manifest only as far as
//! [`digest_matches`] and [`output_names`] allow: the digest catches an edited
//! manifest, and every output it names must be a plain relative path inside the
//! folder.

use super::hashing::sha256_hex;
pub use crate::analysis::InputRecord;
use serde::Serialize;
use serde_json::{Value, json};

/// The manifest's own format version.
pub const MANIFEST_FORMAT: u32 = 1;

/// One hashed file.
#[derive(Debug, Clone, Serialize)]
pub struct FileRecord {
    pub path: String,
    pub bytes: u64,
    pub sha256: String,
}

/// The details of this particular execution, outside every digest.
#[derive(Debug, Clone, Serialize)]
pub struct RunInfo {
    pub started_utc: String,
    pub seconds: f64,
    pub host: String,
    pub threads: usize,
    pub platform: String,
}

/// The hashed part of the manifest, before outputs are known.
#[derive(Debug, Clone)]
pub struct ManifestBody {
    pub recipe: Value,
    pub inputs: Vec<InputRecord>,
    pub steps: Value,
}

/// The fingerprint of what a run was asked to do: the resolved recipe and the
/// inputs' hashes. Two runs with equal fingerprints may replace each other.
/// A folder written by `apply` has no recipe: the model and how the batch was
/// read stand in for it ([`apply_key`]).
pub fn fingerprint(manifest: &Value) -> Option<(String, Vec<String>)> {
    let recipe = match manifest.pointer("/recipe/resolved_sha256") {
        Some(sha) => sha.as_str()?.to_string(),
        None => apply_key(
            manifest.pointer("/model/sha256")?.as_str()?,
            manifest.get("batch")?,
        ),
    };
    let inputs = manifest
        .get("inputs")?
        .as_array()?
        .iter()
        .map(|i| i.get("sha256").and_then(Value::as_str).map(str::to_string))
        .collect::<Option<Vec<_>>>()?;
    Some((recipe, inputs))
}

/// What stands for the recipe of an `apply` folder: the model's SHA-256 and
/// the settings the batch was read and ordered with (`batch` in its manifest).
pub fn apply_key(model_sha256: &str, batch: &Value) -> String {
    format!(
        "apply {model_sha256} {}",
        sha256_hex(batch.to_string().as_bytes())
    )
}

/// The digest a manifest should carry: SHA-256 of its compact JSON without
/// `digest` and `run` (`None` when it is not a JSON object).
pub fn digest_of(manifest: &Value) -> Option<String> {
    let mut body = manifest.clone();
    let map = body.as_object_mut()?;
    map.remove("digest");
    map.remove("run");
    Some(sha256_hex(&serde_json::to_vec(&body).ok()?))
}

/// Whether the manifest's `digest` is the digest of its contents.
pub fn digest_matches(manifest: &Value) -> bool {
    let recorded = manifest.get("digest").and_then(Value::as_str);
    recorded.is_some() && digest_of(manifest).as_deref() == recorded
}

/// Whether `path` is a plain relative path: `/`-separated names, none of them
/// empty, `.` or `..` (so it cannot leave the folder it is relative to).
pub fn is_plain_relative(path: &str) -> bool {
    !path.is_empty()
        && !path.contains('\\')
        && !path.contains('\0')
        && path
            .split('/')
            .all(|part| !part.is_empty() && part != "." && part != "..")
}

/// The output paths a manifest names, each a plain relative path; otherwise
/// the first offending entry, described.
pub fn output_names(manifest: &Value) -> Result<Vec<String>, String> {
    let Some(outputs) = manifest.get("outputs").and_then(Value::as_array) else {
        return Err("it has no list of outputs".into());
    };
    let mut names = Vec::with_capacity(outputs.len());
    for (i, output) in outputs.iter().enumerate() {
        match output.get("path").and_then(Value::as_str) {
            Some(path) if is_plain_relative(path) => names.push(path.to_string()),
            Some(path) => {
                return Err(format!(
                    "output {} is named `{path}`, which is not a plain path inside the folder",
                    i + 1
                ));
            }
            None => return Err(format!("output {} has no path", i + 1)),
        }
    }
    Ok(names)
}

/// Assembles the manifest and returns it as pretty JSON text with its digest.
pub fn render(body: &ManifestBody, outputs: &[FileRecord], run: &RunInfo) -> (String, String) {
    let value = json!({
        "tool": { "name": "sextant", "version": env!("CARGO_PKG_VERSION") },
        "manifest_format": MANIFEST_FORMAT,
        "recipe": body.recipe,
        "inputs": body.inputs,
        "steps": body.steps,
        "outputs": outputs,
    });
    render_value(value, run)
}

/// Adds the digest and the run block to an assembled manifest body and returns
/// the pretty JSON text and the digest (for manifests that are not of a run).
pub fn render_value(mut value: Value, run: &RunInfo) -> (String, String) {
    let digest = sha256_hex(&serde_json::to_vec(&value).expect("JSON values serialise"));
    let map = value.as_object_mut().expect("an object");
    map.insert("digest".into(), Value::String(digest.clone()));
    map.insert("run".into(), serde_json::to_value(run).expect("serialises"));
    let mut text = serde_json::to_string_pretty(&value).expect("serialises");
    text.push('\n');
    (text, digest)
}

/// The current time as an RFC 3339 UTC timestamp (whole seconds). Only used in
/// the unhashed `run` block.
pub fn utc_now() -> String {
    let secs = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map_or(0, |d| d.as_secs());
    let (days, rem) = (secs / 86_400, secs % 86_400);
    let (y, m, d) = civil_from_days(days as i64);
    format!(
        "{y:04}-{m:02}-{d:02}T{:02}:{:02}:{:02}Z",
        rem / 3600,
        rem % 3600 / 60,
        rem % 60
    )
}

/// Days since 1970-01-01 to a proleptic Gregorian date (H. Hinnant's
/// `civil_from_days` algorithm, "chrono-Compatible Low-Level Date Algorithms").
fn civil_from_days(z: i64) -> (i64, u32, u32) {
    let z = z + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = (doy - (153 * mp + 2) / 5 + 1) as u32;
    let m = if mp < 10 { mp + 3 } else { mp - 9 } as u32;
    let y = yoe + era * 400 + i64::from(m <= 2);
    (y, m, d)
}

/// The machine's host name, or "unknown".
pub fn host_name() -> String {
    std::fs::read_to_string("/proc/sys/kernel/hostname")
        .ok()
        .or_else(|| std::env::var("HOSTNAME").ok())
        .map(|s| s.trim().to_string())
        .filter(|s| !s.is_empty())
        .unwrap_or_else(|| "unknown".to_string())
}

/// The platform the binary was built for: architecture, OS and C environment.
pub fn platform() -> String {
    let env = if cfg!(target_env = "gnu") {
        "-gnu"
    } else if cfg!(target_env = "musl") {
        "-musl"
    } else if cfg!(target_env = "msvc") {
        "-msvc"
    } else {
        ""
    };
    format!("{}-{}{env}", std::env::consts::ARCH, std::env::consts::OS)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dates() {
        assert_eq!(civil_from_days(0), (1970, 1, 1));
        assert_eq!(civil_from_days(11_016), (2000, 2, 29));
        assert_eq!(civil_from_days(20_788), (2026, 12, 1));
    }

    #[test]
    fn digest_ignores_the_run_block() {
        let body = ManifestBody {
            recipe: json!({"a": 1}),
            inputs: vec![],
            steps: json!({}),
        };
        let run = |host: &str| RunInfo {
            started_utc: "x".into(),
            seconds: 1.0,
            host: host.into(),
            threads: 1,
            platform: "p".into(),
        };
        let (text_a, a) = render(&body, &[], &run("a"));
        let (text_b, b) = render(&body, &[], &run("b"));
        assert_eq!(a, b);
        assert_ne!(text_a, text_b);
        let value: Value = serde_json::from_str(&text_a).unwrap();
        assert_eq!(digest_of(&value).as_deref(), Some(a.as_str()));
        assert!(digest_matches(&value));
    }

    #[test]
    fn plain_relative_paths() {
        for ok in ["scores.csv", "plots/scree.svg", "a..b"] {
            assert!(is_plain_relative(ok), "{ok}");
        }
        for bad in [
            "",
            "/etc/passwd",
            "../x",
            "plots/../../x",
            "./x",
            "a//b",
            "a/",
            "a\\b",
        ] {
            assert!(!is_plain_relative(bad), "{bad}");
        }
    }
}
