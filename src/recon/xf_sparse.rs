//! `xf-sparse`: compressed sensing with ℓ1 sparsity in the temporal-Fourier (x-f) domain
//! (Lustig et al. 2006), solved by FISTA (Beck & Teboulle 2009).
//!
//! ```text
//! min_x ½‖E x − y‖² + λ‖F_t x‖₁,     λ = lambda × max|F_t Eᴴy|
//! ```
//! Unit step size, since `‖EᴴE‖ ≤ 1` for normalised sensitivities. The recorded residual is
//! the relative change of the iterate.

use ndarray::{Array3, Zip};
use num_complex::Complex32;

use super::operator::{converged, gradient_step, transpose_planes, Encoding};
use super::params::{iterations, tolerance};
use super::sparsity::{xf_peak, xf_shrink};
use super::sums::relative_change;
use super::{coils, ParamSpec, Params, ReconError, ReconInput, ReconOutput, Reconstructor};
use crate::fft::TemporalFft;

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
        let tf = TemporalFft::new(b.dim().0);
        let lambda = p.get("lambda") as f32 * xf_peak(&b, &tf);
        let (iters, tol) = (p.count("iterations"), p.get("tolerance"));
        let mut x = b.clone();
        let mut z = b.clone();
        let mut g = Array3::<Complex32>::zeros(b.dim());
        let mut t = 1.0f64;
        let mut residuals = Vec::new();
        for _ in 0..iters {
            // v = z − (EᴴE z − Eᴴy) per frame as the normal operator finishes it.
            op.normal_lines(z.view(), g.view_mut(), gradient_step(&b));
            xf_shrink(g.view_mut(), lambda, &tf);
            let t_next = 0.5 * (1.0 + (1.0 + 4.0 * t * t).sqrt());
            let momentum = ((t - 1.0) / t_next) as f32;
            residuals.push(relative_change(&g, &x));
            Zip::from(&mut z)
                .and(&g)
                .and(&x)
                .par_for_each(|z, new, old| *z = *new + (*new - *old) * momentum);
            std::mem::swap(&mut x, &mut g);
            t = t_next;
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
