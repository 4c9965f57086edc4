//! The multi-coil undersampled Fourier (SENSE encoding) operator and its adjoint.
//!
//! ```text
//! E x   : y[c, f] = M_f ⊙ F( S_c ⊙ x[f] )                 x: [frame, row, col]
//! Eᴴ y  : x[f]    = Σ_c conj(S_c) ⊙ Fᴴ( M_f ⊙ y[c, f] )    y: [coil, frame, ky, kx]
//! ```
//! `F` is the centred orthonormal 2-D FFT and `M_f` keeps the lines acquired in frame `f`.
//! With sensitivities normalised to `Σ_c |S_c|² ≤ 1`, `‖EᴴE‖ ≤ 1`, so gradient methods
//! can take unit steps.

use ndarray::{
    Array2, Array3, Array4, ArrayView3, ArrayView4, ArrayViewMut2, ArrayViewMut3, Axis, CowArray,
    Ix3, Zip,
};
use num_complex::Complex32;
use rayon::prelude::*;

use super::ReconError;
use crate::fft::{CenteredFft2, Direction, FftScratch};

/// Scratch of the operator: one `[coil, frame, ky, kx]` buffer, reused across iterations.
pub struct Workspace {
    coil: Array4<Complex32>,
}

impl Workspace {
    /// Scratch for `coils × frames × rows × cols`.
    pub fn new(coils: usize, frames: usize, rows: usize, cols: usize) -> Self {
        Workspace {
            coil: Array4::zeros((coils, frames, rows, cols)),
        }
    }
}

/// The encoding operator of one slice.
pub struct Encoding<'a> {
    sens: CowArray<'a, Complex32, Ix3>,
    mask: &'a Array2<bool>,
    fft: &'a CenteredFft2,
}

impl<'a> Encoding<'a> {
    /// Builds the operator from sensitivities `[coil, row, col]`, the `[frame, ky]` mask
    /// and a planned FFT.
    ///
    /// # Errors
    /// [`ReconError::Shape`] when sensitivities, mask and FFT disagree.
    pub fn new(
        sens: ArrayView3<'a, Complex32>,
        mask: &'a Array2<bool>,
        fft: &'a CenteredFft2,
    ) -> Result<Self, ReconError> {
        let (_, r, c) = sens.dim();
        if (r, c) != fft.shape() || mask.ncols() != r {
            return Err(ReconError::Shape {
                what: "coil sensitivities",
                expected: format!(
                    "[coil, {}, {}] with a mask of {} lines",
                    fft.shape().0,
                    fft.shape().1,
                    fft.shape().0
                ),
                found: format!("{:?} with a mask of {} lines", sens.dim(), mask.ncols()),
            });
        }
        let sens = if sens.is_standard_layout() {
            CowArray::from(sens)
        } else {
            CowArray::from(sens.as_standard_layout().into_owned())
        };
        Ok(Encoding { sens, mask, fft })
    }

    /// Coils, frames, rows, cols.
    pub fn dims(&self) -> (usize, usize, usize, usize) {
        let (nc, r, c) = self.sens.dim();
        (nc, self.mask.nrows(), r, c)
    }

    /// A workspace of the right size.
    pub fn workspace(&self) -> Workspace {
        let (nc, nf, r, c) = self.dims();
        Workspace::new(nc, nf, r, c)
    }

    /// `Eᴴy` of the measured data, and a workspace for the iterations that follow.
    pub fn data_adjoint(&self, y: ArrayView4<Complex32>) -> (Array3<Complex32>, Workspace) {
        let mut ws = self.workspace();
        let (_, nf, r, c) = self.dims();
        let mut b = Array3::<Complex32>::zeros((nf, r, c));
        self.adjoint(y, b.view_mut(), &mut ws);
        (b, ws)
    }

    /// `y = E x` into the workspace buffer, returned as a view.
    pub fn forward_into<'w>(
        &self,
        x: ArrayView3<Complex32>,
        ws: &'w mut Workspace,
    ) -> ArrayView4<'w, Complex32> {
        self.each_plane(ws, |coil, f, mut plane, scratch| {
            Zip::from(&mut plane)
                .and(self.sens.index_axis(Axis(0), coil))
                .and(x.index_axis(Axis(0), f))
                .for_each(|o, s, v| *o = *s * *v);
            self.fft
                .process(plane.view_mut(), Direction::Forward, scratch);
            self.zero_unacquired(&mut plane, f);
        });
        ws.coil.view()
    }

    /// `y = E x` as a new array.
    pub fn forward(&self, x: ArrayView3<Complex32>, ws: &mut Workspace) -> Array4<Complex32> {
        self.forward_into(x, ws).to_owned()
    }

    /// `x = Eᴴ y`.
    pub fn adjoint(
        &self,
        y: ArrayView4<Complex32>,
        x: ArrayViewMut3<Complex32>,
        ws: &mut Workspace,
    ) {
        ws.coil.assign(&y);
        self.adjoint_in_place(x, ws);
    }

    /// `out = EᴴE x` (the normal operator), without allocating.
    pub fn normal(
        &self,
        x: ArrayView3<Complex32>,
        out: ArrayViewMut3<Complex32>,
        ws: &mut Workspace,
    ) {
        self.forward_into(x, ws);
        self.adjoint_in_place(out, ws);
    }

    /// Runs `op(coil, frame, plane, scratch)` on every coil × frame plane of the workspace,
    /// in parallel, with per-thread FFT scratch.
    fn each_plane(
        &self,
        ws: &mut Workspace,
        op: impl Fn(usize, usize, ArrayViewMut2<Complex32>, &mut FftScratch) + Sync + Send,
    ) {
        let (nc, nf, r, c) = self.dims();
        let mut flat = ws
            .coil
            .view_mut()
            .into_shape_with_order((nc * nf, r, c))
            .expect("standard layout");
        flat.axis_iter_mut(Axis(0))
            .into_par_iter()
            .enumerate()
            .for_each_init(FftScratch::default, |s, (i, plane)| {
                op(i / nf, i % nf, plane, s)
            });
    }

    /// Zeroes the ky lines of `plane` that frame `f` did not acquire (the mask `M_f`).
    fn zero_unacquired(&self, plane: &mut ArrayViewMut2<Complex32>, f: usize) {
        for (ky, mut line) in plane.outer_iter_mut().enumerate() {
            if !self.mask[(f, ky)] {
                line.fill(Complex32::default());
            }
        }
    }

    /// Applies `Eᴴ` to the k-space held in the workspace.
    fn adjoint_in_place(&self, mut x: ArrayViewMut3<Complex32>, ws: &mut Workspace) {
        let (nc, nf, r, c) = self.dims();
        self.each_plane(ws, |_, f, mut plane, scratch| {
            self.zero_unacquired(&mut plane, f);
            self.fft
                .process(plane.view_mut(), Direction::Inverse, scratch);
        });
        let coil = &ws.coil;
        let plane = r * c;
        let sens = self
            .sens
            .as_slice()
            .expect("standard layout by construction");
        let coil = coil.as_slice().expect("workspace is standard layout");
        x.axis_iter_mut(Axis(0))
            .into_par_iter()
            .enumerate()
            .for_each(|(f, mut xf)| {
                // One pass over the pixels, summing the coils in the inner loop.
                let sum = |p: usize| {
                    let mut acc = Complex32::default();
                    for ci in 0..nc {
                        acc += sens[ci * plane + p].conj() * coil[(ci * nf + f) * plane + p];
                    }
                    acc
                };
                match xf.as_slice_mut() {
                    Some(out) => out.iter_mut().enumerate().for_each(|(p, o)| *o = sum(p)),
                    None => xf.iter_mut().enumerate().for_each(|(p, o)| *o = sum(p)),
                }
            });
    }
}

/// `Σ conj(a)·b` in f64 (inner product of two complex arrays of the same shape).
pub fn dot(
    a: impl IntoIterator<Item = Complex32>,
    b: impl IntoIterator<Item = Complex32>,
) -> num_complex::Complex64 {
    a.into_iter()
        .zip(b)
        .map(|(x, y)| {
            let (x, y) = (
                num_complex::Complex64::new(x.re.into(), x.im.into()),
                num_complex::Complex64::new(y.re.into(), y.im.into()),
            );
            x.conj() * y
        })
        .sum()
}

/// `‖a‖²` in f64.
pub fn norm_sqr(a: &Array3<Complex32>) -> f64 {
    a.iter().map(|z| f64::from(z.norm_sqr())).sum()
}

/// Whether an iteration may stop: a positive tolerance and the last residual below it
/// (`tolerance = 0` runs every iteration, for fair timing).
pub fn converged(residuals: &[f64], tolerance: f64) -> bool {
    tolerance > 0.0 && residuals.last().is_some_and(|&v| v < tolerance)
}
