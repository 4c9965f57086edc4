//! Shrinkage operators shared by the regularised methods.

use ndarray::{Array3, ArrayViewMut3};
use num_complex::Complex32;

use crate::fft::{Direction, TemporalFft};

/// Complex soft thresholding: `z·max(|z| − t, 0)/|z|` (the proximal operator of `t·|z|`).
#[inline]
pub fn soft(z: Complex32, t: f32) -> Complex32 {
    let m = z.norm();
    if m <= t {
        Complex32::default()
    } else {
        z * ((m - t) / m)
    }
}

/// Proximal operator of `t·‖F_t x‖₁` for the orthonormal temporal FFT `F_t`: transform,
/// soft-threshold, transform back (exact because `F_t` is unitary).
pub fn xf_shrink(mut x: ArrayViewMut3<Complex32>, t: f32, tf: &TemporalFft) {
    tf.process(x.view_mut(), Direction::Forward);
    x.mapv_inplace(|z| soft(z, t));
    tf.process(x.view_mut(), Direction::Inverse);
}

/// Largest magnitude of the x-f transform of `x` (sets thresholds relative to the data).
pub fn xf_peak(x: &Array3<Complex32>, tf: &TemporalFft) -> f32 {
    let mut y = x.clone();
    tf.process(y.view_mut(), Direction::Forward);
    y.iter().map(|z| z.norm()).fold(0.0, f32::max)
}

/// `‖a − b‖ / ‖a‖` in f64 (relative change between iterates).
pub fn relative_change(a: &Array3<Complex32>, b: &Array3<Complex32>) -> f64 {
    let (mut num, mut den) = (0.0f64, 0.0f64);
    for (x, y) in a.iter().zip(b) {
        num += f64::from((*x - *y).norm_sqr());
        den += f64::from(x.norm_sqr());
    }
    (num / den.max(f64::MIN_POSITIVE)).sqrt()
}
