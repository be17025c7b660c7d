//! Input hashes and the run manifest (`manifest.json`).
//!
//! The manifest records what a run read and how: every input file with its SHA-256
//! (FIPS 180-4), the resolved study, the crate version, the seed, the thread count and
//! the stage timings. Everything but the timings is a function of the inputs, so two runs
//! on the same inputs give manifests that differ only in `timings`.

use std::collections::BTreeMap;
use std::io::Read;
use std::path::{Path, PathBuf};

use serde::Serialize;
use sha2::{Digest, Sha256};

use crate::study::Study;

/// One hashed input.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct InputHash {
    /// What the file is ("study", "fixes", "raster habitat", "animals", "truth").
    pub role: String,
    /// Path relative to the study file's folder when below it, else as given.
    pub file: String,
    /// SHA-256, lower-case hex.
    pub sha256: String,
    /// Size in bytes.
    pub bytes: u64,
}

/// SHA-256 of a file, lower-case hex, and its size.
///
/// # Errors
/// The I/O error, when the file cannot be read.
pub fn sha256_file(path: &Path) -> std::io::Result<(String, u64)> {
    let mut f = std::fs::File::open(path)?;
    let mut h = Sha256::new();
    let mut buf = vec![0u8; 1 << 16];
    let mut n = 0u64;
    loop {
        let k = f.read(&mut buf)?;
        if k == 0 {
            break;
        }
        n += k as u64;
        h.update(&buf[..k]);
    }
    Ok((hex(&h.finalize()), n))
}

/// SHA-256 of bytes, lower-case hex.
pub fn sha256_bytes(bytes: &[u8]) -> String {
    hex(&Sha256::digest(bytes))
}

fn hex(b: &[u8]) -> String {
    b.iter().map(|x| format!("{x:02x}")).collect()
}

fn relative(study: &Study, p: &Path) -> String {
    let root = study.source().parent().unwrap_or(Path::new(""));
    p.strip_prefix(root)
        .unwrap_or(p)
        .to_string_lossy()
        .replace('\\', "/")
}

/// Every input file of a study, in a fixed order: the study file, the fixes files, the
/// raster layers, the animal table, the truth file.
pub fn input_files(study: &Study) -> Vec<(String, PathBuf)> {
    let mut out = vec![("study".to_string(), study.source().to_path_buf())];
    out.extend(
        study
            .inputs()
            .iter()
            .map(|i| ("fixes".to_string(), i.path.clone())),
    );
    let cov = study.covariates();
    out.extend(
        cov.rasters
            .iter()
            .map(|r| (format!("raster {}", r.name), r.path.clone())),
    );
    if let Some(a) = &cov.animals {
        out.push(("animals".to_string(), a.path.clone()));
    }
    if let Some(t) = &study.report().truth {
        out.push(("truth".to_string(), t.clone()));
    }
    out
}

/// Hashes every input file of the study.
///
/// # Errors
/// The path and I/O error of the first file that cannot be read.
pub fn hash_inputs(study: &Study) -> Result<Vec<InputHash>, (PathBuf, std::io::Error)> {
    input_files(study)
        .into_iter()
        .map(|(role, p)| {
            let (sha256, bytes) = sha256_file(&p).map_err(|e| (p.clone(), e))?;
            Ok(InputHash {
                role,
                file: relative(study, &p),
                sha256,
                bytes,
            })
        })
        .collect()
}

/// The run manifest.
#[derive(Debug, Clone, Serialize)]
pub struct Manifest {
    /// Format tag.
    pub format: &'static str,
    /// cairn version.
    pub cairn_version: &'static str,
    /// Inputs with their hashes.
    pub inputs: Vec<InputHash>,
    /// The resolved study (every default filled in).
    pub study: serde_json::Value,
    /// Seed of the model fits (None without `[model]`).
    pub seed: Option<u64>,
    /// Worker threads used.
    pub threads: usize,
    /// Stages run or reused, in order: (stage, "ran" | "reused").
    pub stages: Vec<(String, String)>,
    /// Files written by the report stage, relative to the output folder, with SHA-256.
    pub outputs: BTreeMap<String, String>,
    /// Wall time per stage, seconds (the only part that varies between identical runs).
    pub timings: Vec<(String, f64)>,
}

impl Manifest {
    /// A manifest for `study` with the given inputs, stages and timings.
    pub fn new(
        study: &Study,
        inputs: Vec<InputHash>,
        stages: Vec<(String, String)>,
        outputs: BTreeMap<String, String>,
        timings: Vec<(String, f64)>,
    ) -> Self {
        let mut resolved = serde_json::to_value(study).unwrap_or(serde_json::Value::Null);
        // Absolute paths differ between machines and folders; keep the study's own view.
        scrub_paths(&mut resolved, study);
        Manifest {
            format: "cairn-manifest",
            cairn_version: env!("CARGO_PKG_VERSION"),
            inputs,
            study: resolved,
            seed: study.model().map(|m| m.seed),
            threads: rayon::current_num_threads(),
            stages,
            outputs,
            timings,
        }
    }
}

/// Replaces absolute paths under the study's folder with relative ones.
fn scrub_paths(v: &mut serde_json::Value, study: &Study) {
    let root = study
        .source()
        .parent()
        .map(|p| p.to_string_lossy().to_string())
        .unwrap_or_default();
    match v {
        serde_json::Value::String(s) if !root.is_empty() && s.starts_with(&root) => {
            *s = s[root.len()..].trim_start_matches(['/', '\\']).to_string();
        }
        serde_json::Value::Array(a) => a.iter_mut().for_each(|x| scrub_paths(x, study)),
        serde_json::Value::Object(o) => o.values_mut().for_each(|x| scrub_paths(x, study)),
        _ => {}
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// FIPS 180-4 / NIST CSRC example values for SHA-256.
    #[test]
    fn sha256_matches_the_standard_examples() {
        assert_eq!(
            sha256_bytes(b"abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
        assert_eq!(
            sha256_bytes(b""),
            "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855"
        );
    }
}
