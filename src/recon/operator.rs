//! The multi-coil undersampled Fourier (SENSE encoding) operator and its adjoint.
//!
//! ```text
//! E x   : y[c, f] = M_f ⊙ F( S_c ⊙ x[f] )                 x: [frame, row, col]
//! Eᴴ y  : x[f]    = Σ_c conj(S_c) ⊙ Fᴴ( M_f ⊙ y[c, f] )    y: [coil, frame, ky, kx]
//! ```
//! `F` is the centred orthonormal 2-D FFT and `M_f` keeps the lines acquired in frame `f`.
//! With sensitivities normalised to `Σ_c |S_c|² ≤ 1`, `‖EᴴE‖ ≤ 1`, so gradient methods
//! can take unit steps.
//!
//! The iterative methods only need the normal operator `EᴴE`, and since the readout (kx) is
//! fully sampled, `Fᴴ M_f F = (F_kyᴴ M_f F_ky) ⊗ I_kx`: the kx transforms cancel. Each column
//! then needs one 1-D FFT along ky and its inverse. The centring shifts cancel too:
//! `F_kyᴴ M F_ky` of the centred FFT equals `Fᴴ M' F` of the plain FFT with the mask moved to
//! raw FFT order (`M'[k] = M[(k + ⌊N/2⌋) mod N]`), because that operator is circulant and
//! commutes with the cyclic `ifftshift`. [`Encoding::normal_lines`] works on images stored
//! readout-major (`[frame, col, row]`, see [`transpose_planes`]) so every ky line is
//! contiguous.

use ndarray::{
    s, Array2, Array3, Array4, ArrayView3, ArrayView4, ArrayViewMut2, ArrayViewMut3, Axis,
    CowArray, Ix3, Zip,
};
use num_complex::Complex32;
use rayon::prelude::*;

use super::{kernels, ReconError};
use crate::fft::{transpose, CenteredFft2, Direction, FftScratch, LineFft};

/// Ky lines per tile of [`Encoding::normal_lines`]: small enough that a tile of every
/// coil's sensitivities stays in a core's cache (8 coils × 8 lines × 256 rows = 128 KiB).
pub const TILE: usize = 8;

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

/// Per-thread scratch of [`Encoding::tile_normal`]; contents on entry do not matter.
#[derive(Default)]
pub struct TileScratch {
    buf: Vec<Complex32>,
    fft: Vec<Complex32>,
}

/// The encoding operator of one slice.
pub struct Encoding<'a> {
    sens: CowArray<'a, Complex32, Ix3>,
    mask: &'a Array2<bool>,
    fft: &'a CenteredFft2,
    /// Sensitivities readout-major, `[coil, col, row]`.
    sens_t: Array3<Complex32>,
    /// `[frame, raw ky]`: `1/rows` where acquired (the FFT pair's scale folded in), else 0;
    /// each weight twice (real and imaginary part), see [`kernels::scale`].
    keep: Array2<f32>,
    /// 1-D FFTs along ky.
    ky: LineFft,
    /// 1-D FFTs along kx (the data adjoint's transforms of acquired lines).
    kx: LineFft,
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
        let (nf, half) = (mask.nrows(), r / 2);
        let keep = Array2::from_shape_fn((nf, 2 * r), |(f, k)| {
            if mask[(f, (k / 2 + half) % r)] {
                1.0 / r as f32
            } else {
                0.0
            }
        });
        let sens_t = sens
            .view()
            .permuted_axes([0, 2, 1])
            .as_standard_layout()
            .into_owned();
        Ok(Encoding {
            sens,
            mask,
            fft,
            sens_t,
            keep,
            ky: LineFft::new(r),
            kx: LineFft::new(c),
        })
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

    /// `Eᴴy` of the measured data, readout-major (`[frame, col, row]`).
    ///
    /// Works frame by frame in cache: per coil, only the acquired ky lines get their kx
    /// transform (the others are zero and stay zero), they land as columns of a
    /// readout-major plane, and the ky transforms run along its contiguous lines. Every
    /// value sees the same operations as the full centred 2-D inverse FFT of the masked
    /// data followed by the coil sum (same bits), without the transforms of empty lines or
    /// a copy of the whole k-space.
    pub fn data_adjoint_lines(&self, y: ArrayView4<Complex32>) -> Array3<Complex32> {
        let (nc, nf, r, c) = self.dims();
        assert_eq!(
            y.dim(),
            (nc, nf, r, c),
            "k-space {:?} does not match the operator",
            y.dim()
        );
        let scale = 1.0 / ((r * c) as f32).sqrt();
        let sens = self.sens_t.as_slice().expect("standard layout");
        let mut b = Array3::<Complex32>::zeros((nf, c, r));
        b.axis_iter_mut(Axis(0))
            .into_par_iter()
            .enumerate()
            .for_each_init(
                || (Vec::new(), Vec::new(), Vec::new()),
                |(rows, plane, scratch), (f, mut bf)| {
                    let acc = bf.as_slice_mut().expect("standard layout");
                    rows.resize(r * c, Complex32::default());
                    plane.resize(r * c, Complex32::default());
                    for (ci, sc) in sens.chunks_exact(r * c).enumerate() {
                        rows.fill(Complex32::default());
                        for (k, row) in rows.chunks_exact_mut(c).enumerate() {
                            if self.mask[(f, k)] {
                                row.iter_mut()
                                    .zip(y.slice(s![ci, f, k, ..]))
                                    .for_each(|(o, v)| *o = *v);
                                self.kx.process_centred(row, Direction::Inverse, scratch);
                            }
                        }
                        transpose(rows, plane, r, c, 1.0);
                        self.ky.process_centred(plane, Direction::Inverse, scratch);
                        plane.iter_mut().for_each(|z| *z *= scale);
                        kernels::conj_mul_add(acc, sc, plane);
                    }
                },
            );
        b
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

    /// `x = Eᴴ y` (`x` as `[frame, row, col]`); lines `y` did not acquire are ignored.
    pub fn adjoint(&self, y: ArrayView4<Complex32>, mut x: ArrayViewMut3<Complex32>) {
        let lines = self.data_adjoint_lines(y);
        x.assign(&lines.view().permuted_axes([0, 2, 1]));
    }

    /// Number of column tiles of [`TILE`] ky lines (the last one may be narrower).
    pub fn tiles(&self) -> usize {
        self.dims().3.div_ceil(TILE)
    }

    /// The values `start..start + len` of a readout-major frame plane that tile `t` covers.
    pub fn tile_span(&self, t: usize) -> (usize, usize) {
        let (_, _, r, c) = self.dims();
        let start = t * TILE;
        (start * r, (c - start).min(TILE) * r)
    }

    /// `out = EᴴE x` on tile `t` of frame `f`: `x` and `out` hold that tile's values of
    /// the readout-major frame plane (see [`tile_span`](Self::tile_span)).
    ///
    /// `EᴴE` acts on each (frame, column) on its own (the sensitivities are pointwise and
    /// the ky transforms run along a column), so a tile is a closed system: a method can
    /// iterate on one tile while it stays in cache.
    ///
    /// # Panics
    /// If `x` or `out` is not the tile's length.
    pub fn tile_normal(
        &self,
        t: usize,
        f: usize,
        x: &[Complex32],
        out: &mut [Complex32],
        s: &mut TileScratch,
    ) {
        let (_, _, r, c) = self.dims();
        let (start, len) = self.tile_span(t);
        assert!(
            x.len() == len && out.len() == len,
            "tile {t} has {len} values, got {} and {}",
            x.len(),
            out.len()
        );
        let sens = self.sens_t.as_slice().expect("standard layout");
        let keep = self.keep.row(f);
        let keep = keep.as_slice().expect("standard layout");
        s.buf.resize(len, Complex32::default());
        for (ci, sc) in sens.chunks_exact(r * c).enumerate() {
            let sc = &sc[start..start + len];
            kernels::mul(&mut s.buf, sc, x);
            self.ky.process(&mut s.buf, Direction::Forward, &mut s.fft);
            for line in s.buf.chunks_exact_mut(r) {
                kernels::scale(line, keep);
            }
            self.ky.process(&mut s.buf, Direction::Inverse, &mut s.fft);
            if ci == 0 {
                kernels::conj_mul(out, sc, &s.buf);
            } else {
                kernels::conj_mul_add(out, sc, &s.buf);
            }
        }
    }

    /// `out = EᴴE x` for readout-major images (`[frame, col, row]`, standard layout).
    ///
    /// The columns are cut into tiles of [`TILE`] ky lines, processed in parallel; each tile
    /// runs through all frames and coils while its slice of the sensitivities stays in
    /// cache. After each (tile, frame) `epilogue(frame, start, out, x)` runs on that piece
    /// of the frame (values `start..start + len` of the frame's plane) while it is hot; the
    /// returned values come back in (tile, frame) order, `tile × frames + frame`.
    ///
    /// # Panics
    /// If `x` or `out` is not a standard-layout `[frame, col, row]` array of this operator.
    pub fn normal_lines<T: Send>(
        &self,
        x: ArrayView3<Complex32>,
        mut out: ArrayViewMut3<Complex32>,
        epilogue: impl Fn(usize, usize, &mut [Complex32], &[Complex32]) -> T + Sync + Send,
    ) -> Vec<T> {
        let (_, nf, r, c) = self.dims();
        assert!(
            x.dim() == (nf, c, r)
                && out.dim() == (nf, c, r)
                && x.is_standard_layout()
                && out.is_standard_layout(),
            "normal_lines expects standard-layout readout-major [{nf}, {c}, {r}] arrays, got {:?} and {:?}",
            x.dim(),
            out.dim()
        );
        let per_tile: Vec<Vec<T>> = out
            .axis_chunks_iter_mut(Axis(1), TILE)
            .into_par_iter()
            .zip(x.axis_chunks_iter(Axis(1), TILE))
            .enumerate()
            .map_init(TileScratch::default, |s, (t, (mut ot, xt))| {
                let (start, _) = self.tile_span(t);
                (0..nf)
                    .map(|f| {
                        let mut of = ot.index_axis_mut(Axis(0), f);
                        let of = of.as_slice_mut().expect("contiguous tile");
                        let xf = xt.index_axis(Axis(0), f);
                        let xf = xf.as_slice().expect("contiguous tile");
                        self.tile_normal(t, f, xf, of, s);
                        epilogue(f, start, of, xf)
                    })
                    .collect()
            })
            .collect();
        per_tile.into_iter().flatten().collect()
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
}

/// The piece `start..start + len` of frame `f` of a standard-layout array (the part an
/// [`Encoding::normal_lines`] epilogue is working on).
pub fn frame_piece(a: &Array3<Complex32>, f: usize, start: usize, len: usize) -> &[Complex32] {
    let plane = a.dim().1 * a.dim().2;
    &a.as_slice().expect("standard layout")[f * plane + start..f * plane + start + len]
}

/// Epilogue of a unit gradient step on `½‖E x − y‖²` given `b = Eᴴy`: turns `EᴴE x` into
/// `x − (EᴴE x − b)`.
pub fn gradient_step(
    b: &Array3<Complex32>,
) -> impl Fn(usize, usize, &mut [Complex32], &[Complex32]) + Sync + Send + '_ {
    move |f, start, g, x| {
        let bf = frame_piece(b, f, start, g.len());
        g.iter_mut()
            .zip(x)
            .zip(bf)
            .for_each(|((g, x), b)| *g = *x - (*g - *b));
    }
}

/// `[frame, a, b] → [frame, b, a]` in standard layout: to and from the readout-major
/// layout of [`Encoding::normal_lines`] (its own inverse).
pub fn transpose_planes(x: ArrayView3<Complex32>) -> Array3<Complex32> {
    x.permuted_axes([0, 2, 1]).as_standard_layout().into_owned()
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

/// Residual below which iterating further cannot change f32 images (machine-precision
/// floor). Past it, CG's recurrences lose orthogonality and values drift into the subnormal
/// range, which is slow (measured: 60 → 200 cg-sense iterations doubled the time per
/// iteration while the residual rose from 1e-17 to 1e-9).
pub const RESIDUAL_FLOOR: f64 = 1e-10;

/// Whether an iteration may stop: the last residual below a positive tolerance, or below
/// [`RESIDUAL_FLOOR`] whatever the tolerance (`tolerance = 0` otherwise runs every
/// iteration, for fair timing).
pub fn converged(residuals: &[f64], tolerance: f64) -> bool {
    residuals
        .last()
        .is_some_and(|&v| v < RESIDUAL_FLOOR || (tolerance > 0.0 && v < tolerance))
}
