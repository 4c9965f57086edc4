//! Helpers shared by the integration tests.
#![allow(dead_code)]

use num_complex::Complex64;
use rand::rngs::Xoshiro256PlusPlus;
use rand::{RngExt, SeedableRng};

/// The centred DFT straight from its definition (textbook, e.g. Oppenheim & Schafer,
/// "Discrete-Time Signal Processing", DFT with the index origin moved to floor(N/2)):
/// `X[k] = N^(-1/2) Σ_n x[n] exp(∓2πi (k − ⌊N/2⌋)(n − ⌊N/2⌋) / N)`, in f64.
pub fn naive_centred_dft_1d(x: &[Complex64], inverse: bool) -> Vec<Complex64> {
    let n = x.len();
    let h = (n / 2) as f64;
    let sign = if inverse { 1.0 } else { -1.0 };
    (0..n)
        .map(|k| {
            let kk = k as f64 - h;
            let sum: Complex64 = x
                .iter()
                .enumerate()
                .map(|(m, v)| {
                    let mm = m as f64 - h;
                    v * Complex64::from_polar(
                        1.0,
                        sign * std::f64::consts::TAU * kk * mm / n as f64,
                    )
                })
                .sum();
            sum / (n as f64).sqrt()
        })
        .collect()
}

/// Naive 2-D centred DFT of a row-major `rows × cols` array: rows, then columns.
pub fn naive_centred_dft_2d(
    x: &[Complex64],
    rows: usize,
    cols: usize,
    inverse: bool,
) -> Vec<Complex64> {
    let mut a = x.to_vec();
    for r in 0..rows {
        let line = naive_centred_dft_1d(&a[r * cols..(r + 1) * cols], inverse);
        a[r * cols..(r + 1) * cols].copy_from_slice(&line);
    }
    for c in 0..cols {
        let col: Vec<Complex64> = (0..rows).map(|r| a[r * cols + c]).collect();
        let t = naive_centred_dft_1d(&col, inverse);
        for r in 0..rows {
            a[r * cols + c] = t[r];
        }
    }
    a
}

/// A reproducible random generator for tests.
pub fn rng(seed: u64) -> Xoshiro256PlusPlus {
    Xoshiro256PlusPlus::seed_from_u64(seed)
}

/// Uniform random value in [lo, hi).
pub fn uniform(r: &mut Xoshiro256PlusPlus, lo: f64, hi: f64) -> f64 {
    r.random_range(lo..hi)
}

/// A small noise-free phantom (11 slices of 64 × 72 at 2.5 mm, 12 frames), its rendered
/// magnitude stack `[slice, frame, row, col]` and one mid-ventricular seed.
pub fn small_phantom_stack() -> (
    cinegauge::phantom::Phantom,
    ndarray::Array4<f32>,
    cinegauge::segment::seeds::Seed,
) {
    use cinegauge::phantom::{Phantom, PhantomSpec};
    let spec = PhantomSpec {
        slices: 11,
        rows: 64,
        cols: 72,
        pixel_mm: 2.5,
        frames: 12,
        ..PhantomSpec::default()
    };
    let ph = Phantom::new(spec).unwrap();
    let slices: Vec<_> = (0..ph.spec().slices)
        .map(|k| ph.render_slice(k).0)
        .collect();
    let views: Vec<_> = slices.iter().map(|a| a.view()).collect();
    let stack = ndarray::stack(ndarray::Axis(0), &views).unwrap();
    let (slice, row, col) = ph.mid_ventricular_pixel();
    let seed = cinegauge::segment::seeds::Seed {
        slice,
        frame: 0,
        row,
        col,
    };
    (ph, stack, seed)
}

/// Largest absolute difference between two equally long sequences of values.
pub fn max_abs_diff<'a>(
    a: impl IntoIterator<Item = &'a f32>,
    b: impl IntoIterator<Item = &'a f32>,
) -> f32 {
    a.into_iter()
        .zip(b)
        .map(|(x, y)| (x - y).abs())
        .fold(0.0, f32::max)
}

/// The fully sampled reference reconstruction of a phantom (`[slice, frame, row, col]`).
pub fn reference_stack(ph: &cinegauge::phantom::Phantom) -> ndarray::Array4<f32> {
    let run = [cinegauge::pipeline::RunRequest::with_defaults(
        cinegauge::recon::by_id("reference").expect("registered"),
        cinegauge::sampling::SamplingSpec::full(),
    )];
    cinegauge::pipeline::reconstruct_phantom(ph, &run, &Default::default())
        .expect("reconstructs")
        .remove(0)
        .stack
        .expect("stack")
}

/// Runs the binary with `SOURCE_DATE_EPOCH` fixed (2025-12-02 UTC), so reports carry a fixed
/// date and compare byte for byte.
pub fn cinegauge(args: &[&str]) -> std::process::Output {
    std::process::Command::new(env!("CARGO_BIN_EXE_cinegauge"))
        .env("SOURCE_DATE_EPOCH", "1764633600")
        .args(args)
        .output()
        .expect("binary runs")
}

/// Standard output and error of a finished command, as text.
pub fn text(o: &std::process::Output) -> String {
    format!(
        "{}{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    )
}
