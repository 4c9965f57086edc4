//! `temporal-tv`: total variation along time, solved by a primal–dual method
//! (Chambolle & Pock 2011, in the form with an explicit gradient step on the smooth data
//! term of Condat 2013).
//!
//! ```text
//! min_x ½‖E x − y‖² + λ‖D_t x‖₁,  (D_t x)[f] = x[f+1] − x[f]  (cyclic over the cardiac cycle)
//! x⁺ = x − τ(EᴴE x − Eᴴy + D_tᴴ z),   z⁺ = clip_λ(z + σ D_t(2x⁺ − x))
//! ```
//! with `τ = 1/(L/2 + σ‖D_t‖²)`, `L = 1`, `σ = 1/4`, `‖D_t‖² ≤ 4`, which satisfies
//! Condat's step condition. λ = lambda × max|Eᴴy|.

use ndarray::{Array3, Axis, Zip};
use num_complex::Complex32;

use super::operator::{converged, frame_piece, transpose_planes, Encoding};
use super::params::{iterations, tolerance};
use super::sums::relative_change;
use super::{coils, ParamSpec, Params, ReconError, ReconInput, ReconOutput, Reconstructor};

/// Temporal total variation.
pub struct TemporalTv;

static PARAMS: [ParamSpec; 3] = [
    iterations(60.0),
    tolerance(1e-4),
    ParamSpec {
        name: "lambda",
        default: 0.02,
        min: 0.0,
        max: 1.0,
        help: "TV weight relative to the largest magnitude of Eᴴy",
    },
];

/// `out[f] = x[f+1] − x[f]`, cyclic.
fn diff(x: &Array3<Complex32>, out: &mut Array3<Complex32>) {
    let nf = x.dim().0;
    for f in 0..nf {
        let next = (f + 1) % nf;
        Zip::from(out.index_axis_mut(Axis(0), f))
            .and(x.index_axis(Axis(0), next))
            .and(x.index_axis(Axis(0), f))
            .for_each(|o, a, b| *o = *a - *b);
    }
}

/// `out[f] += z[f−1] − z[f]` (the adjoint of [`diff`]), cyclic.
fn add_diff_adjoint(z: &Array3<Complex32>, out: &mut Array3<Complex32>) {
    let nf = z.dim().0;
    for f in 0..nf {
        let prev = (f + nf - 1) % nf;
        Zip::from(out.index_axis_mut(Axis(0), f))
            .and(z.index_axis(Axis(0), prev))
            .and(z.index_axis(Axis(0), f))
            .for_each(|o, a, b| *o += *a - *b);
    }
}

impl Reconstructor for TemporalTv {
    fn id(&self) -> &'static str {
        "temporal-tv"
    }

    fn description(&self) -> &'static str {
        "total variation along time, primal–dual (Chambolle & Pock 2011; Condat 2013)"
    }

    fn params(&self) -> &'static [ParamSpec] {
        &PARAMS
    }

    fn reconstruct(&self, input: &ReconInput, p: &Params) -> Result<ReconOutput, ReconError> {
        let sens = coils::for_input(input, self.id())?;
        let op = Encoding::new(sens.view(), &input.mask.lines, input.fft)?;
        let b = op.data_adjoint_lines(input.kspace);
        let (nf, nr, nc) = b.dim();
        let lambda = p.get("lambda") as f32 * b.iter().map(|z| z.norm()).fold(0.0, f32::max);
        let (iters, tol) = (p.count("iterations"), p.get("tolerance"));
        let (sigma, tau) = (0.25f32, 1.0f32 / (0.5 + 0.25 * 4.0));
        let mut x = b.clone();
        let mut z = Array3::<Complex32>::zeros((nf, nr, nc));
        let mut g = Array3::<Complex32>::zeros((nf, nr, nc));
        let mut dx = Array3::<Complex32>::zeros((nf, nr, nc));
        let mut ext = Array3::<Complex32>::zeros((nf, nr, nc));
        let mut residuals = Vec::new();
        for _ in 0..iters {
            op.normal_lines(x.view(), g.view_mut(), |f, start, g, _| {
                let bf = frame_piece(&b, f, start, g.len());
                g.iter_mut().zip(bf).for_each(|(g, b)| *g -= *b);
            });
            add_diff_adjoint(&z, &mut g);
            // g ← x⁺ = x − τ·gradient; ext ← 2x⁺ − x; dx ← D_t ext
            Zip::from(&mut g)
                .and(&x)
                .for_each(|g, x| *g = *x - *g * tau);
            Zip::from(&mut ext)
                .and(&g)
                .and(&x)
                .for_each(|e, new, old| *e = *new * 2.0 - *old);
            diff(&ext, &mut dx);
            Zip::from(&mut z).and(&dx).for_each(|z, d| {
                let v = *z + *d * sigma;
                let m = v.norm();
                *z = if m > lambda { v * (lambda / m) } else { v };
            });
            residuals.push(relative_change(&g, &x));
            std::mem::swap(&mut x, &mut g);
            if converged(&residuals, tol) {
                break;
            }
        }
        let x = transpose_planes(x.view());
        Ok(ReconOutput {
            images: x.mapv(|z| z.norm()),
            iterations: residuals.len(),
            residuals,
        })
    }
}
