//! `low-rank-sparse`: low-rank plus sparse decomposition (Otazo, Candès & Sodickson 2015).
//!
//! The image series `M = L + S`: `L` low rank (singular-value thresholding of the Casorati
//! matrix `[pixel, frame]`), `S` sparse in x-f. Iteration (Otazo 2015, Algorithm 1):
//! ```text
//! L_k = SVT(M_{k−1} − S_{k−1}; λ_L·σ_max),   S_k = Λ_xf(M_{k−1} − L_{k−1}; λ_S·max|F_t Eᴴy|)
//! M_k = L_k + S_k − Eᴴ(E(L_k + S_k) − y)
//! ```
//! The SVT works on the small `frame × frame` Gram matrix: `MᴴM = V Σ² Vᴴ`, then
//! `L = M V diag(max(σ − τ, 0)/σ) Vᴴ` (f64 Hermitian eigen-decomposition by nalgebra).

use nalgebra::{DMatrix, SymmetricEigen};
use ndarray::{Array2, Array3, Axis, Zip};
use num_complex::{Complex32, Complex64};
use rayon::prelude::*;

use super::operator::{converged, gradient_step, transpose_planes, Encoding};
use super::params::{iterations, tolerance};
use super::sparsity::{xf_peak, xf_shrink};
use super::sums::{self, relative_change};
use super::{
    coils, kernels, ParamSpec, Params, ReconError, ReconInput, ReconOutput, Reconstructor,
};
use crate::fft::TemporalFft;

/// Low-rank plus sparse.
pub struct LowRankSparse;

static PARAMS: [ParamSpec; 4] = [
    iterations(40.0),
    tolerance(1e-4),
    ParamSpec {
        name: "lambda_l",
        default: 0.02,
        min: 0.0,
        max: 1.0,
        help: "singular-value threshold relative to the largest singular value",
    },
    ParamSpec {
        name: "lambda_s",
        default: 0.005,
        min: 0.0,
        max: 1.0,
        help: "x-f ℓ1 threshold relative to the largest x-f coefficient of Eᴴy",
    },
];

/// Pixels per block of the SVT's Gram and recombination passes (all frames of a block,
/// 24 × 512 complex values, stay in cache).
const PIXELS: usize = 512;

/// Singular-value thresholding of the Casorati matrix of `x` (`[frame, a, b]`) with
/// threshold `rel × σ_max`, written to `out`.
///
/// Both passes go block by block over the pixels, in parallel: the Gram matrix `MᴴM` as a
/// sum of per-block Gram matrices (added in block order, so the result does not depend on
/// the thread count), and `L = M W` with `W = V diag(max(σ − τ, 0)/σ) Vᴴ`.
pub fn svt(x: &Array3<Complex32>, rel: f64, out: &mut Array3<Complex32>) {
    let (nf, na, nb) = x.dim();
    let n = na * nb;
    let m = x
        .view()
        .into_shape_with_order((nf, n))
        .expect("standard layout");
    let pairs: Vec<(usize, usize)> = (0..nf).flat_map(|i| (i..nf).map(move |j| (i, j))).collect();
    let blocks: Vec<Vec<Complex64>> = m
        .axis_chunks_iter(Axis(1), PIXELS)
        .into_par_iter()
        .map(|blk| {
            pairs
                .iter()
                .map(|&(i, j)| {
                    let (a, b) = (blk.row(i), blk.row(j));
                    sums::dot(
                        a.as_slice().expect("contiguous block row"),
                        b.as_slice().expect("contiguous block row"),
                    )
                })
                .collect()
        })
        .collect();
    let mut gram = DMatrix::<Complex64>::zeros(nf, nf);
    for blk in &blocks {
        for (&(i, j), v) in pairs.iter().zip(blk) {
            gram[(i, j)] += *v;
        }
    }
    for i in 0..nf {
        for j in 0..i {
            gram[(i, j)] = gram[(j, i)].conj();
        }
    }
    let eig = SymmetricEigen::new(gram);
    let sigma: Vec<f64> = eig.eigenvalues.iter().map(|l| l.max(0.0).sqrt()).collect();
    let tau = rel * sigma.iter().cloned().fold(0.0, f64::max);
    // L[f'] = Σ_f W[f, f'] · M[f]  (Casorati columns are frames).
    let v = &eig.eigenvectors;
    let w: Vec<f64> = sigma
        .iter()
        .map(|&s| {
            if s > tau && s > 0.0 {
                (s - tau) / s
            } else {
                0.0
            }
        })
        .collect();
    let wm = Array2::from_shape_fn((nf, nf), |(a, b)| {
        let s: Complex64 = (0..nf).map(|k| v[(a, k)] * w[k] * v[(b, k)].conj()).sum();
        Complex32::new(s.re as f32, s.im as f32)
    });
    let mut o = out
        .view_mut()
        .into_shape_with_order((nf, n))
        .expect("standard layout");
    o.axis_chunks_iter_mut(Axis(1), PIXELS)
        .into_par_iter()
        .zip(m.axis_chunks_iter(Axis(1), PIXELS))
        .for_each(|(mut ob, mb)| {
            for (fo, mut row) in ob.outer_iter_mut().enumerate() {
                let row = row.as_slice_mut().expect("contiguous block row");
                row.fill(Complex32::default());
                for (fi, src) in mb.outer_iter().enumerate() {
                    let c = wm[(fi, fo)];
                    if c != Complex32::default() {
                        kernels::scaled_add(row, c, src.as_slice().expect("contiguous block row"));
                    }
                }
            }
        });
}

impl Reconstructor for LowRankSparse {
    fn id(&self) -> &'static str {
        "low-rank-sparse"
    }

    fn description(&self) -> &'static str {
        "low-rank (Casorati SVT) plus x-f sparse decomposition (Otazo 2015)"
    }

    fn params(&self) -> &'static [ParamSpec] {
        &PARAMS
    }

    fn reconstruct(&self, input: &ReconInput, p: &Params) -> Result<ReconOutput, ReconError> {
        let sens = coils::for_input(input, self.id())?;
        let op = Encoding::new(sens.view(), &input.mask.lines, input.fft)?;
        let b = op.data_adjoint_lines(input.kspace);
        let (nf, nr, nc) = b.dim();
        let tf = TemporalFft::new(nf);
        let lambda_s = p.get("lambda_s") as f32 * xf_peak(&b, &tf);
        let (iters, tol, lambda_l) = (p.count("iterations"), p.get("tolerance"), p.get("lambda_l"));
        let mut m = b.clone();
        let mut l_prev = b.clone();
        let mut l = Array3::<Complex32>::zeros((nf, nr, nc));
        let mut s = Array3::<Complex32>::zeros((nf, nr, nc));
        let mut tmp = Array3::<Complex32>::zeros((nf, nr, nc));
        let mut g = Array3::<Complex32>::zeros((nf, nr, nc));
        let mut residuals = Vec::new();
        for _ in 0..iters {
            // tmp = M − S and S = M − L_prev in one pass.
            Zip::from(&mut tmp)
                .and(&mut s)
                .and(&m)
                .and(&l_prev)
                .par_for_each(|t, s, m, lp| {
                    *t = *m - *s;
                    *s = *m - *lp;
                });
            svt(&tmp, lambda_l, &mut l);
            xf_shrink(s.view_mut(), lambda_s, &tf);
            Zip::from(&mut tmp)
                .and(&l)
                .and(&s)
                .par_for_each(|t, l, s| *t = *l + *s);
            // M_new = (L + S) − (EᴴE(L + S) − Eᴴy); keep the old M in g for the change.
            op.normal_lines(tmp.view(), g.view_mut(), gradient_step(&b));
            residuals.push(relative_change(&g, &m));
            std::mem::swap(&mut m, &mut g);
            std::mem::swap(&mut l_prev, &mut l);
            if converged(&residuals, tol) {
                break;
            }
        }
        Zip::from(&mut tmp)
            .and(&l_prev)
            .and(&s)
            .par_for_each(|t, l, s| *t = *l + *s);
        let tmp = transpose_planes(tmp.view());
        Ok(ReconOutput {
            images: tmp.mapv(|z| z.norm()),
            iterations: residuals.len(),
            residuals,
        })
    }
}
