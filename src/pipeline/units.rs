//! A plan expanded into independent work units (subject × pattern × R × method, or one given
//! image series), each keyed by the content of everything its result depends on.

use serde::Serialize;
use sha2::{Digest, Sha256};

use super::RunRequest;
use crate::io::{self, IoError};
use crate::plan::{Plan, Source};
use crate::recon;
use crate::results::InputHash;
use crate::sampling::SamplingSpec;

/// What one unit does.
#[derive(Clone)]
pub enum Work {
    /// Undersample the subject's k-space, reconstruct, segment, measure.
    Reconstruct(RunRequest),
    /// Segment and measure the subject's given series number `n`.
    Series(usize),
}

/// One work unit.
#[derive(Clone)]
pub struct Unit {
    /// Position in plan order.
    pub index: usize,
    /// Index of the subject in the plan.
    pub subject: usize,
    /// What to do.
    pub work: Work,
    /// Human-readable name: subject, method, pattern, R.
    pub label: String,
    /// Content key: SHA-256 of the tool version, the subject's input hash, its seeds and
    /// geometry, and the unit's own method, sampling, coil and segmentation settings.
    pub key: String,
}

/// The content hash of each subject's inputs (files read in full; phantom parameters).
///
/// # Errors
/// [`IoError`] naming a file that cannot be read.
pub fn input_hashes(plan: &Plan) -> Result<Vec<InputHash>, IoError> {
    plan.subjects
        .iter()
        .map(|s| {
            let (label, sha256) = match &s.source {
                Source::Phantom(spec) => (
                    format!("{} (synthetic phantom parameters)", s.code),
                    super::sha256_of(spec),
                ),
                Source::Kspace(p) => (
                    format!("{} k-space {}", s.code, file_name(p)),
                    io::sha256_files(&files_under(p)?)?,
                ),
                Source::Series(list) => {
                    let mut files = Vec::new();
                    for g in list {
                        files.extend(files_under(&g.path)?);
                    }
                    (
                        format!("{} image series ({})", s.code, list.len()),
                        io::sha256_files(&files)?,
                    )
                }
            };
            let seeds = match &s.seeds {
                Some((p, _)) => io::sha256_file(p)?,
                None => String::new(),
            };
            Ok(InputHash {
                label,
                sha256: if seeds.is_empty() {
                    sha256
                } else {
                    super::sha256_of(&(sha256, seeds))
                },
            })
        })
        .collect()
}

/// The last path component (folders and files are named in results by name only, so that
/// results do not depend on where the study folder lies).
fn file_name(p: &std::path::Path) -> String {
    p.file_name()
        .map_or_else(|| p.display().to_string(), |n| n.to_string_lossy().into())
}

/// Every file of a path: itself, or the files below a folder, sorted.
fn files_under(p: &std::path::Path) -> Result<Vec<std::path::PathBuf>, IoError> {
    if p.is_file() {
        return Ok(vec![p.to_path_buf()]);
    }
    let mut out = Vec::new();
    let mut stack = vec![p.to_path_buf()];
    while let Some(d) = stack.pop() {
        let list = std::fs::read_dir(&d).map_err(|e| IoError::file(&d, "cannot list folder", e))?;
        for e in list.flatten() {
            let path = e.path();
            if path.is_dir() {
                stack.push(path);
            } else {
                out.push(path);
            }
        }
    }
    out.sort();
    Ok(out)
}

#[derive(Serialize)]
struct KeyParts<'a> {
    tool: &'static str,
    input: &'a str,
    geometry: &'a crate::plan::GeometryOverride,
    segmentation: String,
    seed_jitter_px: usize,
    work: serde_json::Value,
}

/// The reconstructions of every k-space subject: the fully sampled reference, then every
/// method at every pattern and R (patterns outer, then R), all methods at one R on the same
/// acquired lines.
pub fn requests(plan: &Plan) -> Vec<RunRequest> {
    let reference = recon::by_id(crate::agreement::REFERENCE).expect("registered");
    let mut v = vec![RunRequest::with_defaults(reference, SamplingSpec::full())];
    for spec in &plan.sampling.specs {
        for m in &plan.methods {
            v.push(RunRequest {
                method: m.method,
                sampling: *spec,
                params: m.params.clone(),
            });
        }
    }
    v
}

/// The plan's units in order: per subject, the reference first, then every pattern × R ×
/// method (or every given series); `inputs` from [`input_hashes`].
pub fn expand(plan: &Plan, inputs: &[InputHash]) -> Vec<Unit> {
    let mut units = Vec::new();
    for (si, (s, input)) in plan.subjects.iter().zip(inputs).enumerate() {
        let mut push = |work: Work, label: String, key: serde_json::Value| {
            let parts = KeyParts {
                tool: env!("CARGO_PKG_VERSION"),
                input: &input.sha256,
                geometry: &s.geometry,
                segmentation: format!("{:?}", plan.segmentation),
                seed_jitter_px: plan.seed_jitter_px,
                work: key,
            };
            let key = hex(&Sha256::digest(
                serde_json::to_vec(&parts).expect("serialisable"),
            ));
            units.push(Unit {
                index: units.len(),
                subject: si,
                work,
                label,
                key,
            });
        };
        match &s.source {
            Source::Phantom(_) | Source::Kspace(_) => {
                for r in requests(plan) {
                    let label = format!(
                        "{} {} {} R={}",
                        s.code,
                        r.method.id(),
                        r.sampling.pattern.id(),
                        r.sampling.accel
                    );
                    let key = serde_json::json!({"reconstruct": {
                        "method": r.method.id(),
                        "params": r.params.iter().collect::<Vec<_>>(),
                        "sampling": r.sampling,
                        "virtual_coils": plan.virtual_coils,
                        "prewhiten": plan.prewhiten,
                    }});
                    push(Work::Reconstruct(r), label, key);
                }
            }
            Source::Series(list) => {
                let mut order: Vec<usize> = (0..list.len()).collect();
                // The reference first, then as listed.
                order.sort_by_key(|&i| list[i].method != crate::agreement::REFERENCE);
                for i in order {
                    let g = &list[i];
                    let key = serde_json::json!({"series": {
                        "method": g.method,
                        "pattern": g.pattern,
                        "accel": g.accel,
                        "accel_effective": g.accel_effective,
                        "select": g.select,
                    }});
                    push(
                        Work::Series(i),
                        format!("{} {} {} R={}", s.code, g.method, g.pattern, g.accel),
                        key,
                    );
                }
            }
        }
    }
    units
}

fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}
