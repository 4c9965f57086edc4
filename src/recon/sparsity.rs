//! Shrinkage operators shared by the regularised methods.

use ndarray::{Array3, ArrayViewMut3};
use num_complex::Complex32;

use super::kernels;
use crate::fft::{transpose, Direction, LineFft, TemporalFft};

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

/// x-f shrinkage of one column tile held frame-major (`[frame][value]`, `len` values a
/// frame): transposed so each pixel's time course is contiguous, transformed, thresholded
/// and transformed back, all in the calling thread's cache. Equals [`xf_shrink`] on the
/// tile's values (the orthonormal scaling folded into the threshold and the shrink factor).
pub struct SeriesShrink<'a> {
    lines: &'a LineFft,
    series: Vec<Complex32>,
    scratch: Vec<Complex32>,
}

impl<'a> SeriesShrink<'a> {
    /// Scratch for transforms over `lines.len()` frames.
    pub fn new(lines: &'a LineFft) -> Self {
        SeriesShrink {
            lines,
            series: Vec::new(),
            scratch: Vec::new(),
        }
    }

    /// Applies the proximal operator of `t·‖F_t x‖₁` to `frames` in place.
    ///
    /// # Panics
    /// If `frames` is not a whole number of frames of the planned length.
    pub fn apply(&mut self, frames: &mut [Complex32], t: f32) {
        let nf = self.lines.len();
        assert_eq!(frames.len() % nf, 0, "tile is not a whole number of frames");
        let len = frames.len() / nf;
        self.series.resize(frames.len(), Complex32::default());
        transpose(frames, &mut self.series, nf, len, 1.0);
        self.lines
            .process(&mut self.series, Direction::Forward, &mut self.scratch);
        // Unnormalised spectra are √n times the orthonormal ones, and the two transforms
        // together scale by n.
        let n = nf as f32;
        kernels::soft_scaled(&mut self.series, t * n.sqrt(), 1.0 / n);
        self.lines
            .process(&mut self.series, Direction::Inverse, &mut self.scratch);
        transpose(&self.series, frames, len, nf, 1.0);
    }
}
