//! `grappa`: generalized autocalibrating partially parallel acquisitions (Griswold et al.
//! 2002), kernels calibrated on the time-averaged calibration block, applied per frame.
//!
//! For equispaced sampling at integer R, every missing line `ky` lies `d ∈ 1..R` lines after
//! an acquired line. Its value in each coil is a linear combination of the acquired lines
//! `ky − d` and `ky − d + R` over `kernel_width` readout neighbours in all coils:
//! ```text
//! t(ky, kx) = W_d · s(ky, kx),   s = [y_c(ky − d + jR, kx + i)]  for c, j ∈ {0, 1}, |i| ≤ w/2
//! W_d = T Sᴴ (S Sᴴ + λ·tr(S Sᴴ)/n · I)⁻¹            (Tikhonov-regularised least squares)
//! ```
//! fitted on every position of the time-averaged calibration block where all points exist.
//! Acquired lines are kept as measured; coils are combined by root-sum-of-squares.

use nalgebra::DMatrix;
use ndarray::{s, Array3, Array4, ArrayView3, Axis};
use num_complex::{Complex32, Complex64};
use rayon::prelude::*;

use super::coils::{coil_images, rss};
use super::{ParamSpec, Params, ReconError, ReconInput, ReconOutput, Reconstructor};
use crate::sampling::Pattern;

/// GRAPPA.
pub struct Grappa;

static PARAMS: [ParamSpec; 2] = [
    ParamSpec {
        name: "kernel_width",
        default: 5.0,
        min: 1.0,
        max: 15.0,
        help: "readout points per source line (odd)",
    },
    ParamSpec {
        name: "lambda",
        default: 1e-4,
        min: 0.0,
        max: 1.0,
        help: "Tikhonov weight of the kernel fit, relative to the mean source energy",
    },
];

fn c64(z: Complex32) -> Complex64 {
    Complex64::new(z.re.into(), z.im.into())
}

/// Source vector at `(ky_src, kx)` (`ky_src` = first source line) of one frame of `[coil, ky, kx]`
/// data; points outside the matrix are zero.
fn source(
    data: ArrayView3<Complex32>,
    ky_src: isize,
    r: usize,
    kx: usize,
    half: usize,
    out: &mut Vec<Complex64>,
) {
    let (nc, ny, nx) = data.dim();
    out.clear();
    for c in 0..nc {
        for j in 0..2 {
            let ky = ky_src + (j * r) as isize;
            for i in 0..(2 * half + 1) {
                let x = kx as isize + i as isize - half as isize;
                let v = if ky >= 0 && (ky as usize) < ny && x >= 0 && (x as usize) < nx {
                    c64(data[(c, ky as usize, x as usize)])
                } else {
                    Complex64::default()
                };
                out.push(v);
            }
        }
    }
}

impl Reconstructor for Grappa {
    fn id(&self) -> &'static str {
        "grappa"
    }

    fn description(&self) -> &'static str {
        "GRAPPA with kernels calibrated on the time-averaged centre, applied per frame (Griswold 2002)"
    }

    fn params(&self) -> &'static [ParamSpec] {
        &PARAMS
    }

    fn reconstruct(&self, input: &ReconInput, p: &Params) -> Result<ReconOutput, ReconError> {
        let mask = input.mask;
        if mask.pattern != Pattern::Equispaced {
            return Err(ReconError::Sampling {
                method: self.id(),
                why: format!("needs `equispaced` sampling, got `{}`", mask.pattern.id()),
            });
        }
        let r = mask.accel_nominal.round() as usize;
        let (lo, hi) = mask
            .calibration_block()
            .ok_or_else(|| ReconError::Sampling {
                method: self.id(),
                why: "no calibration block".into(),
            })?;
        if hi - lo < r + 2 {
            return Err(ReconError::Sampling {
                method: self.id(),
                why: format!(
                    "{} calibration lines are too few for R = {r} (need at least {})",
                    hi - lo,
                    r + 2
                ),
            });
        }
        let half = (p.count("kernel_width").max(1) - 1) / 2;
        let (nc, nf, ny, nx) = input.kspace.dim();
        let centre = ny / 2;
        // Time-averaged calibration data [coil, ky, kx] (zero outside the block).
        let mut calib = Array3::<Complex32>::zeros((nc, ny, nx));
        for f in 0..nf {
            calib
                .slice_mut(s![.., lo..hi, ..])
                .zip_mut_with(&input.kspace.slice(s![.., f, lo..hi, ..]), |a, b| {
                    *a += *b / nf as f32
                });
        }
        let n_src = nc * 2 * (2 * half + 1);
        let lambda = p.get("lambda");
        // One kernel per offset d = 1..R−1.
        let kernels: Vec<DMatrix<Complex64>> = (1..r)
            .map(|d| {
                let mut sss = DMatrix::<Complex64>::zeros(n_src, n_src);
                let mut tss = DMatrix::<Complex64>::zeros(nc, n_src);
                let mut sv = Vec::with_capacity(n_src);
                for ky in lo..hi {
                    let first = ky as isize - d as isize;
                    if first < lo as isize || first as usize + r >= hi {
                        continue;
                    }
                    for kx in half..nx.saturating_sub(half) {
                        source(calib.view(), first, r, kx, half, &mut sv);
                        for a in 0..n_src {
                            let sa = sv[a];
                            for b in 0..n_src {
                                sss[(a, b)] += sa * sv[b].conj();
                            }
                        }
                        for c in 0..nc {
                            let t = c64(calib[(c, ky, kx)]);
                            for b in 0..n_src {
                                tss[(c, b)] += t * sv[b].conj();
                            }
                        }
                    }
                }
                let reg = lambda * sss.trace().re / n_src as f64;
                for a in 0..n_src {
                    sss[(a, a)] += Complex64::new(reg.max(f64::MIN_POSITIVE), 0.0);
                }
                let inv = sss
                    .clone()
                    .try_inverse()
                    .unwrap_or_else(|| DMatrix::identity(n_src, n_src));
                tss * inv
            })
            .collect();
        // Fill the missing lines of every frame.
        let mut k: Array4<Complex32> = input.kspace.to_owned();
        k.axis_iter_mut(Axis(1))
            .into_par_iter()
            .enumerate()
            .for_each(|(f, mut frame)| {
                let measured = frame.to_owned();
                let mut sv = Vec::with_capacity(n_src);
                for ky in 0..ny {
                    if mask.lines[(f, ky)] {
                        continue;
                    }
                    let d = (ky + r * ny - centre) % r;
                    if d == 0 {
                        continue;
                    }
                    let w = &kernels[d - 1];
                    for kx in 0..nx {
                        source(
                            measured.view(),
                            ky as isize - d as isize,
                            r,
                            kx,
                            half,
                            &mut sv,
                        );
                        for c in 0..nc {
                            let v: Complex64 = (0..n_src).map(|b| w[(c, b)] * sv[b]).sum();
                            frame[(c, ky, kx)] = Complex32::new(v.re as f32, v.im as f32);
                        }
                    }
                }
            });
        let img = coil_images(k.view(), input.fft);
        Ok(ReconOutput {
            images: rss(img.view()),
            iterations: 0,
            residuals: vec![],
        })
    }
}
