//! Centred, orthonormal 2-D FFT on `[ky, kx]` planes, and batches of planes in parallel.
//!
//! `forward = fftshift ∘ FFT ∘ ifftshift / sqrt(N)`, `inverse` likewise with the inverse
//! FFT, so that `inverse(forward(x)) = x` and Parseval's theorem holds exactly (up to
//! rounding). Odd sizes are handled: `ifftshift` and `fftshift` differ for odd `N`.

use std::sync::Arc;

use ndarray::{Array3, ArrayViewMut1, ArrayViewMut2, ArrayViewMut3, Axis};
use num_complex::Complex32;
use rayon::prelude::*;
use rustfft::{Fft, FftPlanner};

/// Direction of a transform.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Direction {
    /// Image → k-space.
    Forward,
    /// k-space → image.
    Inverse,
}

/// Planned centred 2-D FFT for one `(rows, cols)` size. Cheap to share between threads.
#[derive(Clone)]
pub struct CenteredFft2 {
    rows: usize,
    cols: usize,
    row_fwd: Arc<dyn Fft<f32>>,
    row_inv: Arc<dyn Fft<f32>>,
    col_fwd: Arc<dyn Fft<f32>>,
    col_inv: Arc<dyn Fft<f32>>,
}

/// Per-thread scratch for [`CenteredFft2`]; contents on entry do not matter.
#[derive(Default)]
pub struct FftScratch {
    line: Vec<Complex32>,
    fft: Vec<Complex32>,
}

impl CenteredFft2 {
    /// Plans transforms for planes of `rows × cols` (ky × kx).
    ///
    /// # Panics
    /// If either size is zero.
    pub fn new(rows: usize, cols: usize) -> Self {
        assert!(
            rows > 0 && cols > 0,
            "FFT size must be non-zero, got {rows}×{cols}"
        );
        let mut planner = FftPlanner::<f32>::new();
        CenteredFft2 {
            rows,
            cols,
            row_fwd: planner.plan_fft_forward(cols),
            row_inv: planner.plan_fft_inverse(cols),
            col_fwd: planner.plan_fft_forward(rows),
            col_inv: planner.plan_fft_inverse(rows),
        }
    }

    /// Plane size `(rows, cols)`.
    pub fn shape(&self) -> (usize, usize) {
        (self.rows, self.cols)
    }

    /// Transforms one plane in place.
    ///
    /// # Panics
    /// If the plane is not `rows × cols`.
    pub fn process(&self, mut plane: ArrayViewMut2<Complex32>, dir: Direction, s: &mut FftScratch) {
        assert_eq!(
            plane.dim(),
            (self.rows, self.cols),
            "plane shape {:?} does not match the planned FFT {:?}",
            plane.dim(),
            (self.rows, self.cols)
        );
        let (rf, cf) = match dir {
            Direction::Forward => (&self.row_fwd, &self.col_fwd),
            Direction::Inverse => (&self.row_inv, &self.col_inv),
        };
        for lane in plane.lanes_mut(Axis(1)) {
            shifted_fft(lane, rf.as_ref(), s);
        }
        for lane in plane.lanes_mut(Axis(0)) {
            shifted_fft(lane, cf.as_ref(), s);
        }
    }

    /// Transforms every plane of a `[batch, ky, kx]` array, in parallel over the batch.
    pub fn process_batch(&self, mut data: ArrayViewMut3<Complex32>, dir: Direction) {
        data.axis_iter_mut(Axis(0))
            .into_par_iter()
            .for_each_init(FftScratch::default, |s, plane| self.process(plane, dir, s));
    }

    /// Convenience: transforms a `[batch, ky, kx]` array and returns it.
    pub fn apply(&self, mut data: Array3<Complex32>, dir: Direction) -> Array3<Complex32> {
        self.process_batch(data.view_mut(), dir);
        data
    }
}

/// One centred, orthonormal 1-D transform of a (possibly strided) line, in place.
fn shifted_fft(mut lane: ArrayViewMut1<Complex32>, fft: &dyn Fft<f32>, s: &mut FftScratch) {
    let n = lane.len();
    s.line.clear();
    // ifftshift: buf[i] = x[(i + floor(n/2)) mod n]
    let half_down = n / 2;
    s.line.extend((0..n).map(|i| lane[(i + half_down) % n]));
    let need = fft.get_inplace_scratch_len();
    if s.fft.len() < need {
        s.fft.resize(need, Complex32::default());
    }
    fft.process_with_scratch(&mut s.line, &mut s.fft[..need]);
    // fftshift: y[i] = buf[(i + ceil(n/2)) mod n]
    let half_up = n.div_ceil(2);
    let scale = 1.0 / (n as f32).sqrt();
    for (i, out) in lane.iter_mut().enumerate() {
        *out = s.line[(i + half_up) % n] * scale;
    }
}

/// Orthonormal 1-D FFT along the frame axis of `[frame, row, col]` arrays: the temporal
/// Fourier (x-f) transform. Not shifted: frequency 0 is index 0. Scaled by `1/sqrt(frames)`.
#[derive(Clone)]
pub struct TemporalFft {
    frames: usize,
    fwd: Arc<dyn Fft<f32>>,
    inv: Arc<dyn Fft<f32>>,
}

impl TemporalFft {
    /// Plans transforms over `frames` frames.
    ///
    /// # Panics
    /// If `frames` is zero.
    pub fn new(frames: usize) -> Self {
        assert!(frames > 0, "temporal FFT needs at least one frame");
        let mut planner = FftPlanner::<f32>::new();
        TemporalFft {
            frames,
            fwd: planner.plan_fft_forward(frames),
            inv: planner.plan_fft_inverse(frames),
        }
    }

    /// Transforms every pixel's time course of `[frame, row, col]` data in place.
    ///
    /// # Panics
    /// If the frame axis does not match the planned length.
    pub fn process(&self, mut data: ArrayViewMut3<Complex32>, dir: Direction) {
        assert_eq!(
            data.dim().0,
            self.frames,
            "temporal FFT planned for {} frames, data has {}",
            self.frames,
            data.dim().0
        );
        let fft = match dir {
            Direction::Forward => &self.fwd,
            Direction::Inverse => &self.inv,
        };
        let scale = 1.0 / (self.frames as f32).sqrt();
        data.axis_iter_mut(Axis(1)).into_par_iter().for_each_init(
            FftScratch::default,
            |s, mut rows| {
                for mut lane in rows.lanes_mut(Axis(0)) {
                    s.line.clear();
                    s.line.extend(lane.iter().copied());
                    let need = fft.get_inplace_scratch_len();
                    if s.fft.len() < need {
                        s.fft.resize(need, Complex32::default());
                    }
                    fft.process_with_scratch(&mut s.line, &mut s.fft[..need]);
                    lane.iter_mut()
                        .zip(&s.line)
                        .for_each(|(o, v)| *o = *v * scale);
                }
            },
        );
    }
}
