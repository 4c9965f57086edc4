//! Reconstruction methods against analytic and published references: the adjoint test of
//! the encoding operator, Shepp–Logan by CG-SENSE, the SENSE g-factor, and each iterative
//! method against zero-filling on the beating phantom.

use crate::common;

use cinegauge::demo;
use cinegauge::fft::{CenteredFft2, Direction, TemporalFft};
use cinegauge::phantom::{coils::sensitivities, Phantom, PhantomSpec};
use cinegauge::recon::operator::{dot, transpose_planes, Encoding};
use cinegauge::recon::{self, Params, ReconError, ReconInput};
use cinegauge::sampling::{Pattern, SamplingMask, SamplingSpec};
use ndarray::{Array3, Array4, Axis};
use num_complex::Complex32;

fn crand(r: &mut rand::rngs::Xoshiro256PlusPlus) -> Complex32 {
    Complex32::new(
        common::uniform(r, -1.0, 1.0) as f32,
        common::uniform(r, -1.0, 1.0) as f32,
    )
}

/// Smooth analytic coil maps on an `n_rows × n_cols` grid: Gaussian fall-off from coils on
/// a circle, linear phase, normalised to `Σ|S|² = 1`.
fn analytic_maps(coils: usize, rows: usize, cols: usize) -> Array3<Complex32> {
    let mut s = Array3::from_shape_fn((coils, rows, cols), |(c, r, k)| {
        let th = std::f64::consts::TAU * c as f64 / coils as f64;
        let (x, y) = (k as f64 / cols as f64 - 0.5, r as f64 / rows as f64 - 0.5);
        let d2 = (x - 0.7 * th.cos()).powi(2) + (y - 0.7 * th.sin()).powi(2);
        Complex32::from_polar(
            (-d2 / 0.3).exp() as f32,
            (th + 2.0 * (x * th.cos() + y * th.sin())) as f32,
        )
    });
    let norm = s.map_axis(Axis(0), |v| {
        v.iter().map(|z| z.norm_sqr()).sum::<f32>().sqrt()
    });
    for mut coil in s.outer_iter_mut() {
        coil.zip_mut_with(&norm, |z, n| *z /= *n);
    }
    s
}

#[test]
fn encoding_operator_passes_the_dot_product_test() {
    // Adjoint test (Claerbout's dot-product test): ⟨E x, y⟩ = ⟨x, Eᴴ y⟩ for random x, y.
    let mut r = common::rng(11);
    for &(nf, rows, cols, nc) in &[
        (3usize, 17usize, 12usize, 4usize),
        (5, 16, 16, 3),
        (2, 9, 21, 2),
    ] {
        let sens = Array3::from_shape_fn((nc, rows, cols), |_| crand(&mut r));
        let spec = SamplingSpec::new(Pattern::VariableDensity, 3.0, 2)
            .unwrap()
            .with_rng_seed(5);
        let mask = spec.mask(nf, rows).unwrap();
        let fft = CenteredFft2::new(rows, cols);
        let op = Encoding::new(sens.view(), &mask.lines, &fft).unwrap();
        let mut ws = op.workspace();
        let x = Array3::from_shape_fn((nf, rows, cols), |_| crand(&mut r));
        let y = Array4::from_shape_fn((nc, nf, rows, cols), |_| crand(&mut r));
        let ex = op.forward(x.view(), &mut ws);
        let mut ehy = Array3::<Complex32>::zeros((nf, rows, cols));
        op.adjoint(y.view(), ehy.view_mut());
        let lhs = dot(ex.iter().copied(), y.iter().copied());
        let rhs = dot(x.iter().copied(), ehy.iter().copied());
        let scale = ex
            .iter()
            .map(|z| f64::from(z.norm_sqr()))
            .sum::<f64>()
            .sqrt()
            * y.iter()
                .map(|z| f64::from(z.norm_sqr()))
                .sum::<f64>()
                .sqrt();
        assert!(
            (lhs - rhs).norm() <= 1e-5 * scale,
            "{nf}×{rows}×{cols}: {lhs} vs {rhs}"
        );
    }
}

#[test]
fn readout_separable_normal_operator_equals_adjoint_of_forward() {
    // `normal_lines` skips the kx transforms and the centring shifts (see the operator's
    // module doc); it must agree with the full 2-D Eᴴ(E x) on odd and even matrix sizes.
    // Tolerance 1e-5 relative: both are f32 FFT chains of a few hundred operations.
    let mut r = common::rng(12);
    for &(nf, rows, cols, nc) in &[(3usize, 17usize, 12usize, 4usize), (4, 16, 9, 3)] {
        let sens = Array3::from_shape_fn((nc, rows, cols), |_| crand(&mut r));
        let mask = SamplingSpec::new(Pattern::VariableDensity, 3.0, 2)
            .unwrap()
            .with_rng_seed(9)
            .mask(nf, rows)
            .unwrap();
        let fft = CenteredFft2::new(rows, cols);
        let op = Encoding::new(sens.view(), &mask.lines, &fft).unwrap();
        let mut ws = op.workspace();
        let x = Array3::from_shape_fn((nf, rows, cols), |_| crand(&mut r));
        let ex = op.forward(x.view(), &mut ws);
        let mut full = Array3::<Complex32>::zeros((nf, rows, cols));
        op.adjoint(ex.view(), full.view_mut());
        let xl = transpose_planes(x.view());
        let mut out = Array3::<Complex32>::zeros(xl.dim());
        op.normal_lines(xl.view(), out.view_mut(), |_, _, _, _| ());
        let fast = transpose_planes(out.view());
        let err: f64 = full
            .iter()
            .zip(fast.iter())
            .map(|(a, b)| f64::from((*a - *b).norm_sqr()))
            .sum::<f64>()
            .sqrt();
        let size: f64 = full
            .iter()
            .map(|a| f64::from(a.norm_sqr()))
            .sum::<f64>()
            .sqrt();
        assert!(err <= 1e-5 * size, "{rows}×{cols}: error {err} of {size}");
    }
}

/// The Shepp–Logan head phantom (Shepp & Logan 1974, the published ellipse table with the
/// original grey levels: centre, semi-axes, rotation in degrees, additive intensity).
fn shepp_logan(n: usize) -> Array3<Complex32> {
    const E: [(f64, f64, f64, f64, f64, f64); 10] = [
        (0.0, 0.0, 0.69, 0.92, 0.0, 2.0),
        (0.0, -0.0184, 0.6624, 0.874, 0.0, -0.98),
        (0.22, 0.0, 0.11, 0.31, -18.0, -0.02),
        (-0.22, 0.0, 0.16, 0.41, 18.0, -0.02),
        (0.0, 0.35, 0.21, 0.25, 0.0, 0.01),
        (0.0, 0.1, 0.046, 0.046, 0.0, 0.01),
        (0.0, -0.1, 0.046, 0.046, 0.0, 0.01),
        (-0.08, -0.605, 0.046, 0.023, 0.0, 0.01),
        (0.0, -0.605, 0.023, 0.023, 0.0, 0.01),
        (0.06, -0.605, 0.023, 0.046, 0.0, 0.01),
    ];
    Array3::from_shape_fn((1, n, n), |(_, r, c)| {
        let x = 2.0 * (c as f64 + 0.5) / n as f64 - 1.0;
        let y = 1.0 - 2.0 * (r as f64 + 0.5) / n as f64;
        let v: f64 = E
            .iter()
            .filter(|(x0, y0, a, b, th, _)| {
                let (ct, st) = (th.to_radians().cos(), th.to_radians().sin());
                let (dx, dy) = (x - x0, y - y0);
                let (u, w) = (dx * ct + dy * st, -dx * st + dy * ct);
                (u / a).powi(2) + (w / b).powi(2) <= 1.0
            })
            .map(|e| e.5)
            .sum();
        Complex32::new(v as f32, 0.0)
    })
}

fn simulate_kspace(
    x: &Array3<Complex32>,
    sens: &Array3<Complex32>,
    fft: &CenteredFft2,
) -> Array4<Complex32> {
    let (nf, rows, cols) = x.dim();
    let nc = sens.dim().0;
    let mut k = Array4::from_shape_fn((nc, nf, rows, cols), |(c, f, r, k)| {
        sens[(c, r, k)] * x[(f, r, k)]
    });
    let flat = k
        .view_mut()
        .into_shape_with_order((nc * nf, rows, cols))
        .unwrap();
    fft.process_batch(flat, Direction::Forward);
    k
}

/// Runs `method` on one slice of k-space (the input is checked by `recon::run`).
fn run_on(
    method: &'static dyn recon::Reconstructor,
    kspace: ndarray::ArrayView4<Complex32>,
    mask: &SamplingMask,
    fft: &CenteredFft2,
    sens: Option<&Array3<Complex32>>,
    params: &Params,
) -> Result<recon::ReconOutput, ReconError> {
    let input = ReconInput {
        kspace,
        mask,
        fft,
        sens: sens.map(|s| s.view()),
    };
    recon::run(method, &input, params)
}

fn nrmse(a: &Array3<f32>, truth: &Array3<f32>) -> f64 {
    let num: f64 = a
        .iter()
        .zip(truth)
        .map(|(x, y)| f64::from(x - y).powi(2))
        .sum();
    let den: f64 = truth.iter().map(|y| f64::from(*y).powi(2)).sum();
    (num / den).sqrt()
}

/// Shepp–Logan of `n × n`, 8 analytic coil maps, and its noise-free k-space sampled
/// equispaced at R = 2 without calibration lines.
fn shepp_logan_r2(
    n: usize,
) -> (
    Array3<Complex32>,
    Array3<Complex32>,
    CenteredFft2,
    SamplingMask,
    Array4<Complex32>,
) {
    let x = shepp_logan(n);
    let sens = analytic_maps(8, n, n);
    let fft = CenteredFft2::new(n, n);
    let mask = SamplingSpec::new(Pattern::Equispaced, 2.0, 0)
        .unwrap()
        .mask(1, n)
        .unwrap();
    let mut k = simulate_kspace(&x, &sens, &fft);
    mask.apply(k.view_mut());
    (x, sens, fft, mask, k)
}

#[test]
fn cg_sense_recovers_shepp_logan_at_r2() {
    // Source: Shepp & Logan 1974 phantom; noise-free, analytic coil maps, equispaced R = 2
    // without calibration lines. CG on the well-conditioned R = 2 SENSE system converges to
    // the exact image, so NRMSE < 1e-3 (issue 3's acceptance value).
    let (x, sens, fft, mask, k) = shepp_logan_r2(96);
    let m = recon::by_id("cg-sense").unwrap();
    let p = Params::resolve(
        m,
        &[
            ("iterations".into(), "200".into()),
            ("tolerance".into(), "1e-7".into()),
            ("lambda".into(), "0".into()),
        ],
    )
    .unwrap();
    let out = run_on(m, k.view(), &mask, &fft, Some(&sens), &p).unwrap();
    let e = nrmse(&out.images, &x.mapv(|z| z.norm()));
    assert!(e < 1e-3, "NRMSE {e:e} after {} iterations", out.iterations);
}

#[test]
fn sense_noise_amplification_matches_the_analytic_g_factor() {
    // Source: Pruessmann et al. 1999, SNR_R = SNR_full / (g·√R) with
    // g_p = sqrt([(SᴴS)⁻¹]_pp · [SᴴS]_pp) over the pixels aliased together.
    // Measured: standard deviation over 600 pure-noise CG-SENSE reconstructions (converged,
    // so the estimator is the linear SENSE solution); the full-sampling noise is σ/sqrt(Σ|S|²).
    // Monte Carlo error of a standard deviation from 600 draws is 1/sqrt(1200) ≈ 2.9 % per
    // pixel, so the RMS over the object of (g_measured/g_analytic − 1) is checked at 5 %.
    let (n, nc, r) = (24usize, 4usize, 2usize);
    let sens = analytic_maps(nc, n, n);
    let fft = CenteredFft2::new(n, n);
    let mask = SamplingSpec::new(Pattern::Equispaced, r as f64, 0)
        .unwrap()
        .mask(1, n)
        .unwrap();
    let m = recon::by_id("cg-sense").unwrap();
    let p = Params::resolve(
        m,
        &[
            ("iterations".into(), "100".into()),
            ("tolerance".into(), "1e-7".into()),
            ("lambda".into(), "0".into()),
        ],
    )
    .unwrap();
    let mut rng = common::rng(99);
    let normal = rand_distr::Normal::new(0.0f64, std::f64::consts::FRAC_1_SQRT_2).unwrap();
    let reps = 600;
    let mut sum2 = Array3::<f64>::zeros((1, n, n));
    for _ in 0..reps {
        let mut k = Array4::from_shape_fn((nc, 1, n, n), |_| {
            use rand_distr::Distribution;
            Complex32::new(
                normal.sample(&mut rng) as f32,
                normal.sample(&mut rng) as f32,
            )
        });
        mask.apply(k.view_mut());
        // cg-sense returns magnitudes; reconstruct real and imaginary noise by linearity:
        // run on k and on i·k is not needed, because E[|x|²] = var(x) for zero-mean noise.
        let out = run_on(m, k.view(), &mask, &fft, Some(&sens), &p).unwrap();
        sum2.zip_mut_with(&out.images, |s, v| *s += f64::from(*v).powi(2));
    }
    let mut errs = Vec::new();
    for row in 0..n {
        for col in 0..n {
            // Aliased partner of `row` under R = 2 (shift by n/2 rows).
            let partner = (row + n / 2) % n;
            let s = |rr: usize| -> Vec<num_complex::Complex64> {
                (0..nc)
                    .map(|c| {
                        num_complex::Complex64::new(
                            sens[(c, rr, col)].re.into(),
                            sens[(c, rr, col)].im.into(),
                        )
                    })
                    .collect()
            };
            let (a, b) = (s(row), s(partner));
            let g11: f64 = a.iter().map(|z| z.norm_sqr()).sum();
            let g22: f64 = b.iter().map(|z| z.norm_sqr()).sum();
            let g12: num_complex::Complex64 = a.iter().zip(&b).map(|(x, y)| x.conj() * y).sum();
            let det = g11 * g22 - g12.norm_sqr();
            let g_analytic = (g22 / det * g11).sqrt();
            let full_sd = (1.0 / g11).sqrt();
            let sd = (sum2[(0, row, col)] / reps as f64).sqrt();
            let g_measured = sd / (full_sd * (r as f64).sqrt());
            errs.push(g_measured / g_analytic - 1.0);
        }
    }
    let rms = (errs.iter().map(|e| e * e).sum::<f64>() / errs.len() as f64).sqrt();
    let mean = errs.iter().sum::<f64>() / errs.len() as f64;
    assert!(
        rms < 0.05 && mean.abs() < 0.02,
        "g-factor: RMS relative error {rms:.4}, mean {mean:.4}"
    );
}

/// One mid-ventricular slice of a demo subject: fully sampled k-space and its reference.
fn beating_slice() -> (Array4<Complex32>, Array3<f32>, Array3<Complex32>) {
    let spec = PhantomSpec {
        coils: 8,
        ..demo::subjects(3)[0].spec.clone()
    };
    let ph = Phantom::new(spec).unwrap();
    let (slice, _, _) = ph.mid_ventricular_pixel();
    let (image, _) = ph.render_slice(slice);
    let k = ph.slice_kspace(slice, &image);
    (k, image, sensitivities(&ph))
}

#[test]
fn iterative_methods_beat_zero_filling_at_r8() {
    // Acceptance value of issue 3: at R = 8, each iterative method with its default
    // parameters has at most half the NRMSE of zero-filling, against the noise-free
    // rendered image of a beating phantom slice (SNR 28, 8 coils, 12 calibration lines).
    let (full, truth, _) = beating_slice();
    let (_, nf, rows, cols) = full.dim();
    let fft = CenteredFft2::new(rows, cols);
    let cases = [
        // Equispaced R = 8 with 8 coils along one axis is beyond SENSE's conditioning
        // (measured ratio 0.57 with the default Tikhonov term), so CG-SENSE is checked on
        // incoherent sampling.
        ("cg-sense", Pattern::VariableDensity),
        ("xf-sparse", Pattern::VariableDensity),
        ("xf-sparse", Pattern::KtLattice),
        ("temporal-tv", Pattern::VariableDensity),
        ("temporal-tv", Pattern::KtLattice),
        ("low-rank-sparse", Pattern::VariableDensity),
        ("low-rank-sparse", Pattern::KtLattice),
    ];
    for (id, pattern) in cases {
        let mask = SamplingSpec::new(pattern, 8.0, 12)
            .unwrap()
            .with_rng_seed(3)
            .mask(nf, rows)
            .unwrap();
        let mut k = full.clone();
        mask.apply(k.view_mut());
        let input = ReconInput {
            kspace: k.view(),
            mask: &mask,
            fft: &fft,
            sens: None,
        };
        let zf_method = recon::by_id("zero-filled").unwrap();
        let zf = nrmse(
            &recon::run(zf_method, &input, &Params::defaults(zf_method))
                .unwrap()
                .images,
            &truth,
        );
        let m = recon::by_id(id).unwrap();
        let out = recon::run(m, &input, &Params::defaults(m)).unwrap();
        let e = nrmse(&out.images, &truth);
        assert!(
            e <= 0.5 * zf,
            "{id} with {}: NRMSE {e:.4} vs zero-filled {zf:.4}",
            pattern.id()
        );
        assert!(!out.residuals.is_empty() && out.residuals.len() == out.iterations);
    }
}

#[test]
fn periodic_motion_is_sparse_in_x_f() {
    // A fact of the trade: the x-f transform of a periodic cine concentrates its energy.
    let (_, image, _) = beating_slice();
    let mut x = image.mapv(|v| Complex32::new(v, 0.0));
    TemporalFft::new(x.dim().0).process(x.view_mut(), Direction::Forward);
    let mut e: Vec<f64> = x.iter().map(|z| f64::from(z.norm_sqr())).collect();
    e.sort_by(|a, b| b.total_cmp(a));
    let total: f64 = e.iter().sum();
    let top: f64 = e[..e.len() / 20].iter().sum();
    // Measured 0.998 on this phantom; 0.95 is the claim checked (common practice: a few
    // percent of x-f coefficients carry nearly all of a cine's energy).
    assert!(
        top / total > 0.95,
        "top 5 % of x-f coefficients hold {:.4} of the energy",
        top / total
    );
}

#[test]
fn bad_reconstruction_inputs_are_named() {
    let fft = CenteredFft2::new(16, 12);
    let mask = SamplingSpec::new(Pattern::Equispaced, 2.0, 4)
        .unwrap()
        .mask(2, 16)
        .unwrap();
    let m = recon::by_id("cg-sense").unwrap();
    let mut k = Array4::<Complex32>::zeros((3, 2, 16, 12));
    k[(1, 1, 5, 7)] = Complex32::new(f32::NAN, 0.0);
    let e = run_on(m, k.view(), &mask, &fft, None, &Params::defaults(m)).unwrap_err();
    assert!(
        matches!(
            e,
            ReconError::NonFinite {
                coil: 1,
                frame: 1,
                ky: 5,
                kx: 7,
                ..
            }
        ),
        "{e}"
    );
    let k = Array4::<Complex32>::zeros((3, 2, 16, 12));
    let wrong = Array3::<Complex32>::zeros((2, 16, 12));
    let e = run_on(m, k.view(), &mask, &fft, Some(&wrong), &Params::defaults(m)).unwrap_err();
    assert!(
        e.to_string().contains("coil sensitivities") && e.to_string().contains("[2, 16, 12]"),
        "{e}"
    );
    let e = Params::resolve(m, &[("iteratoins".into(), "5".into())])
        .unwrap_err()
        .to_string();
    assert!(e.contains("iteratoins") && e.contains("iterations"), "{e}");
    let e = Params::resolve(m, &[("lambda".into(), "-1".into())])
        .unwrap_err()
        .to_string();
    assert!(e.contains("lambda") && e.contains("-1"), "{e}");
    let e = SamplingSpec::new(Pattern::Equispaced, 0.5, 4)
        .unwrap_err()
        .to_string();
    assert!(e.contains("0.5"), "{e}");
    let e = SamplingSpec::new(Pattern::VariableDensity, 20.0, 4)
        .unwrap()
        .mask(2, 16)
        .unwrap_err()
        .to_string();
    assert!(e.contains("20") && e.contains("16 phase-encode"), "{e}");
    let e = SamplingSpec::new(Pattern::KtLattice, 4.0, 40)
        .unwrap()
        .mask(2, 16)
        .unwrap_err()
        .to_string();
    assert!(e.contains("40") && e.contains("16"), "{e}");
}

#[test]
fn grappa_restores_noise_free_data_at_r2() {
    // Acceptance value of issue 3: GRAPPA (Griswold et al. 2002) on noise-free data at
    // R = 2 with 24 calibration lines has NRMSE < 2 % against the fully sampled
    // root-sum-of-squares image. Noise-free: SNR 1e6 in the phantom.
    let spec = PhantomSpec {
        snr: 1e6,
        frames: 6,
        ..demo::subjects(1)[0].spec.clone()
    };
    let ph = Phantom::new(spec).unwrap();
    let (slice, _, _) = ph.mid_ventricular_pixel();
    let (image, _) = ph.render_slice(slice);
    let full = ph.slice_kspace(slice, &image);
    let (_, nf, rows, cols) = full.dim();
    let fft = CenteredFft2::new(rows, cols);
    let reference = recon::by_id("reference").unwrap();
    let fullmask = SamplingSpec::full().mask(nf, rows).unwrap();
    let truth = run_on(
        reference,
        full.view(),
        &fullmask,
        &fft,
        None,
        &Params::defaults(reference),
    )
    .unwrap()
    .images;
    let mask = SamplingSpec::new(Pattern::Equispaced, 2.0, 24)
        .unwrap()
        .mask(nf, rows)
        .unwrap();
    let mut k = full.clone();
    mask.apply(k.view_mut());
    let g = recon::by_id("grappa").unwrap();
    let out = run_on(g, k.view(), &mask, &fft, None, &Params::defaults(g)).unwrap();
    let e = nrmse(&out.images, &truth);
    assert!(e < 0.02, "GRAPPA NRMSE {e:.4}");
    let vd = SamplingSpec::new(Pattern::VariableDensity, 2.0, 24)
        .unwrap()
        .mask(nf, rows)
        .unwrap();
    let e = run_on(g, k.view(), &vd, &fft, None, &Params::defaults(g)).unwrap_err();
    assert!(e.to_string().contains("equispaced"), "{e}");
}

#[test]
fn singular_value_thresholding_matches_the_analytic_result() {
    // Analytic: for C = U Σ Vᴴ with orthonormal U (pixels) and V (frames), SVT with
    // threshold τ returns U max(Σ − τ, 0) Vᴴ (Cai, Candès & Shen 2010). U and V are
    // discrete Fourier bases, so the SVD is known exactly. Tolerance 1e-4 of ‖C‖: f32 data
    // through an f64 eigen-decomposition of the Gram matrix.
    let (nf, na, nb) = (5usize, 4usize, 6usize);
    let n = na * nb;
    let sigma = [10.0f64, 6.0, 3.0, 1.0, 0.5];
    let rel = 0.25; // τ = 2.5
    let basis = |k: usize, i: usize, len: usize| {
        let ph = 2.0 * std::f64::consts::PI * (k * i) as f64 / len as f64;
        num_complex::Complex64::new(ph.cos(), ph.sin()) / (len as f64).sqrt()
    };
    let frame_k = [2usize, 0, 4, 1, 3];
    let build = |s: &dyn Fn(f64) -> f64| {
        Array3::from_shape_fn((nf, na, nb), |(f, a, b)| {
            let p = a * nb + b;
            let v: num_complex::Complex64 = (0..nf)
                .map(|k| basis(k, p, n) * s(sigma[k]) * basis(frame_k[k], f, nf).conj())
                .sum();
            Complex32::new(v.re as f32, v.im as f32)
        })
    };
    let x = build(&|s| s);
    let want = build(&|s| (s - rel * sigma[0]).max(0.0));
    let mut got = Array3::<Complex32>::zeros(x.dim());
    cinegauge::recon::low_rank_sparse::svt(&x, rel, &mut got);
    let err = want
        .iter()
        .zip(got.iter())
        .map(|(a, b)| f64::from((*a - *b).norm_sqr()))
        .sum::<f64>()
        .sqrt();
    let size = sigma.iter().map(|s| s * s).sum::<f64>().sqrt();
    assert!(err <= 1e-4 * size, "SVT error {err} (‖C‖ = {size})");
}

#[test]
fn iterations_stop_at_the_precision_floor_even_without_a_tolerance() {
    // Noise-free Shepp–Logan at R = 2 (as above): CG on this well-conditioned system converges
    // to rounding level long before 300 iterations (CG theory: exact in at most n steps for n
    // unknowns; in practice a few dozen here). With tolerance 0 it must still stop once the
    // residual is below the f32 floor, instead of iterating on rounding noise.
    let (_, sens, fft, mask, k) = shepp_logan_r2(64);
    let m = recon::by_id("cg-sense").unwrap();
    let given = [("iterations", "300"), ("tolerance", "0"), ("lambda", "0")]
        .map(|(a, b)| (a.to_string(), b.to_string()));
    let p = Params::resolve(m, &given).unwrap();
    let out = run_on(m, k.view(), &mask, &fft, Some(&sens), &p).unwrap();
    assert!(
        out.iterations < 300,
        "ran all {} iterations",
        out.iterations
    );
    let last = *out.residuals.last().unwrap();
    assert!(
        last < cinegauge::recon::operator::RESIDUAL_FLOOR,
        "last residual {last:e}"
    );
}
