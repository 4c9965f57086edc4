//! Inner products and norms of complex slices, fast and reproducible.
//!
//! Each block of [`BLOCK`] values is summed in f32 over independent lanes (so the sum is
//! vectorised instead of waiting on one accumulator), and the block sums are added in f64
//! in block order. The result is the same for any thread count and
//! accurate to f64 rounding of the block sums.

use ndarray::Array3;
use num_complex::{Complex32, Complex64};
use rayon::prelude::*;

use super::kernels;

/// Values per block.
pub const BLOCK: usize = 1024;

/// `(‖a − b‖², ‖a‖²)` of one block in f32, eight lanes at a time.
fn block_change(a: &[Complex32], b: &[Complex32]) -> (f32, f32) {
    const LANES: usize = 8;
    let (mut num, mut den) = ([0f32; LANES], [0f32; LANES]);
    let mut xs = a.chunks_exact(LANES);
    let mut ys = b.chunks_exact(LANES);
    for (x, y) in (&mut xs).zip(&mut ys) {
        for i in 0..LANES {
            let (dr, di) = (x[i].re - y[i].re, x[i].im - y[i].im);
            num[i] += dr * dr + di * di;
            den[i] += x[i].re * x[i].re + x[i].im * x[i].im;
        }
    }
    let (n, d) = xs
        .remainder()
        .iter()
        .zip(ys.remainder())
        .fold((0.0, 0.0), |(n, d), (x, y)| {
            (n + (*x - *y).norm_sqr(), d + x.norm_sqr())
        });
    (num.iter().sum::<f32>() + n, den.iter().sum::<f32>() + d)
}

/// `Σ conj(a)·b` (serial; for per-frame sums inside parallel loops).
pub fn dot(a: &[Complex32], b: &[Complex32]) -> Complex64 {
    a.chunks(BLOCK)
        .zip(b.chunks(BLOCK))
        .map(|(x, y)| widen(kernels::conj_dot(x, y)))
        .sum()
}

/// `(‖a − b‖², ‖a‖²)` (serial; for per-tile sums inside parallel loops).
pub fn change(a: &[Complex32], b: &[Complex32]) -> (f64, f64) {
    a.chunks(BLOCK)
        .zip(b.chunks(BLOCK))
        .map(|(x, y)| block_change(x, y))
        .fold((0.0, 0.0), |(n, d), (pn, pd)| {
            (n + f64::from(pn), d + f64::from(pd))
        })
}

/// `‖a − b‖ / ‖a‖` of two standard-layout arrays, blocks in parallel: the relative
/// change between two iterates.
///
/// # Panics
/// If either array is not in standard layout (the iterates always are).
pub fn relative_change(a: &Array3<Complex32>, b: &Array3<Complex32>) -> f64 {
    let (a, b) = (
        a.as_slice().expect("standard layout"),
        b.as_slice().expect("standard layout"),
    );
    let parts: Vec<(f32, f32)> = a
        .par_chunks(BLOCK)
        .zip(b.par_chunks(BLOCK))
        .map(|(x, y)| block_change(x, y))
        .collect();
    let (num, den) = parts.iter().fold((0.0f64, 0.0f64), |(n, d), (pn, pd)| {
        (n + f64::from(*pn), d + f64::from(*pd))
    });
    (num / den.max(f64::MIN_POSITIVE)).sqrt()
}

fn widen(z: Complex32) -> Complex64 {
    Complex64::new(z.re.into(), z.im.into())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn series(n: usize, k: f32) -> Vec<Complex32> {
        (0..n)
            .map(|i| Complex32::new((i as f32 * k).sin(), (i as f32 * 0.7 * k).cos()))
            .collect()
    }

    #[test]
    fn block_sums_match_a_plain_f64_sum() {
        // Reference: the same sums accumulated one value at a time in f64. Tolerance 1e-6
        // relative: f32 sums of at most 1024 terms of size ≤ 2 (Higham's bound ~ n·ε).
        for n in [1usize, 7, 8, 1023, 1024, 5000] {
            let (a, b) = (series(n, 0.37), series(n, 0.11));
            let want: Complex64 = a
                .iter()
                .zip(&b)
                .map(|(x, y)| widen(x.conj()) * widen(*y))
                .sum();
            let got = dot(&a, &b);
            assert!(
                (got - want).norm() <= 1e-6 * n as f64,
                "n={n}: {got} vs {want}"
            );
            let num: f64 = a
                .iter()
                .zip(&b)
                .map(|(x, y)| f64::from((*x - *y).norm_sqr()))
                .sum();
            let den: f64 = a.iter().map(|x| f64::from(x.norm_sqr())).sum();
            let want = (num / den).sqrt();
            let shape = (1, 1, n);
            let got = relative_change(
                &Array3::from_shape_vec(shape, a.clone()).unwrap(),
                &Array3::from_shape_vec(shape, b.clone()).unwrap(),
            );
            assert!((got - want).abs() <= 1e-6 * want, "n={n}: {got} vs {want}");
            let (cn, cd) = change(&a, &b);
            let got = (cn / cd).sqrt();
            assert!((got - want).abs() <= 1e-6 * want, "n={n}: {got} vs {want}");
        }
    }
}
