//! Shrinkage operators shared by the regularised methods.

use ndarray::Array3;
use num_complex::Complex32;

use super::kernels;
use crate::fft::{transpose, Direction, LineFft, TemporalFft};

/// Largest magnitude of the x-f transform of `x` (sets thresholds relative to the data).
pub fn xf_peak(x: &Array3<Complex32>, tf: &TemporalFft) -> f32 {
    let mut y = x.clone();
    tf.process(y.view_mut(), Direction::Forward);
    y.iter().map(|z| z.norm()).fold(0.0, f32::max)
}

/// x-f shrinkage of one column tile held frame-major (`[frame][value]`, `len` values a
/// frame): transposed so each pixel's time course is contiguous, transformed, thresholded
/// and transformed back, all in the calling thread's cache: the proximal operator of
/// `t·‖F_t x‖₁` for the orthonormal temporal DFT `F_t`, which is `F_tᴴ soft(F_t x, t)`
/// because `F_t` is unitary (the orthonormal scaling is folded into the threshold and the
/// shrink factor).
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

#[cfg(test)]
mod tests {
    use super::*;
    use num_complex::Complex64;

    #[test]
    fn series_shrink_is_the_prox_of_the_orthonormal_dft_l1_norm() {
        // Reference: the definition. prox of t‖F x‖₁ for unitary F is Fᴴ soft(F x, t)
        // (Combettes & Wajs 2005, from memory), with F the orthonormal DFT written out as a
        // sum in f64 here and soft(z, t) = z·max(|z| − t, 0)/|z|. Tolerance 3e-5 absolute on
        // values up to 1.6: f32 FFTs of length 24 (rounding ~ log₂n·ε ≈ 3e-7) with margin.
        let (nf, len) = (24usize, 40usize);
        let frames: Vec<Complex32> = (0..nf * len)
            .map(|i| {
                let (f, p) = ((i / len) as f32, (i % len) as f32);
                Complex32::new(
                    (0.3 * f + 0.11 * p).sin() + 0.2,
                    (0.7 * f * (1.0 + 0.05 * p)).cos(),
                )
            })
            .collect();
        let t = 0.8f32;
        let lines = LineFft::new(nf);
        let mut got = frames.clone();
        SeriesShrink::new(&lines).apply(&mut got, t);
        let n = nf as f64;
        let w = |a: usize, b: usize, sign: f64| {
            let ph = sign * 2.0 * std::f64::consts::PI * (a * b) as f64 / n;
            Complex64::new(ph.cos(), ph.sin()) / n.sqrt()
        };
        let mut shrunk = 0;
        for p in 0..len {
            let x: Vec<Complex64> = (0..nf)
                .map(|f| {
                    let z = frames[f * len + p];
                    Complex64::new(z.re.into(), z.im.into())
                })
                .collect();
            let spec: Vec<Complex64> = (0..nf)
                .map(|k| {
                    let z: Complex64 = (0..nf).map(|f| x[f] * w(k, f, -1.0)).sum();
                    let m = z.norm();
                    if m > f64::from(t) {
                        z * ((m - f64::from(t)) / m)
                    } else {
                        shrunk += 1;
                        Complex64::default()
                    }
                })
                .collect();
            for f in 0..nf {
                let want: Complex64 = (0..nf).map(|k| spec[k] * w(k, f, 1.0)).sum();
                let g = got[f * len + p];
                let err = (Complex64::new(g.re.into(), g.im.into()) - want).norm();
                assert!(err < 3e-5, "pixel {p} frame {f}: {g} vs {want}");
            }
        }
        // The threshold must bite on some coefficients and spare others for the check to
        // mean anything.
        assert!(
            shrunk > 0 && shrunk < nf * len,
            "{shrunk} of {} zeroed",
            nf * len
        );
    }
}
