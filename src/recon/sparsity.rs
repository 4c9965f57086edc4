//! Shrinkage operators shared by the regularised methods.

use ndarray::{Array3, ArrayViewMut3};
use num_complex::Complex32;

use crate::fft::{Direction, TemporalFft};

/// Complex soft thresholding: `z·max(|z| − t, 0)/|z|` (the proximal operator of `t·|z|`).
#[inline]
pub fn soft(z: Complex32, t: f32) -> Complex32 {
    // sqrt of the squared norm rather than `norm()` (hypot): the values are far from
    // overflow, and hypot is several times slower.
    let m = z.norm_sqr().sqrt();
    if m <= t {
        Complex32::default()
    } else {
        z * ((m - t) / m)
    }
}

/// Proximal operator of `t·‖F_t x‖₁` for the orthonormal temporal FFT `F_t`: transform,
/// soft-threshold, transform back (exact because `F_t` is unitary), in one pass.
pub fn xf_shrink(x: ArrayViewMut3<Complex32>, t: f32, tf: &TemporalFft) {
    tf.map_spectra(x, |spectra| {
        spectra.iter_mut().for_each(|z| *z = soft(*z, t))
    });
}

/// Largest magnitude of the x-f transform of `x` (sets thresholds relative to the data).
pub fn xf_peak(x: &Array3<Complex32>, tf: &TemporalFft) -> f32 {
    let mut y = x.clone();
    tf.process(y.view_mut(), Direction::Forward);
    y.iter().map(|z| z.norm()).fold(0.0, f32::max)
}
