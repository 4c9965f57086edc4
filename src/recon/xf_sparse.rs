//! `xf-sparse`: compressed sensing with ℓ1 sparsity in the temporal-Fourier (x-f) domain
//! (Lustig et al. 2006), solved by FISTA (Beck & Teboulle 2009).
//!
//! ```text
//! min_x ½‖E x − y‖² + λ‖F_t x‖₁,     λ = lambda × max|F_t Eᴴy|
//! ```
//! Unit step size, since `‖EᴴE‖ ≤ 1` for normalised sensitivities. The recorded residual is
//! the relative change of the iterate. The problem splits exactly into column tiles (all
//! frames of a few columns), which are iterated one at a time in cache.

use ndarray::{Array3, Axis};
use num_complex::Complex32;
use rayon::prelude::*;

use super::operator::{transpose_planes, Encoding, TileScratch, RESIDUAL_FLOOR, TILE};
use super::params::{iterations, tolerance};
use super::sparsity::{xf_peak, SeriesShrink};
use super::{
    coils, kernels, ParamSpec, Params, ReconError, ReconInput, ReconOutput, Reconstructor,
};
use crate::fft::{LineFft, TemporalFft};

/// x-f sparse compressed sensing.
pub struct XfSparse;

static PARAMS: [ParamSpec; 3] = [
    iterations(40.0),
    tolerance(1e-4),
    ParamSpec {
        name: "lambda",
        default: 0.005,
        min: 0.0,
        max: 1.0,
        help: "ℓ1 weight relative to the largest x-f coefficient of Eᴴy",
    },
];

impl Reconstructor for XfSparse {
    fn id(&self) -> &'static str {
        "xf-sparse"
    }

    fn description(&self) -> &'static str {
        "ℓ1 sparsity in x-f with least-squares data consistency, FISTA (Lustig 2006; Beck & Teboulle 2009)"
    }

    fn params(&self) -> &'static [ParamSpec] {
        &PARAMS
    }

    fn reconstruct(&self, input: &ReconInput, p: &Params) -> Result<ReconOutput, ReconError> {
        let sens = coils::for_input(input, self.id())?;
        let op = Encoding::new(sens.view(), &input.mask.lines, input.fft)?;
        let b = op.data_adjoint_lines(input.kspace);
        let nf = b.dim().0;
        let lambda = p.get("lambda") as f32 * xf_peak(&b, &TemporalFft::new(nf));
        let (iters, tol) = (p.count("iterations"), p.get("tolerance"));
        let lines = LineFft::new(nf);
        let mut x = Array3::<Complex32>::zeros(b.dim());
        let changes: Vec<Vec<(f64, f64)>> = x
            .axis_chunks_iter_mut(Axis(1), TILE)
            .into_par_iter()
            .zip(b.axis_chunks_iter(Axis(1), TILE))
            .enumerate()
            .map_init(
                || (TileScratch::default(), SeriesShrink::new(&lines)),
                |(s, shrink), (t, (mut xt, bt))| {
                    // `xt.iter()` runs frame by frame through the tile's values, the order
                    // of a readout-major frame plane.
                    let bl: Vec<Complex32> = bt.iter().copied().collect();
                    let (xl, changes) = fista_tile(&op, t, &bl, lambda, iters, tol, s, shrink);
                    xt.iter_mut().zip(&xl).for_each(|(o, v)| *o = *v);
                    changes
                },
            )
            .collect();
        let residuals = change_history(&changes);
        let x = transpose_planes(x.view());
        Ok(ReconOutput {
            images: x.mapv(|z| z.norm()),
            iterations: residuals.len(),
            residuals,
        })
    }
}

/// FISTA on one column tile (all frames, frame-major): the data term acts per frame and
/// column and the x-f term per pixel, so the tile is a closed problem and the iterates
/// equal those of FISTA on the whole image. Returns the tile's iterate and
/// `(‖x_k − x_{k−1}‖², ‖x_k‖²)` after each iteration; a tile stops when its relative change
/// falls below the tolerance or [`RESIDUAL_FLOOR`] (so the image's does too).
#[allow(clippy::too_many_arguments)]
fn fista_tile(
    op: &Encoding,
    t: usize,
    b: &[Complex32],
    lambda: f32,
    iters: usize,
    tol: f64,
    s: &mut TileScratch,
    shrink: &mut SeriesShrink,
) -> (Vec<Complex32>, Vec<(f64, f64)>) {
    let nf = op.dims().1;
    let len = b.len() / nf;
    let mut x = b.to_vec();
    let mut z = b.to_vec();
    let mut g = vec![Complex32::default(); b.len()];
    let mut step = 1.0f64;
    let mut changes = Vec::new();
    for _ in 0..iters {
        // v = z − (EᴴE z − Eᴴy) frame by frame, then the x-f shrinkage of v.
        for (f, ((gf, zf), bf)) in g
            .chunks_exact_mut(len)
            .zip(z.chunks_exact(len))
            .zip(b.chunks_exact(len))
            .enumerate()
        {
            op.tile_normal(t, f, zf, gf, s);
            kernels::gradient_step(gf, zf, bf);
        }
        shrink.apply(&mut g, lambda);
        let next = 0.5 * (1.0 + (1.0 + 4.0 * step * step).sqrt());
        let m = ((step - 1.0) / next) as f32;
        let (num, den) = kernels::momentum(&g, &x, &mut z, m);
        changes.push((num, den));
        std::mem::swap(&mut x, &mut g);
        step = next;
        let rel = (num / den.max(f64::MIN_POSITIVE)).sqrt();
        if rel < RESIDUAL_FLOOR || (tol > 0.0 && rel < tol) {
            break;
        }
    }
    (x, changes)
}

/// The image's relative change `‖x_k − x_{k−1}‖ / ‖x_k‖` after each iteration from the
/// tiles' parts (in tile order); a tile that stopped adds no change and its last norm.
pub(super) fn change_history(tiles: &[Vec<(f64, f64)>]) -> Vec<f64> {
    let n = tiles.iter().map(Vec::len).max().unwrap_or(0);
    (0..n)
        .map(|k| {
            let (num, den) = tiles.iter().fold((0.0, 0.0), |(n, d), c| match c.get(k) {
                Some(&(cn, cd)) => (n + cn, d + cd),
                None => (n, d + c.last().map_or(0.0, |l| l.1)),
            });
            (num / den.max(f64::MIN_POSITIVE)).sqrt()
        })
        .collect()
}
