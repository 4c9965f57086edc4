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
//!
//! Everything but the Gram matrix is pointwise in the pixels or acts per (frame, column),
//! so each iteration is one pass over column tiles held in cache: the tile's `L`, `S` and
//! `M` are updated, and its part of the next Gram matrix (of `M_k − S_k`) is summed while the
//! tile is still hot; only the `frame × frame` eigen-decomposition runs between passes.

use nalgebra::{DMatrix, SymmetricEigen};
use ndarray::{Array2, Array3, ArrayView2, ArrayViewMut2, Axis};
use num_complex::{Complex32, Complex64};
use rayon::prelude::*;

use super::operator::{converged, transpose_planes, Encoding, TileScratch, TILE};
use super::params::{iterations, tolerance};
use super::sparsity::{xf_peak, SeriesShrink};
use super::sums;
use super::{
    coils, kernels, ParamSpec, Params, ReconError, ReconInput, ReconOutput, Reconstructor,
};
use crate::fft::{LineFft, TemporalFft};

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

/// Pixels per block of [`svt`]'s Gram and recombination passes (all frames of a block,
/// 24 × 512 complex values, stay in cache).
const PIXELS: usize = 512;

/// Upper triangle (`i ≤ j`, row by row) of the Gram matrix `CᴴC` of a Casorati block `c`
/// (`[frame, pixel]`, rows contiguous): `Σ_p conj(c[i, p])·c[j, p]`.
fn gram_part(c: ArrayView2<Complex32>) -> Vec<Complex64> {
    let nf = c.nrows();
    let row = |i: usize| c.row(i).to_slice().expect("contiguous Casorati rows");
    (0..nf)
        .flat_map(|i| (i..nf).map(move |j| (i, j)))
        .map(|(i, j)| sums::dot(row(i), row(j)))
        .collect()
}

/// The Hermitian Gram matrix from the blocks' upper triangles, added in the order given (so
/// the result does not depend on the thread count).
fn gram_matrix<'p>(
    nf: usize,
    parts: impl IntoIterator<Item = &'p [Complex64]>,
) -> DMatrix<Complex64> {
    let mut gram = DMatrix::<Complex64>::zeros(nf, nf);
    for part in parts {
        let pairs = (0..nf).flat_map(|i| (i..nf).map(move |j| (i, j)));
        for ((i, j), v) in pairs.zip(part) {
            gram[(i, j)] += *v;
        }
    }
    for i in 0..nf {
        for j in 0..i {
            gram[(i, j)] = gram[(j, i)].conj();
        }
    }
    gram
}

/// The SVT's recombination weights from the Gram matrix `CᴴC = V Σ² Vᴴ`:
/// `W = V diag(max(σ − τ, 0)/σ) Vᴴ` with `τ = rel × σ_max`, so that `SVT(C) = C W`.
fn threshold_weights(gram: DMatrix<Complex64>, rel: f64) -> Array2<Complex32> {
    let nf = gram.nrows();
    let eig = SymmetricEigen::new(gram);
    let sigma: Vec<f64> = eig.eigenvalues.iter().map(|l| l.max(0.0).sqrt()).collect();
    let tau = rel * sigma.iter().cloned().fold(0.0, f64::max);
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
    Array2::from_shape_fn((nf, nf), |(a, b)| {
        let s: Complex64 = (0..nf).map(|k| v[(a, k)] * w[k] * v[(b, k)].conj()).sum();
        Complex32::new(s.re as f32, s.im as f32)
    })
}

/// `out = c W` for a Casorati block (`[frame, pixel]`): `out[f'] = Σ_f W[f, f']·c[f]`
/// ([`kernels::combine`], with `block` its scratch; blocks that are not contiguous are copied
/// first).
fn recombine(
    c: ArrayView2<Complex32>,
    w: &Array2<Complex32>,
    mut out: ArrayViewMut2<Complex32>,
    block: &mut Vec<Complex32>,
) {
    let nf = c.nrows();
    let w = w.as_slice().expect("standard layout");
    let c = c.as_standard_layout();
    let c = c.as_slice().expect("standard layout");
    match out.as_slice_mut() {
        Some(o) => kernels::combine(o, c, w, nf, block),
        None => {
            let mut o = vec![Complex32::default(); c.len()];
            kernels::combine(&mut o, c, w, nf, block);
            out.iter_mut().zip(o).for_each(|(d, v)| *d = v);
        }
    }
}

/// Singular-value thresholding of the Casorati matrix of `x` (`[frame, a, b]`) with
/// threshold `rel × σ_max`, written to `out`.
///
/// Both passes go block by block over the pixels, in parallel: the Gram matrix `MᴴM` as a
/// sum of per-block Gram matrices (added in block order), and `L = M W`. The iteration
/// below runs the same pieces per column tile.
pub fn svt(x: &Array3<Complex32>, rel: f64, out: &mut Array3<Complex32>) {
    let (nf, na, nb) = x.dim();
    let n = na * nb;
    let m = x
        .view()
        .into_shape_with_order((nf, n))
        .expect("standard layout");
    let parts: Vec<Vec<Complex64>> = m
        .axis_chunks_iter(Axis(1), PIXELS)
        .into_par_iter()
        .map(gram_part)
        .collect();
    let w = threshold_weights(gram_matrix(nf, parts.iter().map(Vec::as_slice)), rel);
    let mut o = out
        .view_mut()
        .into_shape_with_order((nf, n))
        .expect("standard layout");
    o.axis_chunks_iter_mut(Axis(1), PIXELS)
        .into_par_iter()
        .zip(m.axis_chunks_iter(Axis(1), PIXELS))
        .for_each_init(Vec::new, |block, (ob, mb)| recombine(mb, &w, ob, block));
}

/// One column tile of the iteration (all frames, frame-major `[frame][value]`, the values
/// [`Encoding::tile_span`] names in each readout-major frame plane).
struct Tile {
    /// `Eᴴy`.
    b: Vec<Complex32>,
    m: Vec<Complex32>,
    s: Vec<Complex32>,
    l: Vec<Complex32>,
    /// `M − S`, the SVT's input (then scratch for `L + S` within a step).
    t: Vec<Complex32>,
}

/// Per-thread scratch of [`Tile::step`].
struct Scratch<'a> {
    op: TileScratch,
    shrink: SeriesShrink<'a>,
    g: Vec<Complex32>,
    /// Scratch of [`kernels::combine`].
    block: Vec<Complex32>,
}

/// What one tile contributes to the image-wide quantities of an iteration.
struct Part {
    /// `(‖M_k − M_{k−1}‖², ‖M_k‖²)` on the tile.
    change: (f64, f64),
    /// Upper triangle of the Gram matrix of `M_k − S_k` on the tile (the next SVT's).
    gram: Vec<Complex64>,
}

impl Tile {
    /// One iteration on the tile, given the SVT weights `w` of the image-wide Gram matrix of
    /// `M_{k−1} − S_{k−1}`: `L_k`, `S_k` and `M_k` are pointwise in the pixels apart from
    /// the data term, which acts per (frame, column), so the whole step runs in cache.
    fn step(
        &mut self,
        op: &Encoding,
        t: usize,
        w: &Array2<Complex32>,
        lambda_s: f32,
        sc: &mut Scratch,
    ) -> Part {
        let nf = w.nrows();
        let len = self.b.len() / nf;
        // S_k = Λ(M − L) and L_k = T W, both from the previous iterate (T = M − S).
        difference(&self.m, &self.l, &mut self.s);
        sc.shrink.apply(&mut self.s, lambda_s);
        let l = ArrayViewMut2::from_shape((nf, len), &mut self.l[..]).expect("tile shape");
        recombine(casorati(&self.t, nf), w, l, &mut sc.block);
        // M_k = X − (EᴴE X − Eᴴy) with X = L_k + S_k (held in `t`), frame by frame.
        self.t
            .iter_mut()
            .zip(&self.l)
            .zip(&self.s)
            .for_each(|((x, l), s)| *x = *l + *s);
        sc.g.resize(self.b.len(), Complex32::default());
        for (f, ((gf, xf), bf)) in
            sc.g.chunks_exact_mut(len)
                .zip(self.t.chunks_exact(len))
                .zip(self.b.chunks_exact(len))
                .enumerate()
        {
            op.tile_normal(t, f, xf, gf, &mut sc.op);
            kernels::gradient_step(gf, xf, bf);
        }
        let change = sums::change(&sc.g, &self.m);
        std::mem::swap(&mut self.m, &mut sc.g);
        difference(&self.m, &self.s, &mut self.t);
        Part {
            change,
            gram: gram_part(casorati(&self.t, nf)),
        }
    }
}

/// A tile's values as its Casorati block `[frame, pixel]`.
fn casorati(v: &[Complex32], nf: usize) -> ArrayView2<'_, Complex32> {
    ArrayView2::from_shape((nf, v.len() / nf), v).expect("whole frames")
}

/// `out = a − b`.
fn difference(a: &[Complex32], b: &[Complex32], out: &mut Vec<Complex32>) {
    out.clear();
    out.extend(a.iter().zip(b).map(|(a, b)| *a - *b));
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
        let nf = b.dim().0;
        let lambda_s = p.get("lambda_s") as f32 * xf_peak(&b, &TemporalFft::new(nf));
        let (iters, tol, lambda_l) = (p.count("iterations"), p.get("tolerance"), p.get("lambda_l"));
        let lines = LineFft::new(nf);
        // M_0 = L_0 = Eᴴy, S_0 = 0 (so the first T = M − S is Eᴴy).
        let mut tiles: Vec<Tile> = b
            .axis_chunks_iter(Axis(1), TILE)
            .map(|bt| {
                // `bt.iter()` runs frame by frame through the tile's values.
                let b: Vec<Complex32> = bt.iter().copied().collect();
                Tile {
                    m: b.clone(),
                    l: b.clone(),
                    t: b.clone(),
                    s: vec![Complex32::default(); b.len()],
                    b,
                }
            })
            .collect();
        let mut grams: Vec<Vec<Complex64>> = tiles
            .par_iter()
            .map(|t| {
                gram_part(
                    ArrayView2::from_shape((nf, t.b.len() / nf), &t.b[..]).expect("tile shape"),
                )
            })
            .collect();
        let mut residuals = Vec::new();
        for _ in 0..iters {
            let w = threshold_weights(gram_matrix(nf, grams.iter().map(Vec::as_slice)), lambda_l);
            let parts: Vec<Part> = tiles
                .par_iter_mut()
                .enumerate()
                .map_init(
                    || Scratch {
                        op: TileScratch::default(),
                        shrink: SeriesShrink::new(&lines),
                        g: Vec::new(),
                        block: Vec::new(),
                    },
                    |sc, (t, tile)| tile.step(&op, t, &w, lambda_s, sc),
                )
                .collect();
            let (num, den) = parts
                .iter()
                .fold((0.0, 0.0), |(n, d), p| (n + p.change.0, d + p.change.1));
            residuals.push((num / den.max(f64::MIN_POSITIVE)).sqrt());
            grams = parts.into_iter().map(|p| p.gram).collect();
            if converged(&residuals, tol) {
                break;
            }
        }
        // The image L + S, back in the readout-major layout and then row-major.
        let mut x = Array3::<Complex32>::zeros(b.dim());
        x.axis_chunks_iter_mut(Axis(1), TILE)
            .zip(&tiles)
            .for_each(|(mut xt, tile)| {
                xt.iter_mut()
                    .zip(tile.l.iter().zip(&tile.s))
                    .for_each(|(o, (l, s))| *o = *l + *s);
            });
        let x = transpose_planes(x.view());
        Ok(ReconOutput {
            images: x.mapv(|z| z.norm()),
            iterations: residuals.len(),
            residuals,
        })
    }
}
