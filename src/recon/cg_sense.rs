//! `cg-sense`: conjugate-gradient SENSE per frame (Pruessmann et al. 2001), with an
//! optional Tikhonov term.
//!
//! Solves `(EᴴE + λ·I) x = Eᴴy`. With the readout fully sampled, `EᴴE` acts on every
//! (frame, column) on its own, so the system splits exactly into independent blocks (a tile
//! of columns of one frame, see [`Encoding::tile_normal`]); each block runs its own
//! conjugate gradients with all its vectors in cache. Each block's iterate is at least as
//! close to the solution (in the block's energy norm) as a CG over the whole frame after
//! the same number of iterations, since the frame's Krylov space restricted to a block lies
//! in the block's own. The relative residual recorded is `‖r‖ / ‖Eᴴy‖` over the image.

use ndarray::{Array3, Axis};
use num_complex::Complex32;
use rayon::prelude::*;

use super::operator::{transpose_planes, Encoding, TileScratch, RESIDUAL_FLOOR};
use super::params::{iterations, tolerance};
use super::sums;
use super::{
    coils, kernels, ParamSpec, Params, ReconError, ReconInput, ReconOutput, Reconstructor,
};

/// Conjugate-gradient SENSE.
pub struct CgSense;

static PARAMS: [ParamSpec; 3] = [
    iterations(30.0),
    tolerance(1e-4),
    ParamSpec {
        name: "lambda",
        default: 0.05,
        min: 0.0,
        max: 10.0,
        help: "Tikhonov weight λ (relative to ‖EᴴE‖ ≤ 1) that tames noise amplification at high R; 0 for plain SENSE",
    },
];

/// `Re⟨a_f, b_f⟩` for every frame, frames in parallel.
fn frame_dots(a: &Array3<Complex32>, b: &Array3<Complex32>) -> Vec<f64> {
    a.axis_iter(Axis(0))
        .into_par_iter()
        .zip(b.axis_iter(Axis(0)))
        .map(|(x, y)| {
            re_dot(
                x.as_slice().expect("standard"),
                y.as_slice().expect("standard"),
            )
        })
        .collect()
}

fn re_dot(a: &[Complex32], b: &[Complex32]) -> f64 {
    sums::dot(a, b).re
}

impl Reconstructor for CgSense {
    fn id(&self) -> &'static str {
        "cg-sense"
    }

    fn description(&self) -> &'static str {
        "conjugate-gradient SENSE per frame with optional Tikhonov term (Pruessmann 2001)"
    }

    fn params(&self) -> &'static [ParamSpec] {
        &PARAMS
    }

    fn reconstruct(&self, input: &ReconInput, p: &Params) -> Result<ReconOutput, ReconError> {
        let sens = coils::for_input(input, self.id())?;
        let op = Encoding::new(sens.view(), &input.mask.lines, input.fft)?;
        let b = op.data_adjoint_lines(input.kspace);
        let settings = Settings {
            iterations: p.count("iterations"),
            tolerance: p.get("tolerance"),
            lambda: p.get("lambda") as f32,
            values: b.len(),
        };
        let nf = b.dim().0;
        let plane = b.dim().1 * b.dim().2;
        let b_sq: f64 = frame_dots(&b, &b).iter().sum();
        let blocks: Vec<(usize, usize)> = (0..op.tiles())
            .flat_map(|t| (0..nf).map(move |f| (t, f)))
            .collect();
        let bs = b.as_slice().expect("standard layout");
        let solved: Vec<Solved> = blocks
            .par_iter()
            .map_init(TileScratch::default, |s, &(t, f)| {
                let (start, len) = op.tile_span(t);
                let rhs = &bs[f * plane + start..f * plane + start + len];
                solve_block(&op, (t, f), rhs, b_sq, &settings, s)
            })
            .collect();
        let mut x = Array3::<Complex32>::zeros(b.dim());
        let xs = x.as_slice_mut().expect("standard layout");
        for (&(t, f), blk) in blocks.iter().zip(&solved) {
            let (start, len) = op.tile_span(t);
            xs[f * plane + start..f * plane + start + len].copy_from_slice(&blk.x);
        }
        let residuals = residual_history(&solved, b_sq);
        let x = transpose_planes(x.view());
        Ok(ReconOutput {
            images: x.mapv(|z| z.norm()),
            iterations: residuals.len(),
            residuals,
        })
    }
}

/// What every block's conjugate gradients are run with.
struct Settings {
    iterations: usize,
    tolerance: f64,
    lambda: f32,
    /// Values of the whole image (every block's length added).
    values: usize,
}

/// One block's solution and its `‖r‖²` after each iteration (the first entry `‖b‖²`).
struct Solved {
    x: Vec<Complex32>,
    rs: Vec<f64>,
}

/// Conjugate gradients on one (tile, frame) block of `(EᴴE + λ) x = Eᴴy`, every vector
/// of the block in cache for all iterations. A block stops when its residual relative to
/// its own right-hand side falls below the tolerance (so the whole image's relative
/// residual does too), or below its share of [`RESIDUAL_FLOOR`] relative to the whole
/// right-hand side (so that the image's residual is below the floor when all have stopped).
fn solve_block(
    op: &Encoding,
    (t, f): (usize, usize),
    rhs: &[Complex32],
    b_sq: f64,
    set: &Settings,
    s: &mut TileScratch,
) -> Solved {
    let n = rhs.len();
    // The block's part of the floor, so that the blocks' squares add up below it.
    let share = n as f64 / set.values as f64;
    let mut x = vec![Complex32::default(); n];
    let mut r = rhs.to_vec();
    let mut d = rhs.to_vec();
    let mut q = vec![Complex32::default(); n];
    let mut rs = re_dot(&r, &r);
    let start = rs;
    let mut history = vec![rs];
    if rs == 0.0 {
        return Solved { x, rs: history };
    }
    for _ in 0..set.iterations {
        op.tile_normal(t, f, &d, &mut q, s);
        if set.lambda > 0.0 {
            kernels::add_scaled_real(&mut q, &d, set.lambda);
        }
        let dq = re_dot(&d, &q);
        let alpha = if dq > 0.0 { (rs / dq) as f32 } else { 0.0 };
        let rs_new = kernels::cg_update(&mut x, &mut r, &d, &q, alpha);
        history.push(rs_new);
        if rs_new < RESIDUAL_FLOOR * RESIDUAL_FLOOR * b_sq * share
            || (set.tolerance > 0.0 && rs_new < set.tolerance * set.tolerance * start)
        {
            break;
        }
        kernels::cg_direction(&mut d, &r, (rs_new / rs) as f32);
        rs = rs_new;
    }
    Solved { x, rs: history }
}

/// `‖r‖ / ‖Eᴴy‖` of the whole image after each iteration, a block that stopped early
/// keeping its last residual.
fn residual_history(solved: &[Solved], b_sq: f64) -> Vec<f64> {
    let n = solved.iter().map(|b| b.rs.len() - 1).max().unwrap_or(0);
    let b_norm = b_sq.sqrt().max(f64::MIN_POSITIVE);
    (1..=n)
        .map(|k| {
            let sum: f64 = solved.iter().map(|b| b.rs[k.min(b.rs.len() - 1)]).sum();
            sum.sqrt() / b_norm
        })
        .collect()
}
