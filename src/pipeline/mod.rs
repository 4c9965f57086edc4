//! The chain for one subject: k-space → undersample → reconstruct → segment → measure →
//! result row. Stages are called in this order only. A study plan runs as independent,
//! stored work units ([`units`], [`store`], [`execute`]) and one gathering step ([`gather`]);
//! [`study`] runs and reports on a whole plan.

pub mod execute;
pub mod gather;
pub mod store;
pub mod study;
pub mod units;

use ndarray::{s, Array4, ArrayView4};
use num_complex::Complex32;
use rayon::prelude::*;
use sha2::{Digest, Sha256};

use crate::fft::CenteredFft2;
use crate::geometry::Geometry;
use crate::measure::{self, MeasureError, PhaseChoice, Volumetry};
use crate::phantom::Phantom;
use crate::recon::{self, Params, ReconInput, ReconPlan, Reconstructor};
use crate::results::{AcquisitionRecord, RunRow, RunStatus, Truth};
use crate::sampling::{Pattern, SamplingError, SamplingMask, SamplingSpec};
use crate::segment::{self, Seed, SegmentError, SegmentParams, Segmentation, SliceRange};

/// One reconstruction to run on every slice of a subject.
#[derive(Clone)]
pub struct RunRequest {
    /// Method.
    pub method: &'static dyn Reconstructor,
    /// Sampling.
    pub sampling: SamplingSpec,
    /// Method parameters (checked).
    pub params: Params,
}

impl RunRequest {
    /// A request with the method's default parameters.
    pub fn with_defaults(method: &'static dyn Reconstructor, sampling: SamplingSpec) -> Self {
        RunRequest {
            method,
            sampling,
            params: Params::defaults(method),
        }
    }
}

/// What one slice's reconstruction did (for `recon.json`).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct SliceLog {
    /// Slice index.
    pub slice: usize,
    /// Iterations run.
    pub iterations: usize,
    /// Relative residual or change after each iteration.
    pub residuals: Vec<f64>,
    /// Wall time in milliseconds (kept out of results files, which must be byte-identical).
    pub runtime_ms: f64,
}

/// A reconstructed stack or why it failed, with its plan and per-slice log.
pub struct Reconstructed {
    /// What was run.
    pub plan: ReconPlan,
    /// `[slice, frame, row, col]` magnitude, or the error text.
    pub stack: Result<Array4<f32>, String>,
    /// One entry per reconstructed slice.
    pub log: Vec<SliceLog>,
    /// Sampling and coil processing, for provenance.
    pub acquisition: AcquisitionRecord,
}

/// Failure of segmentation or measurement of one series.
#[derive(Debug, thiserror::Error)]
pub enum SeriesError {
    /// Segmentation failed.
    #[error(transparent)]
    Segment(#[from] SegmentError),
    /// Measurement failed.
    #[error(transparent)]
    Measure(#[from] MeasureError),
}

/// Coil processing before reconstruction.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct CoilPrep {
    /// Noise pre-whitening matrix `[coil, coil]`, applied to every run.
    pub whitening: Option<ndarray::Array2<Complex32>>,
    /// Virtual coils after compression (0 = no compression). Applied to every run except
    /// `reference`, which stays the uncompressed root-sum-of-squares of all coils.
    pub virtual_coils: usize,
}

impl CoilPrep {
    /// Virtual coils `method` is compressed to under `mask` with `coils` receivers, if any:
    /// never for `reference`, and only where a calibration block is acquired in every frame.
    fn compresses_to(&self, method: &str, mask: &SamplingMask, coils: usize) -> Option<usize> {
        (self.virtual_coils > 0
            && self.virtual_coils < coils
            && method != crate::agreement::REFERENCE
            && mask.calibration_block().is_some())
        .then_some(self.virtual_coils)
    }
}

/// The provenance record of one request on `coils` receivers.
fn acquisition_record(
    req: &RunRequest,
    mask: &SamplingMask,
    prep: &CoilPrep,
    coils: usize,
) -> AcquisitionRecord {
    let s = &req.sampling;
    let random = s.pattern == Pattern::VariableDensity;
    AcquisitionRecord {
        acs_lines: s.acs_lines,
        density_law: random.then_some(s.law),
        kt_shear: (s.pattern == Pattern::KtLattice).then_some(s.shear),
        rng_seed: random.then_some(s.rng_seed),
        coils,
        virtual_coils: prep.compresses_to(req.method.id(), mask, coils),
        prewhitened: prep.whitening.is_some(),
    }
}

/// Runs every request on every slice of a `(coil, slice, frame, ky, kx)` stack; `source(k)`
/// gives slice `k`'s fully sampled k-space
/// `[coil, frame, ky, kx]`, so only one slice is in memory at a time. A method failing on
/// a slice fails that run only; a slice that cannot be read fails every run.
///
/// # Errors
/// A sampling request that does not fit the matrix.
pub fn reconstruct_slices(
    dims: (usize, usize, usize, usize, usize),
    source: &mut dyn FnMut(usize) -> Result<Array4<Complex32>, String>,
    runs: &[RunRequest],
    prep: &CoilPrep,
    progress: &dyn Fn(usize, usize),
) -> Result<Vec<Reconstructed>, SamplingError> {
    let (nco, ns, nf, nr, nc) = dims;
    let fft = CenteredFft2::new(nr, nc);
    let masks = runs
        .iter()
        .map(|r| r.sampling.mask(nf, nr))
        .collect::<Result<Vec<_>, _>>()?;
    let mut out: Vec<Reconstructed> = runs
        .iter()
        .zip(&masks)
        .map(|(r, mask)| Reconstructed {
            plan: ReconPlan {
                method: r.method.id().into(),
                pattern: r.sampling.pattern.id().into(),
                accel_nominal: r.sampling.accel,
                accel_effective: mask.accel_effective(),
            },
            stack: Ok(Array4::zeros((ns, nf, nr, nc))),
            log: Vec::new(),
            acquisition: acquisition_record(r, mask, prep, nco),
        })
        .collect();
    for k in 0..ns {
        progress(k, ns);
        let full = match source(k) {
            Ok(f) => match &prep.whitening {
                Some(w) => recon::coils::mix_coils(f.view(), w),
                None => f,
            },
            Err(e) => {
                out.iter_mut()
                    .for_each(|r| r.stack = Err(format!("slice {k}: {e}")));
                break;
            }
        };
        // The runs of one slice are independent: run them in parallel (each also
        // parallelises its own FFT batches), then store the results in request order.
        runs.par_iter()
            .zip(masks.par_iter())
            .zip(out.par_iter_mut())
            .for_each(|((req, mask), rec)| {
                let Ok(stack) = rec.stack.as_mut() else {
                    return;
                };
                let mut kspace = full.clone();
                mask.apply(kspace.view_mut());
                if let (Some(k), Some(block)) = (
                    prep.compresses_to(req.method.id(), mask, kspace.dim().0),
                    mask.calibration_block(),
                ) {
                    let m = recon::coils::compression_matrix(kspace.view(), block, k, 1.0);
                    kspace = recon::coils::mix_coils(kspace.view(), &m);
                }
                let input = ReconInput {
                    kspace: kspace.view(),
                    mask,
                    fft: &fft,
                    sens: None,
                };
                let started = std::time::Instant::now();
                match recon::run(req.method, &input, &req.params) {
                    Ok(o) => {
                        stack.slice_mut(s![k, .., .., ..]).assign(&o.images);
                        rec.log.push(SliceLog {
                            slice: k,
                            iterations: o.iterations,
                            residuals: o.residuals,
                            runtime_ms: started.elapsed().as_secs_f64() * 1000.0,
                        });
                    }
                    Err(e) => rec.stack = Err(format!("slice {k}: {e}")),
                }
            });
    }
    progress(ns, ns);
    Ok(out)
}

/// Renders and acquires the phantom slice by slice and runs every request on each slice.
///
/// # Errors
/// A sampling request that does not fit the phantom's matrix.
pub fn reconstruct_phantom(
    ph: &Phantom,
    runs: &[RunRequest],
    prep: &CoilPrep,
) -> Result<Vec<Reconstructed>, SamplingError> {
    let spec = ph.spec();
    let dims = (spec.coils, spec.slices, spec.frames, spec.rows, spec.cols);
    reconstruct_slices(
        dims,
        &mut |k| {
            let (image, _) = ph.render_slice(k);
            Ok(ph.slice_kspace(k, &image))
        },
        runs,
        prep,
        &|_, _| {},
    )
}

/// Segments and measures one image series with the given seeds.
///
/// # Errors
/// [`SeriesError`] naming the seed or the place at fault.
pub fn measure_series(
    images: ArrayView4<f32>,
    geom: &Geometry,
    seeds: &[Seed],
    params: &SegmentParams,
) -> Result<(Segmentation, Volumetry), SeriesError> {
    measure_series_limited(images, geom, seeds, &[], params)
}

/// Like [`measure_series`], with the user's slice limits per frame range applied before
/// measuring.
///
/// # Errors
/// [`SeriesError`] naming the seed, the slice range, or the place at fault.
pub fn measure_series_limited(
    images: ArrayView4<f32>,
    geom: &Geometry,
    seeds: &[Seed],
    ranges: &[SliceRange],
    params: &SegmentParams,
) -> Result<(Segmentation, Volumetry), SeriesError> {
    let mut seg = segment::segment(images, seeds, params)?;
    segment::settle_extent(&mut seg, images, seeds, ranges, geom.pixel_mm(), params)?;
    let vol = measure::measure(seg.masks.view(), geom, PhaseChoice::default())?;
    Ok((seg, vol))
}

/// The analytic truth of a phantom with the result-row keys.
///
/// # Panics
/// Never for a valid phantom (its true volumes are positive).
pub fn phantom_truth(ph: &Phantom) -> Truth {
    let t = ph.truth();
    let geom = ph.geometry();
    let v = measure::volumetry_from_areas(t.slice_areas_mm2.clone(), &geom, PhaseChoice::default())
        .expect("phantom volumes are positive");
    Truth {
        numbers: v.numbers,
        slice_areas_mm2: t.slice_areas_mm2,
        continuous_volume_curve_ml: t.continuous_volume_curve_ml,
    }
}

/// A result row from a plan and the outcome of its series.
pub fn result_row(
    subject: &str,
    plan: &ReconPlan,
    outcome: Result<(Segmentation, Volumetry), String>,
    params: &SegmentParams,
    truth: Option<Truth>,
) -> RunRow {
    let (status, numbers, areas, messages, leak_guard, slices_counted) = match outcome {
        Ok((seg, vol)) => (
            RunStatus::Ok,
            Some(vol.numbers),
            Some(vol.slice_areas_mm2),
            seg.notes,
            seg.guard_events,
            seg.extent,
        ),
        Err(e) => (
            RunStatus::Failed,
            None,
            None,
            vec![e],
            Vec::new(),
            Vec::new(),
        ),
    };
    RunRow {
        subject: subject.into(),
        method: plan.method.clone(),
        pattern: plan.pattern.clone(),
        accel_nominal: plan.accel_nominal,
        accel_effective: plan.accel_effective,
        status,
        numbers,
        blood_pool_convention: params.convention().describe().into(),
        slice_rule: params.extent.describe(),
        messages,
        slice_areas_mm2: areas,
        truth,
        seed_jitter: None,
        leak_guard,
        slices_counted,
        fidelity: None,
        parameters: Default::default(),
        seeds: Vec::new(),
        acquisition: None,
    }
}

/// SHA-256 of a serialisable description (provenance of generated inputs).
pub fn sha256_of<T: serde::Serialize>(value: &T) -> String {
    let bytes = serde_json::to_vec(value).expect("serialisable");
    Sha256::digest(&bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

/// The single mid-ventricular seed of a phantom, at frame 0 (end-diastole).
pub fn phantom_seed(ph: &Phantom) -> Seed {
    let (slice, row, col) = ph.mid_ventricular_pixel();
    Seed {
        slice,
        frame: 0,
        row,
        col,
    }
}
