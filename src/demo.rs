//! The built-in demo study, read from `demo-studies/tidewater.toml` (embedded at build time):
//! an invented scenario with three synthetic subjects of normal, mildly reduced and
//! severely reduced EF, each reconstructed fully sampled and by several methods at R = 4, 8
//! and 12.

use serde::Deserialize;

use crate::fidelity::{self, Fidelity};
use crate::panels;
use crate::phantom::{Phantom, PhantomSpec};
use crate::pipeline::{self, CoilPrep, RunRequest};
use crate::recon::{self, Params};
use crate::results::{InputHash, ResultsFile, RunRow};
use crate::sampling::{Pattern, SamplingSpec};
use crate::seed_jitter::seed_jitter;
use crate::segment::SegmentParams;
use std::path::Path;

/// The demo study description, embedded in the binary.
pub const DEMO_TOML: &str = include_str!("../demo-studies/tidewater.toml");

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct DemoFile {
    study: String,
    acquisition: Acquisition,
    comparison: Comparison,
    subject: Vec<SubjectEntry>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct Acquisition {
    slices: usize,
    slice_thickness_mm: f64,
    slice_gap_mm: f64,
    pixel_mm: f64,
    rows: usize,
    cols: usize,
    frames: usize,
    coils: usize,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct Comparison {
    methods: Vec<String>,
    pattern: String,
    accelerations: Vec<f64>,
    acs_lines: usize,
    virtual_coils: usize,
    #[serde(default)]
    parameters: std::collections::BTreeMap<String, std::collections::BTreeMap<String, f64>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct SubjectEntry {
    code: String,
    description: String,
    edv_ml: f64,
    ef_pct: f64,
    heart_rate_bpm: f64,
    snr: f64,
}

fn demo_file() -> DemoFile {
    toml::from_str(DEMO_TOML).expect("the embedded demo study is valid (checked by tests)")
}

/// Study code of the demo.
pub fn study() -> String {
    demo_file().study
}

/// One synthetic demo subject.
#[derive(Debug, Clone)]
pub struct DemoSubject {
    /// Subject code.
    pub code: String,
    /// What the subject represents.
    pub description: String,
    /// Phantom parameters.
    pub spec: PhantomSpec,
}

/// The demo subjects; `rng_seed` sets their noise (each subject its own stream).
pub fn subjects(rng_seed: u64) -> Vec<DemoSubject> {
    let d = demo_file();
    let a = &d.acquisition;
    d.subject
        .iter()
        .enumerate()
        .map(|(k, s)| DemoSubject {
            code: s.code.clone(),
            description: s.description.clone(),
            spec: PhantomSpec {
                edv_ml: s.edv_ml,
                ef_pct: s.ef_pct,
                heart_rate_bpm: s.heart_rate_bpm,
                slices: a.slices,
                slice_thickness_mm: a.slice_thickness_mm,
                slice_gap_mm: a.slice_gap_mm,
                pixel_mm: a.pixel_mm,
                rows: a.rows,
                cols: a.cols,
                frames: a.frames,
                coils: a.coils,
                snr: s.snr,
                rng_seed: rng_seed.wrapping_mul(1000).wrapping_add(k as u64 + 1),
                thin_septum: None,
            },
        })
        .collect()
}

/// The runs of the demo: the fully sampled reference, then every method at every R, all
/// methods at one R on the same lines; `rng_seed` sets the pseudo-random lines.
pub fn runs(rng_seed: u64) -> Vec<RunRequest> {
    let c = demo_file().comparison;
    let pattern = Pattern::from_id(&c.pattern).expect("embedded demo names a known pattern");
    let mut v = vec![RunRequest::with_defaults(
        recon::by_id("reference").expect("registered"),
        SamplingSpec::full(),
    )];
    for r in c.accelerations {
        let sampling = SamplingSpec::new(pattern, r, c.acs_lines)
            .expect("valid demo sampling")
            .with_rng_seed(rng_seed);
        for m in &c.methods {
            let method = recon::by_id(m).expect("embedded demo names registered methods");
            let given: Vec<(String, String)> = c
                .parameters
                .get(m)
                .map(|t| t.iter().map(|(k, v)| (k.clone(), v.to_string())).collect())
                .unwrap_or_default();
            let params =
                Params::resolve(method, &given).expect("embedded demo parameters are valid");
            v.push(RunRequest {
                method,
                sampling,
                params,
            });
        }
    }
    v
}

/// Coil processing of the demo (compression before the accelerated reconstructions).
pub fn coil_prep() -> CoilPrep {
    CoilPrep {
        whitening: None,
        virtual_coils: demo_file().comparison.virtual_coils,
    }
}

/// Seed offset (px) of the demo's seed-sensitivity floor on the reference runs.
pub const DEMO_JITTER_PX: usize = 2;

/// Runs the whole chain on one synthetic subject and returns its result rows.
///
/// # Errors
/// An invalid phantom specification or sampling request.
pub fn run_subject(
    code: &str,
    spec: &PhantomSpec,
    runs: &[RunRequest],
    prep: &CoilPrep,
    params: &SegmentParams,
    panels_dir: Option<&Path>,
) -> Result<Vec<RunRow>, anyhow::Error> {
    let ph = Phantom::new(spec.clone())?;
    let seeds = [pipeline::phantom_seed(&ph)];
    let geom = ph.geometry();
    let truth = pipeline::phantom_truth(&ph);
    let recs = pipeline::reconstruct_phantom(&ph, runs, prep)?;
    let measured: Vec<_> = recs
        .into_iter()
        .map(|rec| {
            let outcome = rec.stack.as_ref().map_err(Clone::clone).and_then(|stack| {
                pipeline::measure_series(stack.view(), &geom, &seeds, params)
                    .map_err(|e| e.to_string())
            });
            (rec, outcome)
        })
        .collect();
    // Every method's images and masks against the reference reconstruction's.
    let reference = measured.iter().find_map(|(rec, out)| {
        let stack = rec.stack.as_ref().ok()?;
        let (seg, vol) = out.as_ref().ok()?;
        (rec.plan.method == crate::agreement::REFERENCE).then_some((stack, seg, vol))
    });
    let fidelity: Vec<Option<Fidelity>> = measured
        .iter()
        .map(|(rec, out)| {
            let (ref_stack, ref_seg, ref_vol) = reference?;
            let stack = rec.stack.as_ref().ok()?;
            let (seg, _) = out.as_ref().ok()?;
            (rec.plan.method != crate::agreement::REFERENCE).then(|| {
                fidelity::fidelity(
                    stack.view(),
                    ref_stack.view(),
                    seg.masks.view(),
                    ref_seg.masks.view(),
                    &geom,
                    (ref_vol.numbers.ed_frame, ref_vol.numbers.es_frame),
                )
            })
        })
        .collect();
    if let (Some(dir), Some((ref_stack, ref_seg, ref_vol))) = (panels_dir, reference) {
        let s0 = seeds[0].slice;
        let phases = (ref_vol.numbers.ed_frame, ref_vol.numbers.es_frame);
        let crop = panels::crop_box(ref_seg.masks.view(), s0, phases.0);
        let window = panels::window(ref_stack.view(), s0);
        for (rec, out) in &measured {
            if let (Ok(stack), Ok((seg, _))) = (&rec.stack, out) {
                let p = &rec.plan;
                let path = panels::file(dir, code, &p.method, &p.pattern, p.accel_nominal);
                panels::write_pair(
                    &path,
                    stack.view(),
                    seg.masks.view(),
                    s0,
                    phases,
                    &crop,
                    window,
                )?;
            }
        }
    }
    // The reference's own repeatability floor: its seed moved by 2 px in eight directions.
    let jitter = reference.map(|(stack, _, vol)| {
        seed_jitter(
            stack.view(),
            &geom,
            &seeds,
            &[],
            params,
            DEMO_JITTER_PX,
            &vol.numbers,
        )
    });
    Ok(measured
        .into_iter()
        .zip(fidelity)
        .zip(runs)
        // One reconstruction per request, in request order.
        .map(|(((rec, outcome), fidelity), req)| {
            let is_reference = rec.plan.method == crate::agreement::REFERENCE;
            let mut row =
                pipeline::result_row(code, &rec.plan, outcome, params, Some(truth.clone()));
            row.fidelity = fidelity;
            row.acquisition = Some(rec.acquisition.clone());
            row.seeds = seeds.to_vec();
            row.parameters = req.params.iter().map(|(k, v)| (k.to_string(), v)).collect();
            if is_reference && row.numbers.is_some() {
                row.seed_jitter = jitter.clone();
            }
            row
        })
        .collect())
}

/// Runs the demo study; `progress` is told each subject as it starts.
///
/// # Errors
/// As [`run_subject`].
pub fn run(
    rng_seed: u64,
    panels_dir: Option<&Path>,
    progress: &dyn Fn(usize, usize, &str),
) -> Result<ResultsFile, anyhow::Error> {
    let subjects = subjects(rng_seed);
    let runs = runs(rng_seed);
    let prep = coil_prep();
    let params = SegmentParams::default();
    let mut rows = Vec::new();
    let mut inputs = Vec::new();
    for (i, s) in subjects.iter().enumerate() {
        progress(i, subjects.len(), &s.code);
        inputs.push(InputHash {
            label: format!("{} (synthetic phantom parameters)", s.code),
            sha256: pipeline::sha256_of(&s.spec),
        });
        rows.extend(run_subject(
            &s.code, &s.spec, &runs, &prep, &params, panels_dir,
        )?);
    }
    progress(subjects.len(), subjects.len(), "done");
    let mut file = ResultsFile::new(&study(), inputs, rows);
    file.compare(&crate::acceptance::default_criteria());
    Ok(file)
}
