//! Coil combination: root-sum-of-squares and sensitivity weighting, and sensitivity
//! estimation from the time-averaged calibration (ACS) block.

use ndarray::{s, Array3, Array4, ArrayView3, ArrayView4, Axis};
use num_complex::Complex32;

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

/// Estimates coil sensitivities `[coil, row, col]` from the calibration block `[lo, hi)` of
/// ky lines, averaged over frames: a Hann-windowed low-resolution coil image divided by
/// the root-sum-of-squares of all coils (the ratio method of Pruessmann et al. 1999).
/// The result satisfies `Σ_c |S_c|² = 1` wherever any coil sees signal.
pub fn estimate_from_calibration(
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
            // Hann window across the calibration block limits ringing of the low-res image.
            let w = 0.5 - 0.5 * (std::f32::consts::TAU * (ky - lo) as f32 / width).cos();
            let w = if hi - lo <= 2 { 1.0 } else { w.max(0.0) };
            let mut line = low.slice_mut(s![c, ky, ..]);
            for f in 0..nf {
                line.zip_mut_with(&kspace.slice(s![c, f, ky, ..]), |a, b| {
                    *a += *b * (w / nf as f32)
                });
            }
        }
    }
    let mut low = fft.apply(low, Direction::Inverse);
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
