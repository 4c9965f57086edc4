//! Coil combination: root-sum-of-squares and sensitivity weighting, and sensitivity
//! estimation from the time-averaged calibration (ACS) block.

use ndarray::{s, Array3, Array4, ArrayView3, ArrayView4, Axis};
use num_complex::Complex32;
use rayon::prelude::*;

use super::{ReconError, ReconInput};
use crate::fft::{CenteredFft2, Direction};

/// Root-sum-of-squares combination of coil images `[coil, frame, row, col]`:
/// `m = sqrt(Σ_c |I_c|²)` (Roemer et al. 1990).
pub fn rss(coil_images: ArrayView4<Complex32>) -> Array3<f32> {
    coil_images.map_axis(Axis(0), |v| {
        v.iter().map(|z| z.norm_sqr()).sum::<f32>().sqrt()
    })
}

/// Sensitivity-weighted combination `m = Σ_c conj(S_c)·I_c / Σ_c |S_c|²` of coil images
/// `[coil, frame, row, col]` with sensitivities `[coil, row, col]` (Roemer et al. 1990,
/// with identity noise covariance). Pixels where `Σ|S|²` vanishes are 0.
pub fn sensitivity_weighted(
    coil_images: ArrayView4<Complex32>,
    sens: ArrayView3<Complex32>,
) -> Array3<Complex32> {
    let (nc, nf, nr, ncol) = coil_images.dim();
    assert_eq!(
        sens.dim(),
        (nc, nr, ncol),
        "sensitivities {:?} do not match coil images {:?}",
        sens.dim(),
        coil_images.dim()
    );
    let norm = sens.map_axis(Axis(0), |v| v.iter().map(|z| z.norm_sqr()).sum::<f32>());
    Array3::from_shape_fn((nf, nr, ncol), |(f, r, col)| {
        let n = norm[(r, col)];
        if n <= f32::EPSILON {
            return Complex32::default();
        }
        let acc: Complex32 = (0..nc)
            .map(|c| sens[(c, r, col)].conj() * coil_images[(c, f, r, col)])
            .sum();
        acc / n
    })
}

/// Low-resolution coil images `[coil, row, col]` from the calibration block `[lo, hi)` of
/// ky lines, averaged over frames, with a Hann window across the block to limit ringing.
pub fn calibration_images(
    kspace: ArrayView4<Complex32>,
    block: (usize, usize),
    fft: &CenteredFft2,
) -> Array3<Complex32> {
    let (nc, nf, nr, ncol) = kspace.dim();
    let (lo, hi) = block;
    let width = (hi - lo) as f32;
    let mut low = Array3::<Complex32>::zeros((nc, nr, ncol));
    for c in 0..nc {
        for ky in lo..hi {
            let w = if hi - lo <= 2 {
                1.0
            } else {
                (0.5 - 0.5 * (std::f32::consts::TAU * (ky - lo) as f32 / width).cos()).max(0.0)
            };
            let mut line = low.slice_mut(s![c, ky, ..]);
            for f in 0..nf {
                line.zip_mut_with(&kspace.slice(s![c, f, ky, ..]), |a, b| {
                    *a += *b * (w / nf as f32)
                });
            }
        }
    }
    fft.apply(low, Direction::Inverse)
}

/// Estimates coil sensitivities by the ratio method (Pruessmann et al. 1999): each
/// low-resolution coil image divided by the root-sum-of-squares of all coils, so
/// `Σ_c |S_c|² = 1` wherever any coil sees signal.
pub fn estimate_from_calibration(
    kspace: ArrayView4<Complex32>,
    block: (usize, usize),
    fft: &CenteredFft2,
) -> Array3<Complex32> {
    let mut low = calibration_images(kspace, block, fft);
    let norm = low.map_axis(Axis(0), |v| {
        v.iter().map(|z| z.norm_sqr()).sum::<f32>().sqrt()
    });
    let floor = norm.iter().cloned().fold(0.0f32, f32::max) * 1e-6;
    for mut coil in low.outer_iter_mut() {
        coil.zip_mut_with(&norm, |z, n| {
            *z = if *n > floor {
                *z / *n
            } else {
                Complex32::default()
            }
        });
    }
    low
}

/// Adaptive coil sensitivities (Walsh, Gmitro & Marcellin 2000): at each pixel, the
/// dominant eigenvector of the coil correlation matrix summed over a `(2·half+1)²` window of
/// the low-resolution calibration images, phase-referenced to the strongest coil. Pixels
/// whose low-resolution root-sum-of-squares is below `mask_fraction` of its maximum are
/// outside the object and get zero sensitivity. Inside, `Σ_c |S_c|² = 1`.
pub fn estimate_walsh(
    kspace: ArrayView4<Complex32>,
    block: (usize, usize),
    fft: &CenteredFft2,
    half: usize,
    mask_fraction: f32,
) -> Array3<Complex32> {
    let low = calibration_images(kspace, block, fft);
    let (nc, nr, ncol) = low.dim();
    let rss = low.map_axis(Axis(0), |v| {
        v.iter().map(|z| z.norm_sqr()).sum::<f32>().sqrt()
    });
    let peak = rss.iter().cloned().fold(0.0f32, f32::max);
    let energy: Vec<f32> = (0..nc)
        .map(|c| {
            low.index_axis(Axis(0), c)
                .iter()
                .map(|z| z.norm_sqr())
                .sum()
        })
        .collect();
    let reference = (0..nc).fold(0, |b, c| if energy[c] > energy[b] { c } else { b });
    let mut out = Array3::<Complex32>::zeros((nc, nr, ncol));
    let rows: Vec<Vec<Complex32>> = (0..nr)
        .into_par_iter()
        .map(|r| {
            let mut row = vec![Complex32::default(); nc * ncol];
            let mut corr = vec![Complex32::default(); nc * nc];
            let mut v = vec![Complex32::default(); nc];
            let mut w = vec![Complex32::default(); nc];
            for c in 0..ncol {
                if rss[(r, c)] <= mask_fraction * peak {
                    continue;
                }
                corr.iter_mut().for_each(|z| *z = Complex32::default());
                for rr in r.saturating_sub(half)..(r + half + 1).min(nr) {
                    for cc in c.saturating_sub(half)..(c + half + 1).min(ncol) {
                        for i in 0..nc {
                            let a = low[(i, rr, cc)];
                            for j in 0..nc {
                                corr[i * nc + j] += a * low[(j, rr, cc)].conj();
                            }
                        }
                    }
                }
                // Power iteration from the pixel's own coil vector.
                for i in 0..nc {
                    v[i] = low[(i, r, c)];
                }
                for _ in 0..12 {
                    for i in 0..nc {
                        w[i] = (0..nc).map(|j| corr[i * nc + j] * v[j]).sum();
                    }
                    let n = w.iter().map(|z| z.norm_sqr()).sum::<f32>().sqrt();
                    if n <= f32::MIN_POSITIVE {
                        break;
                    }
                    v.iter_mut().zip(&w).for_each(|(a, b)| *a = *b / n);
                }
                let phase = v[reference].conj() / v[reference].norm().max(f32::MIN_POSITIVE);
                for i in 0..nc {
                    row[i * ncol + c] = v[i] * phase;
                }
            }
            row
        })
        .collect();
    for (r, row) in rows.into_iter().enumerate() {
        for i in 0..nc {
            for c in 0..ncol {
                out[(i, r, c)] = row[i * ncol + c];
            }
        }
    }
    out
}

/// Inverse-FFTs every coil and frame of `[coil, frame, ky, kx]` k-space into coil images.
pub fn coil_images(kspace: ArrayView4<Complex32>, fft: &CenteredFft2) -> Array4<Complex32> {
    let mut img = kspace.to_owned();
    let (nc, nf, nr, ncol) = img.dim();
    let flat = img
        .view_mut()
        .into_shape_with_order((nc * nf, nr, ncol))
        .expect("owned array is standard layout");
    fft.process_batch(flat, Direction::Inverse);
    img
}

/// Half-width of the Walsh window (5 × 5 pixels).
pub const WALSH_HALF_WINDOW: usize = 2;
/// Object mask of the Walsh maps: low-resolution RSS above 3 % of its maximum.
pub const WALSH_MASK_FRACTION: f32 = 0.03;

/// The sensitivities a method should use: those given with the input, otherwise Walsh maps
/// from the calibration block.
///
/// # Errors
/// [`ReconError::Sampling`] when no calibration block is acquired in every frame.
pub fn for_input(
    input: &ReconInput,
    method: &'static str,
) -> Result<Array3<Complex32>, ReconError> {
    if let Some(s) = &input.sens {
        return Ok(s.to_owned());
    }
    let block = input.mask.calibration_block().ok_or_else(|| ReconError::Sampling {
        method,
        why: "no fully sampled calibration block around the k-space centre to estimate coil sensitivities"
            .into(),
    })?;
    Ok(estimate_walsh(
        input.kspace,
        block,
        input.fft,
        WALSH_HALF_WINDOW,
        WALSH_MASK_FRACTION,
    ))
}

/// Noise pre-whitening matrix `W = L⁻¹` from a coil noise covariance `Ψ = L Lᴴ` (Cholesky),
/// so that `W y` has identity noise covariance (Roemer et al. 1990; Pruessmann et al. 2001).
///
/// # Errors
/// [`ReconError::Shape`] when `Ψ` is not square, or not Hermitian positive definite.
pub fn whitening_matrix(
    psi: &ndarray::Array2<Complex32>,
) -> Result<ndarray::Array2<Complex32>, ReconError> {
    let (n, m) = psi.dim();
    let bad = |found: String| ReconError::Shape {
        what: "noise covariance",
        expected: "a square, Hermitian, positive definite coil × coil matrix".into(),
        found,
    };
    if n != m || n == 0 {
        return Err(bad(format!("{n} × {m}")));
    }
    let a = nalgebra::DMatrix::<num_complex::Complex64>::from_fn(n, n, |i, j| {
        num_complex::Complex64::new(psi[(i, j)].re.into(), psi[(i, j)].im.into())
    });
    if (0..n).any(|i| {
        (0..n).any(|j| {
            (a[(i, j)] - a[(j, i)].conj()).norm() > 1e-4 * (a[(i, i)].norm() + a[(j, j)].norm())
        })
    }) {
        return Err(bad("a matrix that is not Hermitian".into()));
    }
    // nalgebra's complex Cholesky takes complex square roots, so a negative or non-real
    // diagonal would not fail there: check positivity of the factor's diagonal explicitly.
    let not_pd = || bad("a matrix that is not positive definite".into());
    if (0..n).any(|i| a[(i, i)].re <= 0.0) {
        return Err(not_pd());
    }
    let chol = nalgebra::linalg::Cholesky::new(a).ok_or_else(not_pd)?;
    if (0..n).any(|i| {
        let d = chol.l_dirty()[(i, i)];
        d.re.is_nan() || d.re <= 0.0 || d.im.abs() > 1e-9 * d.re
    }) {
        return Err(not_pd());
    }
    let l_inv = chol
        .l()
        .try_inverse()
        .ok_or_else(|| bad("a singular Cholesky factor".into()))?;
    Ok(ndarray::Array2::from_shape_fn((n, n), |(i, j)| {
        Complex32::new(l_inv[(i, j)].re as f32, l_inv[(i, j)].im as f32)
    }))
}

/// Coil compression to `k` virtual coils by principal components of the calibration data
/// (Buehrer et al. 2007; Huang et al. 2008): rows of the returned `[k, coil]` matrix are the
/// leading eigenvectors (conjugated) of the coil covariance of the calibration block.
/// With `keep_energy` in (0, 1] and `k = 0`, the smallest `k` keeping that energy fraction is used.
pub fn compression_matrix(
    kspace: ArrayView4<Complex32>,
    block: (usize, usize),
    k: usize,
    keep_energy: f64,
) -> ndarray::Array2<Complex32> {
    let (nc, nf, _, nx) = kspace.dim();
    let mut cov = nalgebra::DMatrix::<num_complex::Complex64>::zeros(nc, nc);
    for f in 0..nf {
        for ky in block.0..block.1 {
            for kx in 0..nx {
                for i in 0..nc {
                    let a = kspace[(i, f, ky, kx)];
                    let a = num_complex::Complex64::new(a.re.into(), a.im.into());
                    for j in 0..nc {
                        let b = kspace[(j, f, ky, kx)];
                        cov[(i, j)] +=
                            a * num_complex::Complex64::new(b.re.into(), -f64::from(b.im));
                    }
                }
            }
        }
    }
    let eig = nalgebra::SymmetricEigen::new(cov);
    let mut order: Vec<usize> = (0..nc).collect();
    order.sort_by(|&a, &b| eig.eigenvalues[b].total_cmp(&eig.eigenvalues[a]));
    let total: f64 = eig.eigenvalues.iter().map(|v| v.max(0.0)).sum();
    let k = if k > 0 {
        k.min(nc)
    } else {
        let mut acc = 0.0;
        let mut n = 0;
        for &i in &order {
            acc += eig.eigenvalues[i].max(0.0);
            n += 1;
            if acc >= keep_energy * total {
                break;
            }
        }
        n.max(1)
    };
    ndarray::Array2::from_shape_fn((k, nc), |(v, c)| {
        let z = eig.eigenvectors[(c, order[v])].conj();
        Complex32::new(z.re as f32, z.im as f32)
    })
}

/// Applies a `[out, coil]` coil-mixing matrix (whitening or compression) to `[coil, …]` k-space.
pub fn mix_coils(
    kspace: ArrayView4<Complex32>,
    m: &ndarray::Array2<Complex32>,
) -> Array4<Complex32> {
    let (nc, nf, ny, nx) = kspace.dim();
    let (no, ni) = m.dim();
    assert_eq!(
        ni, nc,
        "coil matrix has {ni} inputs but the k-space has {nc} coils"
    );
    let mut out = Array4::<Complex32>::zeros((no, nf, ny, nx));
    for o in 0..no {
        let mut dst = out.index_axis_mut(Axis(0), o);
        for c in 0..nc {
            let w = m[(o, c)];
            dst.zip_mut_with(&kspace.index_axis(Axis(0), c), |d, s| *d += *s * w);
        }
    }
    out
}
