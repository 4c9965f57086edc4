//! Running the pending units of one subject: the k-space is read (or the phantom acquired)
//! one slice at a time and every pending reconstruction of the subject is made from that
//! slice, then each series is segmented and measured and its unit stored.

use ndarray::ArrayView4;
use rayon::prelude::*;

use super::store::Store;
use super::units::{Unit, Work};
use super::{CoilPrep, RunRequest};
use crate::geometry::Geometry;
use crate::plan::{GeometryOverride, Plan, Source, Subject};
use crate::results::{RunRow, Truth};
use crate::segment::{Seed, SliceRange};

/// Geometry with the plan's overrides applied.
///
/// # Errors
/// A value that is not positive and finite, named by key.
pub fn apply_override(geom: &Geometry, o: &GeometryOverride) -> Result<Geometry, String> {
    let mut g = geom.clone();
    let check = |name: &str, v: f64| {
        if v.is_finite() && v > 0.0 {
            Ok(v)
        } else {
            Err(format!(
                "geometry.{name}: expected a positive value, found {v}"
            ))
        }
    };
    if let Some([r, c]) = o.pixel_spacing_mm {
        g.row_spacing_mm = check("pixel_spacing_mm", r)?;
        g.col_spacing_mm = check("pixel_spacing_mm", c)?;
    }
    if let Some(t) = o.slice_thickness_mm {
        g.slice_thickness_mm = check("slice_thickness_mm", t)?;
    }
    if let Some(s) = o.slice_spacing_mm {
        g.slice_spacing_mm = check("slice_spacing_mm", s)?;
    }
    if let Some(dt) = o.frame_interval_ms {
        let dt = check("frame_interval_ms", dt)?;
        g.trigger_times_ms = (0..g.trigger_times_ms.len())
            .map(|k| k as f64 * dt)
            .collect();
    }
    Ok(g)
}

/// What a subject's units are measured with.
struct Measuring<'a> {
    plan: &'a Plan,
    geom: Geometry,
    seeds: Vec<Seed>,
    ranges: Vec<SliceRange>,
    truth: Option<Truth>,
}

impl<'a> Measuring<'a> {
    /// Measuring for `subject` with geometry `geom` (the plan's overrides applied here) and
    /// the subject's seeds, or `fallback` when it has none (a phantom's own seed).
    fn new(
        plan: &'a Plan,
        subject: &Subject,
        geom: &Geometry,
        fallback: Option<Seed>,
        truth: Option<Truth>,
    ) -> Result<Self, String> {
        let (seeds, ranges) = seeds_of(subject, fallback)?;
        Ok(Measuring {
            plan,
            geom: apply_override(geom, &subject.geometry)?,
            seeds,
            ranges,
            truth,
        })
    }

    /// Segments and measures one stack and makes its result row (with the reference's
    /// repeatability floor when the plan asks for it).
    fn row(
        &self,
        subject: &str,
        plan: &crate::recon::ReconPlan,
        stack: Result<ArrayView4<f32>, String>,
    ) -> (RunRow, Option<ndarray::Array4<bool>>) {
        let params = &self.plan.segmentation;
        let outcome = stack.and_then(|images| {
            super::measure_series_limited(images, &self.geom, &self.seeds, &self.ranges, params)
                .map_err(|e| e.to_string())
                .map(|(seg, vol)| (images, seg, vol))
        });
        let jitter_px = self.plan.seed_jitter_px;
        let (outcome, extra) = match outcome {
            Ok((images, mut seg, vol)) => {
                let jitter =
                    (jitter_px > 0 && plan.method == crate::agreement::REFERENCE).then(|| {
                        crate::seed_jitter::seed_jitter(
                            images,
                            &self.geom,
                            &self.seeds,
                            &self.ranges,
                            params,
                            jitter_px,
                            &vol.numbers,
                        )
                    });
                // The row keeps the segmentation's notes and extents, not its masks: move
                // them out instead of copying.
                let masks =
                    std::mem::replace(&mut seg.masks, ndarray::Array4::default((0, 0, 0, 0)));
                (Ok((seg, vol)), Some((jitter, masks)))
            }
            Err(e) => (Err(e), None),
        };
        let mut row = super::result_row(subject, plan, outcome, params, self.truth.clone());
        row.seeds = self.seeds.clone();
        match extra {
            Some((jitter, masks)) => {
                row.seed_jitter = jitter;
                (row, Some(masks))
            }
            None => (row, None),
        }
    }
}

/// Runs `units` (all of subject `subject`) and stores each as it finishes. Returns, per
/// unit, `Ok` or the reason it could not be computed (a failure that belongs to the data,
/// such as a seed that cannot grow, is a stored failed row, not an error here).
pub fn run_units(
    plan: &Plan,
    subject: &Subject,
    units: &[&Unit],
    store: &Store,
    progress: &dyn Fn(usize, usize),
) -> Vec<Result<(), String>> {
    match run_units_inner(plan, subject, units, store, progress) {
        Ok(v) => v,
        Err(e) => units.iter().map(|_| Err(e.clone())).collect(),
    }
}

/// The subject's seeds file, or the phantom's own seed.
fn seeds_of(
    subject: &Subject,
    fallback: Option<Seed>,
) -> Result<(Vec<Seed>, Vec<SliceRange>), String> {
    match (&subject.seeds, fallback) {
        (Some((_, f)), _) => Ok((f.seed.clone(), f.slice_ranges.clone())),
        (None, Some(seed)) => Ok((vec![seed], Vec::new())),
        (None, None) => Err(format!("subject {}: no seeds file", subject.code)),
    }
}

fn run_units_inner(
    plan: &Plan,
    subject: &Subject,
    units: &[&Unit],
    store: &Store,
    progress: &dyn Fn(usize, usize),
) -> Result<Vec<Result<(), String>>, String> {
    let code = &subject.code;
    match &subject.source {
        Source::Series(list) => Ok(units
            .iter()
            .map(|u| {
                let Work::Series(i) = u.work else {
                    return Err("not a series unit".to_string());
                };
                let g = &list[i];
                let series = crate::io::read_images(&g.path, g.select.as_deref())
                    .map_err(|e| e.to_string())?;
                let m = Measuring::new(plan, subject, &series.geometry, None, None)?;
                let rp = crate::recon::ReconPlan {
                    method: g.method.clone(),
                    pattern: g.pattern.clone(),
                    accel_nominal: g.accel,
                    accel_effective: g.accel_effective,
                };
                let (row, masks) = m.row(code, &rp, Ok(series.images.view()));
                store
                    .put(
                        &u.key,
                        &row,
                        masks
                            .as_ref()
                            .map(|mk| (series.images.view(), mk.view(), &m.geom)),
                    )
                    .map_err(|e| e.to_string())
            })
            .collect()),
        Source::Phantom(spec) => {
            let ph = crate::phantom::Phantom::new(spec.clone()).map_err(|e| e.to_string())?;
            let m = Measuring::new(
                plan,
                subject,
                &ph.geometry(),
                Some(super::phantom_seed(&ph)),
                Some(super::phantom_truth(&ph)),
            )?;
            let dims = (spec.coils, spec.slices, spec.frames, spec.rows, spec.cols);
            let prep = CoilPrep {
                whitening: None,
                virtual_coils: plan.virtual_coils,
            };
            reconstruct_and_store(
                &m,
                code,
                units,
                store,
                dims,
                &mut |k| {
                    let (image, _) = ph.render_slice(k);
                    Ok(ph.slice_kspace(k, &image))
                },
                &prep,
                progress,
            )
        }
        Source::Kspace(path) => {
            let folder = crate::io::kspace::open_kspace(path).map_err(|e| e.to_string())?;
            let m = Measuring::new(plan, subject, &folder.geometry, None, None)?;
            let whitening = match (&folder.noise_cov, plan.prewhiten) {
                (Some(cov), true) => Some(
                    crate::recon::coils::whitening_matrix(cov)
                        .map_err(|e| format!("{}: noise pre-whitening: {e}", path.display()))?,
                ),
                _ => None,
            };
            let prep = CoilPrep {
                whitening,
                virtual_coils: plan.virtual_coils,
            };
            let (ns, nco, nf, ny, nx) = folder.dims;
            reconstruct_and_store(
                &m,
                code,
                units,
                store,
                (nco, ns, nf, ny, nx),
                &mut |k| folder.read(k).map_err(|e| e.to_string()),
                &prep,
                progress,
            )
        }
    }
}

#[allow(clippy::too_many_arguments)]
fn reconstruct_and_store(
    m: &Measuring,
    code: &str,
    units: &[&Unit],
    store: &Store,
    dims: (usize, usize, usize, usize, usize),
    source: &mut dyn FnMut(usize) -> Result<ndarray::Array4<num_complex::Complex32>, String>,
    prep: &CoilPrep,
    progress: &dyn Fn(usize, usize),
) -> Result<Vec<Result<(), String>>, String> {
    let requests: Vec<RunRequest> = units
        .iter()
        .filter_map(|u| match &u.work {
            Work::Reconstruct(r) => Some(r.clone()),
            Work::Series(_) => None,
        })
        .collect();
    if requests.len() != units.len() {
        return Err("a series unit among k-space units".into());
    }
    let recs = super::reconstruct_slices(dims, source, &requests, prep, progress)
        .map_err(|e| e.to_string())?;
    Ok(recs
        .into_par_iter()
        .zip(units.par_iter())
        .zip(requests.par_iter())
        .map(|((rec, unit), req)| {
            let (mut row, masks) = m.row(
                code,
                &rec.plan,
                rec.stack.as_ref().map(|s| s.view()).map_err(Clone::clone),
            );
            row.parameters = req.params.iter().map(|(k, v)| (k.to_string(), v)).collect();
            row.acquisition = Some(rec.acquisition.clone());
            let stacks = match (&rec.stack, &masks) {
                (Ok(s), Some(mk)) => Some((s.view(), mk.view(), &m.geom)),
                _ => None,
            };
            store
                .put(&unit.key, &row, stacks)
                .map_err(|e| e.to_string())
        })
        .collect())
}
