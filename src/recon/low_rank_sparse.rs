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
use ndarray::{Array2, Array3, Zip};
use num_complex::{Complex32, Complex64};
use rayon::prelude::*;

use super::operator::{converged, Encoding};
use super::params::{iterations, tolerance};
use super::sparsity::{relative_change, xf_peak, xf_shrink};
use super::{coils, ParamSpec, Params, ReconError, ReconInput, ReconOutput, Reconstructor};
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

/// Singular-value thresholding of the Casorati matrix of `x` (`[frame, row, col]`) with
/// threshold `rel × σ_max`, written to `out`.
pub fn svt(x: &Array3<Complex32>, rel: f64, out: &mut Array3<Complex32>) {
    let (nf, nr, nc) = x.dim();
    let n = nr * nc;
    let m = x
        .view()
        .into_shape_with_order((nf, n))
        .expect("standard layout");
    // Gram matrix rows in parallel; each entry accumulates f32 products in chunks of 256
    // pixels and sums the chunks in f64, which keeps f64 accuracy at f32 speed.
    let rows: Vec<Vec<Complex64>> = (0..nf)
        .into_par_iter()
        .map(|i| {
            let a = m.row(i);
            let a = a.as_slice().expect("standard layout");
            (0..nf)
                .map(|j| {
                    if j < i {
                        return Complex64::default();
                    }
                    let b = m.row(j);
                    let b = b.as_slice().expect("standard layout");
                    a.chunks(256)
                        .zip(b.chunks(256))
                        .map(|(ca, cb)| {
                            let s: Complex32 = ca.iter().zip(cb).map(|(x, y)| x.conj() * y).sum();
                            Complex64::new(s.re.into(), s.im.into())
                        })
                        .sum()
                })
                .collect()
        })
        .collect();
    let mut gram = DMatrix::<Complex64>::zeros(nf, nf);
    for i in 0..nf {
        for j in i..nf {
            gram[(i, j)] = rows[i][j];
            gram[(j, i)] = rows[i][j].conj();
        }
    }
    let eig = SymmetricEigen::new(gram);
    let sigma: Vec<f64> = eig.eigenvalues.iter().map(|l| l.max(0.0).sqrt()).collect();
    let tau = rel * sigma.iter().cloned().fold(0.0, f64::max);
    // W = V diag(w) Vᴴ with w = max(σ − τ, 0)/σ, then L = W-combination of frames:
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
    let mut wm = Array2::<Complex32>::zeros((nf, nf));
    for a in 0..nf {
        for b in 0..nf {
            let s: Complex64 = (0..nf).map(|k| v[(a, k)] * w[k] * v[(b, k)].conj()).sum();
            wm[(a, b)] = Complex32::new(s.re as f32, s.im as f32);
        }
    }
    let mut o = out
        .view_mut()
        .into_shape_with_order((nf, n))
        .expect("standard layout");
    o.axis_iter_mut(ndarray::Axis(0))
        .into_par_iter()
        .enumerate()
        .for_each(|(fo, mut row)| {
            row.fill(Complex32::default());
            for fi in 0..nf {
                let c = wm[(fi, fo)];
                if c != Complex32::default() {
                    Zip::from(&mut row)
                        .and(m.row(fi))
                        .for_each(|o, a| *o += *a * c);
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
        let (b, mut ws) = op.data_adjoint(input.kspace);
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
            Zip::from(&mut tmp)
                .and(&m)
                .and(&s)
                .for_each(|t, m, s| *t = *m - *s);
            svt(&tmp, lambda_l, &mut l);
            Zip::from(&mut s)
                .and(&m)
                .and(&l_prev)
                .for_each(|s, m, lp| *s = *m - *lp);
            xf_shrink(s.view_mut(), lambda_s, &tf);
            Zip::from(&mut tmp)
                .and(&l)
                .and(&s)
                .for_each(|t, l, s| *t = *l + *s);
            op.normal(tmp.view(), g.view_mut(), &mut ws);
            // M_new = (L + S) − (EᴴE(L + S) − Eᴴy); keep the old M in g for the change.
            Zip::from(&mut g)
                .and(&tmp)
                .and(&b)
                .for_each(|g, t, b| *g = *t - (*g - *b));
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
            .for_each(|t, l, s| *t = *l + *s);
        Ok(ReconOutput {
            images: tmp.mapv(|z| z.norm()),
            iterations: residuals.len(),
            residuals,
        })
    }
}
