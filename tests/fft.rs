//! The centred orthonormal 2-D FFT against the DFT definition, Parseval's theorem,
//! inverse ∘ forward = identity, and NumPy's `fftshift(fft2(ifftshift(x), norm="ortho"))`.

use crate::common;

use cinegauge::fft::{CenteredFft2, Direction};
use cinegauge::tolerances::FFT_REL_ERROR;
use ndarray::Array3;
use num_complex::{Complex32, Complex64};

fn random_planes(rows: usize, cols: usize, batch: usize, seed: u64) -> Array3<Complex32> {
    let mut r = common::rng(seed);
    Array3::from_shape_fn((batch, rows, cols), |_| {
        Complex32::new(
            common::uniform(&mut r, -1.0, 1.0) as f32,
            common::uniform(&mut r, -1.0, 1.0) as f32,
        )
    })
}

fn to_c64<'a>(v: impl IntoIterator<Item = &'a Complex32>) -> Vec<Complex64> {
    v.into_iter()
        .map(|z| Complex64::new(z.re.into(), z.im.into()))
        .collect()
}

fn rel_err(a: &[Complex64], b: &[Complex64]) -> f64 {
    let num: f64 = a.iter().zip(b).map(|(x, y)| (x - y).norm_sqr()).sum();
    let den: f64 = b.iter().map(|y| y.norm_sqr()).sum();
    (num / den).sqrt()
}

/// Sizes: even, odd, non-square and prime, because the shifts differ for odd sizes.
const SIZES: [(usize, usize); 6] = [(8, 8), (7, 12), (15, 9), (16, 5), (13, 13), (6, 11)];

#[test]
fn matches_the_dft_definition_forward_and_inverse() {
    // Source: DFT definition (textbook), computed in f64 by the naive O(N²) sum.
    for (i, &(rows, cols)) in SIZES.iter().enumerate() {
        let x = random_planes(rows, cols, 3, 100 + i as u64);
        let fft = CenteredFft2::new(rows, cols);
        for dir in [Direction::Forward, Direction::Inverse] {
            let got = fft.apply(x.clone(), dir);
            for b in 0..3 {
                let input = to_c64(x.index_axis(ndarray::Axis(0), b).iter());
                let want =
                    common::naive_centred_dft_2d(&input, rows, cols, dir == Direction::Inverse);
                let have = to_c64(got.index_axis(ndarray::Axis(0), b).iter());
                let e = rel_err(&have, &want);
                assert!(
                    e < FFT_REL_ERROR,
                    "{rows}x{cols} {dir:?}: relative error {e:e}"
                );
            }
        }
    }
}

#[test]
fn parseval_and_round_trip() {
    // Parseval's theorem for the unitary DFT: Σ|x|² = Σ|X|² (textbook identity).
    for (i, &(rows, cols)) in SIZES.iter().enumerate() {
        let x = random_planes(rows, cols, 2, 200 + i as u64);
        let fft = CenteredFft2::new(rows, cols);
        let k = fft.apply(x.clone(), Direction::Forward);
        let ex: f64 = x.iter().map(|z| f64::from(z.norm_sqr())).sum();
        let ek: f64 = k.iter().map(|z| f64::from(z.norm_sqr())).sum();
        assert!(
            ((ex - ek) / ex).abs() < FFT_REL_ERROR,
            "{rows}x{cols}: energy {ex} vs {ek}"
        );
        let back = fft.apply(k, Direction::Inverse);
        let a = to_c64(back.iter());
        let b = to_c64(x.iter());
        let e = rel_err(&a, &b);
        assert!(
            e < FFT_REL_ERROR,
            "{rows}x{cols}: inverse(forward(x)) differs from x by {e:e}"
        );
    }
}

#[test]
fn dc_of_a_constant_lands_at_floor_half() {
    // A constant image of value 1 has all its energy at the k-space centre, index
    // (⌊rows/2⌋, ⌊cols/2⌋), with value sqrt(rows·cols) under the orthonormal scaling.
    for &(rows, cols) in &SIZES {
        let fft = CenteredFft2::new(rows, cols);
        let k = fft.apply(
            Array3::from_elem((1, rows, cols), Complex32::new(1.0, 0.0)),
            Direction::Forward,
        );
        let centre = k[(0, rows / 2, cols / 2)];
        assert!(
            (f64::from(centre.re) - ((rows * cols) as f64).sqrt()).abs() < 1e-4,
            "{rows}x{cols}: {centre}"
        );
        let rest: f32 = k.iter().map(|z| z.norm()).sum::<f32>() - centre.norm();
        assert!(rest < 1e-3, "{rows}x{cols}: energy off centre {rest}");
    }
}

#[test]
fn matches_numpy_fixture() {
    // Source: NumPy (tests/fixtures/make_fft_fixture.py; version recorded in the fixture).
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/fixtures/fft_numpy.json"
    ))
    .unwrap();
    let v: serde_json::Value = serde_json::from_str(&text).unwrap();
    for case in v["cases"].as_array().unwrap() {
        let rows = case["rows"].as_u64().unwrap() as usize;
        let cols = case["cols"].as_u64().unwrap() as usize;
        let get = |key: &str| -> Vec<Complex32> {
            let re = case[key]["re"].as_array().unwrap();
            let im = case[key]["im"].as_array().unwrap();
            re.iter()
                .zip(im)
                .map(|(a, b)| {
                    Complex32::new(a.as_f64().unwrap() as f32, b.as_f64().unwrap() as f32)
                })
                .collect()
        };
        let x = Array3::from_shape_vec((1, rows, cols), get("input")).unwrap();
        let want = get("forward");
        let got = CenteredFft2::new(rows, cols).apply(x, Direction::Forward);
        let a = to_c64(got.iter());
        let b = to_c64(want.iter());
        let e = rel_err(&a, &b);
        assert!(
            e < FFT_REL_ERROR,
            "{rows}x{cols}: relative error to NumPy {e:e}"
        );
    }
}
