//! From ISMRMRD acquisitions (one readout line each) to per-slice `[coil, frame, ky, kx]`
//! k-space, independent of how the file is stored.
//!
//! Rules, from the acquisition flags and encoding counters of the ISMRMRD standard:
//! - noise scans (flag 19) are not image data: their samples give the coil noise covariance
//!   `Ψ = N⁻¹ Σ n nᴴ` used for pre-whitening;
//! - calibration-only lines (flag 20 without 21) are skipped (the data is fully sampled, so
//!   the centre is in the imaging lines; flag 21 lines are imaging lines); so are navigator,
//!   phase-correction, feedback, dummy-scan and phase-stabilisation acquisitions;
//! - an imaging line goes to slice `idx.slice`, frame `idx.phase`, row
//!   `kspace_encode_step_1 − center + ky/2` (the header's step-1 centre lands on the centre
//!   row of the centred FFT); lines with several `average`s are averaged; `segment` is
//!   ignored; other `contrast`, `repetition` or `set` values, 3-D encoding, trajectories and
//!   missing lines are refused;
//! - `discard_pre`/`discard_post` samples are dropped, reversed lines (flag 22) flipped, and
//!   readout oversampling (encoded x > recon x) removed by cropping in image space.

use std::collections::BTreeMap;
use std::ops::Range;
use std::path::Path;

use ndarray::{s, Array2, Array3, Array4};
use num_complex::Complex32;
use serde::Deserialize;

use super::header::RawHeader;
use crate::fft::{CenteredFft2, Direction};
use crate::geometry::{Geometry, GeometrySidecar};
use crate::io::IoError;

/// ISMRMRD acquisition flags (bit `n − 1` of `flags`), as numbered by the standard.
pub mod flag {
    /// Noise measurement.
    pub const NOISE: u32 = 19;
    /// Parallel-imaging calibration only.
    pub const CALIBRATION: u32 = 20;
    /// Calibration and imaging.
    pub const CALIBRATION_AND_IMAGING: u32 = 21;
    /// Readout acquired in reverse.
    pub const REVERSE: u32 = 22;
    /// Not image data: navigator, phase correction, HP feedback, dummy scan, RT feedback,
    /// surface-coil correction, phase-stabilisation reference and phase stabilisation.
    pub const NOT_IMAGE: [u32; 8] = [23, 24, 26, 27, 28, 29, 30, 31];
}

/// Duration of one `physiology_time_stamp` tick: 2.5 ms is the convention of the common
/// vendor-to-ISMRMRD converters (from memory); a sidecar's timing overrides it.
pub const TICK_MS: f64 = 2.5;

/// The acquisition-header fields this reader uses (names as in the standard).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct AcqHead {
    /// Flag bits.
    pub flags: u64,
    /// Samples per channel, discarded ones included.
    pub number_of_samples: u16,
    /// Channels in this acquisition.
    pub active_channels: u16,
    /// Samples to drop at the start.
    pub discard_pre: u16,
    /// Samples to drop at the end.
    pub discard_post: u16,
    /// Trajectory values per sample (0 for Cartesian data).
    pub trajectory_dimensions: u16,
    /// Physiology time stamps (the first is time since the cardiac trigger, in ticks).
    pub physiology_time_stamp: [u32; 3],
    /// Slice centre in mm (patient coordinates).
    pub position: [f32; 3],
    /// Slice normal.
    pub slice_dir: [f32; 3],
    /// Encoding counters.
    pub idx: Counters,
}

/// The encoding counters this reader uses.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Counters {
    /// Phase-encode step.
    pub kspace_encode_step_1: u16,
    /// Second phase-encode step (3-D).
    pub kspace_encode_step_2: u16,
    /// Average.
    pub average: u16,
    /// Slice.
    pub slice: u16,
    /// Contrast (echo).
    pub contrast: u16,
    /// Cardiac phase.
    pub phase: u16,
    /// Repetition.
    pub repetition: u16,
    /// Set.
    pub set: u16,
}

impl AcqHead {
    /// Whether flag `n` (1-based, as in the standard) is set.
    pub fn has(&self, n: u32) -> bool {
        self.flags & (1u64 << (n - 1)) != 0
    }
}

/// Where acquisitions come from: an HDF5 file, or memory in tests.
pub trait Acquisitions {
    /// Every acquisition's header, in file order.
    fn heads(&self) -> &[AcqHead];
    /// The samples of acquisitions `range`: per acquisition, interleaved (re, im) values,
    /// channel-major (`[channel][sample]`).
    fn data(&self, range: Range<usize>) -> Result<Vec<Vec<f32>>, String>;
}

/// Optional timing and slice geometry given beside the file (`<name>.geometry.json`), for what
/// the raw data does not record (the R–R interval) or records in units this reader must assume.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Overrides {
    /// Slice thickness in mm (instead of the encoded field of view's z).
    pub slice_thickness_mm: Option<f64>,
    /// Centre-to-centre slice spacing in mm (instead of the acquisition positions).
    pub slice_spacing_mm: Option<f64>,
    /// Trigger time of each frame in ms (instead of the physiology time stamps).
    pub trigger_times_ms: Option<Vec<f64>>,
    /// Constant frame interval in ms (instead of the physiology time stamps).
    pub frame_interval_ms: Option<f64>,
    /// R–R interval in ms.
    pub rr_interval_ms: Option<f64>,
}

/// One imaging line: acquisition index, frame and k-space row.
#[derive(Debug, Clone, Copy)]
struct Line {
    acq: usize,
    frame: usize,
    row: usize,
}

/// A validated ISMRMRD data set: dimensions, geometry and noise known, k-space read slice by
/// slice on demand.
pub struct RawData {
    source: Box<dyn Acquisitions>,
    path: std::path::PathBuf,
    lines: Vec<Vec<Line>>,
    /// `(slices, coils, frames, ky, kx)` after oversampling removal.
    pub dims: (usize, usize, usize, usize, usize),
    encoded_x: usize,
    /// Validated geometry.
    pub geometry: Geometry,
    /// Slice positions along the normal (mm), slice 0 first.
    pub positions_mm: Vec<f64>,
    /// Coil noise covariance from the noise scans, if any.
    pub noise_cov: Option<Array2<Complex32>>,
    /// What the reader assumed or skipped (to print as warnings).
    pub warnings: Vec<String>,
}

fn content(path: &Path, m: impl Into<String>) -> IoError {
    IoError::content(path, m)
}

impl RawData {
    /// Checks the header and every acquisition header, reads the noise scans and works out
    /// where each imaging line goes. `path` names the file in errors.
    ///
    /// # Errors
    /// [`IoError::Content`] naming the header element, acquisition or counter at fault.
    pub fn new(
        path: &Path,
        header: &RawHeader,
        source: Box<dyn Acquisitions>,
        overrides: Option<&Overrides>,
    ) -> Result<Self, IoError> {
        let err = |m: String| content(path, m);
        if header.trajectory != "cartesian" {
            return Err(err(format!(
                "encoding/trajectory is `{}`: only Cartesian k-space can be read",
                header.trajectory
            )));
        }
        if header.encoded_matrix[2] != 1 {
            return Err(err(format!(
                "encoding/encodedSpace/matrixSize/z is {}: only 2-D (multi-slice) encoding can be read",
                header.encoded_matrix[2]
            )));
        }
        let mut warnings = Vec::new();
        if header.encodings > 1 {
            warnings.push(format!(
                "the header has {} encodings; only the first is read",
                header.encodings
            ));
        }
        let [nx, ny, _] = header.encoded_matrix;
        let out_x = if header.recon_matrix[0] < nx {
            header.recon_matrix[0]
        } else {
            nx
        };
        if header.recon_matrix[1] != ny {
            warnings.push(format!(
                "reconSpace y ({}) differs from encodedSpace y ({ny}); the encoded matrix is kept",
                header.recon_matrix[1]
            ));
        }
        let (ns, nf) = (header.slices, header.phases);
        let heads = source.heads();
        let (mut noise, mut skipped) = (Vec::new(), BTreeMap::<&str, usize>::new());
        let mut imaging = Vec::new();
        for (i, h) in heads.iter().enumerate() {
            if h.has(flag::NOISE) {
                noise.push(i);
            } else if h.has(flag::CALIBRATION) && !h.has(flag::CALIBRATION_AND_IMAGING) {
                *skipped.entry("calibration-only").or_default() += 1;
            } else if flag::NOT_IMAGE.iter().any(|&f| h.has(f)) {
                *skipped.entry("non-imaging").or_default() += 1;
            } else {
                imaging.push(i);
            }
        }
        for (what, n) in &skipped {
            warnings.push(format!("{n} {what} acquisitions skipped"));
        }
        let first = *imaging.first().ok_or_else(|| {
            err("no imaging acquisitions (only noise, calibration or navigator data)".into())
        })?;
        let coils = usize::from(heads[first].active_channels);
        if coils == 0 {
            return Err(err(format!("acquisition {first}: active_channels is 0")));
        }
        if let Some(n) = header.receiver_channels.filter(|n| *n != coils) {
            warnings.push(format!(
                "acquisitionSystemInformation/receiverChannels is {n}, the acquisitions hold {coils} channels; the acquisitions are read"
            ));
        }
        crate::limits::check_shape(
            "k-space",
            &[
                ("encodingLimits/slice", ns as u64),
                ("encodingLimits/phase (frames)", nf as u64),
                ("active_channels", coils as u64),
                ("encodedSpace/matrixSize/y", ny as u64),
                ("encodedSpace/matrixSize/x", nx as u64),
            ],
        )
        .map_err(err)?;
        let (min1, _, center) = header.step1;
        let mut count = vec![0u32; ns * nf * ny];
        let mut lines = vec![Vec::new(); ns];
        let mut stamps = vec![(0.0f64, 0usize); nf];
        let mut positions = vec![([0.0f64; 3], 0usize); ns];
        for &i in &imaging {
            let h = &heads[i];
            let at = |m: String| err(format!("acquisition {i}: {m}"));
            if h.trajectory_dimensions != 0 {
                return Err(at(format!(
                    "trajectory_dimensions is {}: only Cartesian data without a trajectory can be read",
                    h.trajectory_dimensions
                )));
            }
            if usize::from(h.active_channels) != coils {
                return Err(at(format!(
                    "active_channels is {}, acquisition {first} has {coils}",
                    h.active_channels
                )));
            }
            let kept = usize::from(h.number_of_samples)
                .checked_sub(usize::from(h.discard_pre) + usize::from(h.discard_post));
            if kept != Some(nx) {
                return Err(at(format!(
                    "number_of_samples {} − discard_pre {} − discard_post {} does not match encodedSpace x = {nx}",
                    h.number_of_samples, h.discard_pre, h.discard_post
                )));
            }
            let c = &h.idx;
            for (name, v) in [
                ("kspace_encode_step_2", c.kspace_encode_step_2),
                ("contrast", c.contrast),
                ("repetition", c.repetition),
                ("set", c.set),
            ] {
                if v != 0 {
                    return Err(at(format!(
                        "counter {name} is {v}: one 2-D contrast, repetition and set can be read"
                    )));
                }
            }
            let (s, f) = (usize::from(c.slice), usize::from(c.phase));
            if s >= ns {
                return Err(at(format!(
                    "counter slice is {s}, the header's encodingLimits allow {ns} slice(s)"
                )));
            }
            if f >= nf {
                return Err(at(format!(
                    "counter phase is {f}, the header's encodingLimits allow {nf} phase(s)"
                )));
            }
            let step = usize::from(c.kspace_encode_step_1);
            let row = (step + ny / 2)
                .checked_sub(center)
                .filter(|r| *r < ny && step >= min1)
                .ok_or_else(|| {
                    at(format!(
                        "counter kspace_encode_step_1 is {step}: outside the {ny} encoded lines around center {center}"
                    ))
                })?;
            count[(s * nf + f) * ny + row] += 1;
            lines[s].push(Line {
                acq: i,
                frame: f,
                row,
            });
            stamps[f].0 += f64::from(h.physiology_time_stamp[0]);
            stamps[f].1 += 1;
            let p = &mut positions[s];
            for (a, v) in p.0.iter_mut().zip(h.position) {
                *a += f64::from(v);
            }
            p.1 += 1;
        }
        for s in 0..ns {
            for f in 0..nf {
                let missing: Vec<usize> = (0..ny)
                    .filter(|&r| count[(s * nf + f) * ny + r] == 0)
                    .collect();
                if !missing.is_empty() {
                    return Err(err(format!(
                        "slice {s}, phase {f}: {} of {ny} phase-encode lines not acquired (k-space rows {}): \
                         cinegauge undersamples fully sampled k-space itself and needs every line",
                        missing.len(),
                        short_list(&missing)
                    )));
                }
            }
        }
        let normal = unit(heads[first].slice_dir);
        let positions_mm: Vec<f64> = positions
            .iter()
            .map(|(sum, n)| {
                let n = *n as f64;
                sum.iter().zip(normal).map(|(a, b)| a / n * b).sum()
            })
            .collect();
        let o = overrides.cloned().unwrap_or_default();
        let origin = path.display().to_string();
        let slice_spacing_mm = match o.slice_spacing_mm {
            Some(v) => v,
            None => {
                spacing_from_positions(&positions_mm, header.encoded_fov_mm[2]).map_err(&err)?
            }
        };
        let (trigger_times_ms, frame_interval_ms) = if o.trigger_times_ms.is_some()
            || o.frame_interval_ms.is_some()
        {
            (o.trigger_times_ms, o.frame_interval_ms)
        } else if nf == 1 {
            (Some(vec![0.0]), None)
        } else if stamps.iter().all(|(sum, _)| *sum == 0.0) {
            return Err(err(
                "no frame timing: physiology_time_stamp[0] is 0 in every imaging acquisition; \
                 give trigger_times_ms or frame_interval_ms in a geometry sidecar beside the file"
                    .into(),
            ));
        } else {
            warnings.push(format!(
                "frame times from physiology_time_stamp[0] assuming {TICK_MS} ms ticks; a geometry sidecar overrides"
            ));
            let t = stamps
                .iter()
                .map(|(sum, n)| sum / *n as f64 * TICK_MS)
                .collect();
            (Some(t), None)
        };
        let sidecar = GeometrySidecar {
            pixel_spacing_mm: vec![
                header.encoded_fov_mm[1] / ny as f64,
                header.encoded_fov_mm[0] / nx as f64,
            ],
            slice_thickness_mm: o.slice_thickness_mm.unwrap_or(header.encoded_fov_mm[2]),
            slice_spacing_mm,
            trigger_times_ms,
            frame_interval_ms,
            rr_interval_ms: o.rr_interval_ms,
            unknown: BTreeMap::new(),
        };
        let geometry =
            Geometry::from_sidecar(&sidecar, nf, &origin).map_err(|e| err(e.to_string()))?;
        let noise_cov = if noise.is_empty() {
            None
        } else {
            Some(
                noise_samples(path, source.as_ref(), &noise, coils)
                    .map(|n| crate::io::kspace::noise_covariance(n.view()))?,
            )
        };
        Ok(RawData {
            source,
            path: path.to_path_buf(),
            lines,
            dims: (ns, coils, nf, ny, out_x),
            encoded_x: nx,
            geometry,
            positions_mm,
            noise_cov,
            warnings,
        })
    }

    /// Reads slice `k` as `[coil, frame, ky, kx]`: lines placed by their counters, averages
    /// averaged, oversampling removed.
    ///
    /// # Errors
    /// [`IoError::Content`] naming the acquisition whose data is short or not finite.
    pub fn read(&self, k: usize) -> Result<Array4<Complex32>, IoError> {
        let (_, nc, nf, ny, out_x) = self.dims;
        let nx = self.encoded_x;
        let mut sum = Array4::<Complex32>::zeros((nc, nf, ny, nx));
        let mut count = Array2::<f32>::zeros((nf, ny));
        let mut lines = self.lines[k].clone();
        lines.sort_by_key(|l| l.acq);
        let heads = self.source.heads();
        for run in runs(&lines) {
            let range = run[0].acq..run[run.len() - 1].acq + 1;
            let data = self
                .source
                .data(range.clone())
                .map_err(|m| content(&self.path, m))?;
            for line in run {
                let h = &heads[line.acq];
                let values = &data[line.acq - range.start];
                let ns = usize::from(h.number_of_samples);
                check_samples(values, nc, ns)
                    .map_err(|m| content(&self.path, format!("acquisition {}: {m}", line.acq)))?;
                let pre = usize::from(h.discard_pre);
                let reverse = h.has(flag::REVERSE);
                for c in 0..nc {
                    let ch = &values[2 * c * ns..2 * (c + 1) * ns];
                    let mut dst = sum.slice_mut(s![c, line.frame, line.row, ..]);
                    for x in 0..nx {
                        let src = if reverse { pre + nx - 1 - x } else { pre + x };
                        dst[x] += Complex32::new(ch[2 * src], ch[2 * src + 1]);
                    }
                }
                count[(line.frame, line.row)] += 1.0;
            }
        }
        for ((_, f, r, _), v) in sum.indexed_iter_mut() {
            *v /= count[(f, r)];
        }
        if out_x == nx {
            return Ok(sum);
        }
        Ok(crop_readout(sum, out_x))
    }
}

/// Removes readout oversampling: centred orthonormal inverse FFT along kx, keep the central
/// `out_x` samples, forward FFT back.
fn crop_readout(k: Array4<Complex32>, out_x: usize) -> Array4<Complex32> {
    let (nc, nf, ny, nx) = k.dim();
    let lines = k
        .into_shape_with_order((nc * nf * ny, 1, nx))
        .expect("standard layout");
    let img = CenteredFft2::new(1, nx).apply(lines, Direction::Inverse);
    let start = nx / 2 - out_x / 2;
    let cropped: Array3<Complex32> = img.slice(s![.., .., start..start + out_x]).to_owned();
    CenteredFft2::new(1, out_x)
        .apply(cropped, Direction::Forward)
        .into_shape_with_order((nc, nf, ny, out_x))
        .expect("standard layout")
}

/// Consecutive runs of acquisition indices (one read each).
fn runs(lines: &[Line]) -> impl Iterator<Item = &[Line]> {
    lines.chunk_by(|a, b| b.acq == a.acq + 1)
}

/// Noise samples of the noise scans, `[coil, sample]`.
fn noise_samples(
    path: &Path,
    source: &dyn Acquisitions,
    noise: &[usize],
    coils: usize,
) -> Result<Array2<Complex32>, IoError> {
    let heads = source.heads();
    let mut columns: Vec<Vec<Complex32>> = vec![Vec::new(); coils];
    for &i in noise {
        let h = &heads[i];
        let at = |m: String| content(path, format!("noise acquisition {i}: {m}"));
        if usize::from(h.active_channels) != coils {
            return Err(at(format!(
                "active_channels is {}, the imaging data has {coils}",
                h.active_channels
            )));
        }
        let values = source
            .data(i..i + 1)
            .map_err(|m| content(path, m))?
            .remove(0);
        let ns = usize::from(h.number_of_samples);
        check_samples(&values, coils, ns).map_err(at)?;
        for (c, col) in columns.iter_mut().enumerate() {
            col.extend(
                values[2 * c * ns..2 * (c + 1) * ns]
                    .chunks_exact(2)
                    .map(|p| Complex32::new(p[0], p[1])),
            );
        }
    }
    let n = columns[0].len();
    if n < 2 {
        return Err(content(
            path,
            "the noise scans hold fewer than 2 samples per coil",
        ));
    }
    Ok(Array2::from_shape_fn((coils, n), |(c, j)| columns[c][j]))
}

/// One acquisition's samples: `2 × channels × samples` finite values.
fn check_samples(values: &[f32], channels: usize, samples: usize) -> Result<(), String> {
    if values.len() != 2 * channels * samples {
        return Err(format!(
            "{} data values, expected 2 × {channels} channels × {samples} samples",
            values.len()
        ));
    }
    match values.iter().find(|v| !v.is_finite()) {
        Some(v) => Err(format!("non-finite sample value {v}")),
        None => Ok(()),
    }
}

/// Centre-to-centre spacing from slice positions along the normal: the mean step, which
/// must be even (within 1 %); one slice has its thickness as spacing.
fn spacing_from_positions(p: &[f64], thickness: f64) -> Result<f64, String> {
    if p.len() < 2 {
        return Ok(thickness);
    }
    let steps: Vec<f64> = p.windows(2).map(|w| w[1] - w[0]).collect();
    let mean = steps.iter().sum::<f64>() / steps.len() as f64;
    if mean.abs() < 1e-3 {
        return Err(
            "the slices' acquisition positions coincide: give slice_spacing_mm in a geometry sidecar beside the file"
                .into(),
        );
    }
    if let Some((k, s)) = steps
        .iter()
        .enumerate()
        .find(|(_, s)| (*s - mean).abs() > 0.01 * mean.abs())
    {
        return Err(format!(
            "uneven slice positions: slices {k} and {} are {:.3} mm apart, the mean step is {:.3} mm",
            k + 1,
            s.abs(),
            mean.abs()
        ));
    }
    Ok(mean.abs())
}

fn unit(v: [f32; 3]) -> [f64; 3] {
    let v = v.map(f64::from);
    let n = v.iter().map(|x| x * x).sum::<f64>().sqrt();
    if n > 0.0 {
        v.map(|x| x / n)
    } else {
        [0.0, 0.0, 1.0]
    }
}

/// `1, 3, 5 … 15` style list of at most 8 numbers.
fn short_list(v: &[usize]) -> String {
    let mut s: Vec<String> = v.iter().take(8).map(|x| x.to_string()).collect();
    if v.len() > 8 {
        s.push("…".into());
    }
    s.join(", ")
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Acquisitions held in memory.
    struct Memory {
        heads: Vec<AcqHead>,
        data: Vec<Vec<f32>>,
    }

    impl Acquisitions for Memory {
        fn heads(&self) -> &[AcqHead] {
            &self.heads
        }
        fn data(&self, range: Range<usize>) -> Result<Vec<Vec<f32>>, String> {
            Ok(self.data[range].to_vec())
        }
    }

    fn header(nx: usize, ny: usize, phases: usize) -> RawHeader {
        RawHeader {
            encoded_matrix: [nx, ny, 1],
            encoded_fov_mm: [2.0 * nx as f64, 2.0 * ny as f64, 8.0],
            recon_matrix: [nx, ny, 1],
            recon_fov_mm: [2.0 * nx as f64, 2.0 * ny as f64, 8.0],
            step1: (0, ny - 1, ny / 2),
            slices: 1,
            phases,
            trajectory: "cartesian".into(),
            receiver_channels: None,
            encodings: 1,
        }
    }

    fn line(frame: u16, step: u16, nx: usize, value: f32) -> (AcqHead, Vec<f32>) {
        let h = AcqHead {
            number_of_samples: nx as u16,
            active_channels: 1,
            physiology_time_stamp: [16 * u32::from(frame), 0, 0],
            idx: Counters {
                kspace_encode_step_1: step,
                phase: frame,
                ..Counters::default()
            },
            ..AcqHead::default()
        };
        let data = (0..nx).flat_map(|x| [value + x as f32, -value]).collect();
        (h, data)
    }

    fn open(h: &RawHeader, acqs: Vec<(AcqHead, Vec<f32>)>) -> Result<RawData, IoError> {
        let (heads, data) = acqs.into_iter().unzip();
        RawData::new(Path::new("t.h5"), h, Box::new(Memory { heads, data }), None)
    }

    /// A line acquired in reverse lands flipped; a reverse-flagged copy averaged with a
    /// forward one gives the forward values (both hold the same samples once flipped).
    #[test]
    fn reverse_lines_are_flipped_and_averages_averaged() {
        let nx = 4;
        let mut acqs: Vec<_> = (0..4)
            .map(|ky| line(0, ky, nx, 10.0 * f32::from(ky)))
            .collect();
        let (mut h, d) = line(0, 1, nx, 10.0);
        h.flags |= 1 << (flag::REVERSE - 1);
        let flipped: Vec<f32> = d.chunks(2).rev().flatten().copied().collect();
        acqs.push((h, flipped));
        let raw = open(&header(nx, 4, 1), acqs).expect("valid");
        let k = raw.read(0).expect("readable");
        assert_eq!(k.dim(), (1, 1, 4, nx));
        for x in 0..nx {
            assert_eq!(k[(0, 0, 1, x)], Complex32::new(10.0 + x as f32, -10.0));
        }
    }

    #[test]
    fn missing_lines_and_bad_counters_are_named() {
        let nx = 4;
        let acqs: Vec<_> = (0..4)
            .filter(|ky| *ky != 2)
            .map(|ky| line(0, ky, nx, 1.0))
            .collect();
        let e = open(&header(nx, 4, 1), acqs)
            .err()
            .expect("refused")
            .to_string();
        assert!(
            e.contains("slice 0, phase 0: 1 of 4") && e.contains("rows 2"),
            "{e}"
        );
        let mut acqs: Vec<_> = (0..4).map(|ky| line(0, ky, nx, 1.0)).collect();
        acqs[3].0.idx.repetition = 1;
        let e = open(&header(nx, 4, 1), acqs)
            .err()
            .expect("refused")
            .to_string();
        assert!(e.contains("acquisition 3: counter repetition is 1"), "{e}");
        let acqs: Vec<_> = (0..4).map(|ky| line(0, ky + 3, nx, 1.0)).collect();
        let e = open(&header(nx, 4, 1), acqs)
            .err()
            .expect("refused")
            .to_string();
        assert!(
            e.contains("acquisition 1: counter kspace_encode_step_1 is 4"),
            "{e}"
        );
    }

    /// Two phases at 16 ticks: 0 and 40 ms with 2.5 ms ticks.
    #[test]
    fn frame_times_come_from_physiology_stamps() {
        let nx = 2;
        let acqs: Vec<_> = (0..2)
            .flat_map(|f| (0..2).map(move |ky| line(f, ky, nx, 1.0)))
            .collect();
        let raw = open(&header(nx, 2, 2), acqs).expect("valid");
        assert_eq!(raw.geometry.trigger_times_ms, vec![0.0, 40.0]);
        assert!(raw.warnings.iter().any(|w| w.contains("2.5 ms ticks")));
    }

    /// Slice positions along an oblique normal: spacing is the projected step.
    #[test]
    fn slice_spacing_is_the_projected_position_step() {
        assert_eq!(spacing_from_positions(&[1.0], 6.0), Ok(6.0));
        let s = spacing_from_positions(&[10.0, 2.0, -6.0], 6.0).expect("even");
        assert!((s - 8.0).abs() < 1e-12);
        let e = spacing_from_positions(&[0.0, 8.0, 18.0], 6.0).unwrap_err();
        assert!(e.contains("slices 0 and 1 are 8.000 mm apart"), "{e}");
        assert!(spacing_from_positions(&[3.0, 3.0], 6.0)
            .unwrap_err()
            .contains("coincide"));
    }
}
