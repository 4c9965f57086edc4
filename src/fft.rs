//! Centred, orthonormal 2-D FFT on `[ky, kx]` planes, and batches of planes in parallel.
//!
//! `forward = fftshift ∘ FFT ∘ ifftshift / sqrt(N)`, `inverse` likewise with the inverse
//! FFT, so that `inverse(forward(x)) = x` and Parseval's theorem holds exactly (up to
//! rounding). Odd sizes are handled: `ifftshift` and `fftshift` differ for odd `N`.

use std::sync::Arc;

use ndarray::{Array3, ArrayViewMut2, ArrayViewMut3, Axis};
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
    plane: Vec<Complex32>,
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
    /// Rows are transformed all at once in a contiguous buffer (rustfft processes a buffer of
    /// several transforms in one call), then the plane is transposed so the columns become
    /// contiguous rows too. The shifts are rotations of each contiguous line.
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
        let (nr, nc) = (self.rows, self.cols);
        let need = rf
            .get_inplace_scratch_len()
            .max(cf.get_inplace_scratch_len());
        if s.fft.len() < need {
            s.fft.resize(need, Complex32::default());
        }
        if s.plane.len() != nr * nc {
            s.plane.resize(nr * nc, Complex32::default());
        }
        let scale = 1.0 / ((nr * nc) as f32).sqrt();
        match plane.as_slice_mut() {
            Some(data) => {
                // Contiguous plane: rows in place, columns in the transposed scratch.
                shifted_lines(data, nc, rf.as_ref(), &mut s.fft[..need]);
                transpose(data, &mut s.plane, nr, nc, 1.0);
                shifted_lines(&mut s.plane, nr, cf.as_ref(), &mut s.fft[..need]);
                transpose(&s.plane, data, nc, nr, scale);
            }
            None => {
                s.line.clear();
                s.line.extend(plane.iter().copied());
                shifted_lines(&mut s.line, nc, rf.as_ref(), &mut s.fft[..need]);
                transpose(&s.line, &mut s.plane, nr, nc, 1.0);
                shifted_lines(&mut s.plane, nr, cf.as_ref(), &mut s.fft[..need]);
                transpose(&s.plane, &mut s.line, nc, nr, scale);
                plane.iter_mut().zip(&s.line).for_each(|(o, v)| *o = *v);
            }
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

/// Centred (unscaled) FFTs of consecutive lines of length `n` in `buf`: each line is
/// rotated by `⌊n/2⌋` (ifftshift), all lines are transformed in one call, then each is
/// rotated by `⌈n/2⌉` (fftshift).
fn shifted_lines(buf: &mut [Complex32], n: usize, fft: &dyn Fft<f32>, scratch: &mut [Complex32]) {
    for line in buf.chunks_exact_mut(n) {
        line.rotate_left(n / 2);
    }
    fft.process_with_scratch(buf, scratch);
    for line in buf.chunks_exact_mut(n) {
        line.rotate_left(n.div_ceil(2));
    }
}

/// `dst[c·rows + r] = scale·src[r·cols + c]` (a `rows × cols` matrix transposed and
/// scaled), in 8 × 8 blocks held in registers.
pub fn transpose(src: &[Complex32], dst: &mut [Complex32], rows: usize, cols: usize, scale: f32) {
    assert!(
        src.len() == rows * cols && dst.len() == rows * cols,
        "transpose of {rows} × {cols} given {} and {} values",
        src.len(),
        dst.len()
    );
    // A factor of one is skipped: `z·1` is `z` bit for bit.
    if scale == 1.0 {
        transpose_blocks(src, dst, rows, cols, |z| z);
    } else {
        transpose_blocks(src, dst, rows, cols, |z| z * scale);
    }
}

#[inline(always)]
fn transpose_blocks(
    src: &[Complex32],
    dst: &mut [Complex32],
    rows: usize,
    cols: usize,
    f: impl Fn(Complex32) -> Complex32,
) {
    const B: usize = 8;
    let (rb, cb) = (rows / B * B, cols / B * B);
    for r0 in (0..rb).step_by(B) {
        for c0 in (0..cb).step_by(B) {
            let mut blk = [[Complex32::default(); B]; B];
            for (i, row) in blk.iter_mut().enumerate() {
                row.copy_from_slice(&src[(r0 + i) * cols + c0..][..B]);
            }
            for j in 0..B {
                let out = &mut dst[(c0 + j) * rows + r0..][..B];
                for (o, row) in out.iter_mut().zip(&blk) {
                    *o = f(row[j]);
                }
            }
        }
        for c in cb..cols {
            for r in r0..r0 + B {
                dst[c * rows + r] = f(src[r * cols + c]);
            }
        }
    }
    for r in rb..rows {
        for c in 0..cols {
            dst[c * rows + r] = f(src[r * cols + c]);
        }
    }
}

/// Unscaled 1-D FFTs of one length over consecutive contiguous lines, one rustfft call per
/// batch (the building block of the readout-separable operator and the temporal FFT).
#[derive(Clone)]
pub struct LineFft {
    n: usize,
    fwd: Arc<dyn Fft<f32>>,
    inv: Arc<dyn Fft<f32>>,
}

impl LineFft {
    /// Plans transforms of length `n`.
    ///
    /// # Panics
    /// If `n` is zero.
    pub fn new(n: usize) -> Self {
        assert!(n > 0, "FFT length must be non-zero");
        let mut planner = FftPlanner::<f32>::new();
        LineFft {
            n,
            fwd: planner.plan_fft_forward(n),
            inv: planner.plan_fft_inverse(n),
        }
    }

    /// Line length.
    pub fn len(&self) -> usize {
        self.n
    }

    /// Always false: a planned length is non-zero.
    pub fn is_empty(&self) -> bool {
        false
    }

    /// Transforms every line of `lines` (length a multiple of [`len`](Self::len)) in
    /// place, unscaled and unshifted.
    ///
    /// # Panics
    /// If the buffer length is not a multiple of the line length.
    pub fn process(&self, lines: &mut [Complex32], dir: Direction, scratch: &mut Vec<Complex32>) {
        assert_eq!(
            lines.len() % self.n,
            0,
            "buffer of {} values is not a whole number of {}-point lines",
            lines.len(),
            self.n
        );
        let fft = match dir {
            Direction::Forward => &self.fwd,
            Direction::Inverse => &self.inv,
        };
        let need = fft.get_inplace_scratch_len();
        if scratch.len() < need {
            scratch.resize(need, Complex32::default());
        }
        fft.process_with_scratch(lines, &mut scratch[..need]);
    }

    /// Like [`process`](Self::process) but centred: each line is rotated by `⌊n/2⌋`
    /// before and by `⌈n/2⌉` after (ifftshift, FFT, fftshift), the line transforms of
    /// [`CenteredFft2`] (unscaled), with the same bits.
    ///
    /// # Panics
    /// If the buffer length is not a multiple of the line length.
    pub fn process_centred(
        &self,
        lines: &mut [Complex32],
        dir: Direction,
        scratch: &mut Vec<Complex32>,
    ) {
        assert_eq!(
            lines.len() % self.n,
            0,
            "buffer of {} values is not a whole number of {}-point lines",
            lines.len(),
            self.n
        );
        let fft = match dir {
            Direction::Forward => &self.fwd,
            Direction::Inverse => &self.inv,
        };
        let need = fft.get_inplace_scratch_len();
        if scratch.len() < need {
            scratch.resize(need, Complex32::default());
        }
        shifted_lines(lines, self.n, fft.as_ref(), &mut scratch[..need]);
    }
}

/// Orthonormal 1-D FFT along the frame axis of `[frame, a, b]` arrays: the temporal
/// Fourier (x-f) transform. Not shifted: frequency 0 is index 0. Scaled by `1/sqrt(frames)`.
///
/// Works block by block: for each index of axis 1 (in parallel) the `[frame, b]` block is
/// gathered into `b` contiguous time series, transformed in one call and scattered back.
#[derive(Clone)]
pub struct TemporalFft {
    lines: LineFft,
}

impl TemporalFft {
    /// Plans transforms over `frames` frames.
    ///
    /// # Panics
    /// If `frames` is zero.
    pub fn new(frames: usize) -> Self {
        assert!(frames > 0, "temporal FFT needs at least one frame");
        TemporalFft {
            lines: LineFft::new(frames),
        }
    }

    /// Transforms every pixel's time course of `[frame, a, b]` data in place.
    ///
    /// # Panics
    /// If the frame axis does not match the planned length.
    pub fn process(&self, data: ArrayViewMut3<Complex32>, dir: Direction) {
        self.blocks(data, |spectra, s| {
            let scale = 1.0 / (self.lines.len() as f32).sqrt();
            self.lines.process(spectra, dir, s);
            spectra.iter_mut().for_each(|z| *z *= scale);
        });
    }

    /// Runs `op` on every `[frame, b]` block gathered as `b` contiguous time series.
    fn blocks(
        &self,
        mut data: ArrayViewMut3<Complex32>,
        op: impl Fn(&mut [Complex32], &mut Vec<Complex32>) + Sync + Send,
    ) {
        let nf = self.lines.len();
        assert_eq!(
            data.dim().0,
            nf,
            "temporal FFT planned for {nf} frames, data has {}",
            data.dim().0
        );
        data.axis_iter_mut(Axis(1)).into_par_iter().for_each_init(
            FftScratch::default,
            |s, mut block| {
                let nb = block.ncols();
                s.line.resize(nf * nb, Complex32::default());
                for (f, row) in block.outer_iter().enumerate() {
                    for (b, v) in row.iter().enumerate() {
                        s.line[b * nf + f] = *v;
                    }
                }
                op(&mut s.line, &mut s.fft);
                for (f, mut row) in block.outer_iter_mut().enumerate() {
                    for (b, v) in row.iter_mut().enumerate() {
                        *v = s.line[b * nf + f];
                    }
                }
            },
        );
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn blocked_transpose_matches_the_definition() {
        // Reference: the definition dst[c·rows + r] = scale·src[r·cols + c], exact (copies and
        // one f32 product each), on shapes with and without whole 8 × 8 blocks.
        for (rows, cols) in [(24usize, 1280usize), (25, 37), (3, 5), (8, 9), (17, 8)] {
            let src: Vec<Complex32> = (0..rows * cols)
                .map(|i| Complex32::new(i as f32, -(i as f32) * 0.5))
                .collect();
            for scale in [1.0f32, 0.25] {
                let mut dst = vec![Complex32::new(f32::NAN, 0.0); rows * cols];
                transpose(&src, &mut dst, rows, cols, scale);
                for r in 0..rows {
                    for c in 0..cols {
                        assert_eq!(
                            dst[c * rows + r],
                            src[r * cols + c] * scale,
                            "{rows} × {cols}, ({r}, {c})"
                        );
                    }
                }
            }
        }
    }
}
