//! Noise pre-whitening and coil compression against their defining identities.

use crate::common;

use cinegauge::fft::CenteredFft2;
use cinegauge::recon::coils::{coil_images, compression_matrix, mix_coils, rss, whitening_matrix};
use ndarray::{Array2, Array4};
use num_complex::Complex32;

fn crand(r: &mut rand::rngs::Xoshiro256PlusPlus) -> Complex32 {
    Complex32::new(
        common::uniform(r, -1.0, 1.0) as f32,
        common::uniform(r, -1.0, 1.0) as f32,
    )
}

#[test]
fn whitening_makes_the_noise_covariance_the_identity() {
    // Definition: with Ψ = L Lᴴ (Cholesky) and W = L⁻¹, W Ψ Wᴴ = I (linear algebra identity).
    let mut r = common::rng(21);
    let n = 6;
    let a = Array2::from_shape_fn((n, n), |_| crand(&mut r));
    // Ψ = A Aᴴ + n·I is Hermitian positive definite.
    let psi = Array2::from_shape_fn((n, n), |(i, j)| {
        (0..n)
            .map(|k| a[(i, k)] * a[(j, k)].conj())
            .sum::<Complex32>()
            + if i == j {
                Complex32::new(n as f32, 0.0)
            } else {
                Complex32::default()
            }
    });
    let w = whitening_matrix(&psi).unwrap();
    for i in 0..n {
        for j in 0..n {
            let v: Complex32 = (0..n)
                .flat_map(|k| (0..n).map(move |l| (k, l)))
                .map(|(k, l)| w[(i, k)] * psi[(k, l)] * w[(j, l)].conj())
                .sum();
            let want = if i == j { 1.0 } else { 0.0 };
            assert!(
                (v.re - want).abs() < 1e-4 && v.im.abs() < 1e-4,
                "({i},{j}): {v}"
            );
        }
    }
    let mut not_pd = psi.clone();
    not_pd[(0, 0)] = Complex32::new(-5.0, 0.0);
    assert!(whitening_matrix(&not_pd)
        .unwrap_err()
        .to_string()
        .contains("positive definite"));
    let not_square = Array2::<Complex32>::zeros((3, 4));
    assert!(whitening_matrix(&not_square)
        .unwrap_err()
        .to_string()
        .contains("3 × 4"));
}

#[test]
fn compression_keeps_the_signal_of_a_low_rank_coil_array() {
    // Principal-component coil compression (Buehrer 2007; Huang 2008): when 8 physical coils
    // are mixtures of 3 independent channels, 3 virtual coils keep all the energy, and the
    // root-sum-of-squares image of the virtual coils equals the original one (the
    // compression matrix has orthonormal rows spanning the signal).
    let mut r = common::rng(5);
    let (nc, k, nf, ny, nx) = (8, 3, 2, 16, 12);
    let channels = Array4::from_shape_fn((k, nf, ny, nx), |_| crand(&mut r));
    let mixing = Array2::from_shape_fn((nc, k), |_| crand(&mut r));
    let data = mix_coils(channels.view(), &mixing);
    let m = compression_matrix(data.view(), (0, ny), 3, 1.0);
    assert_eq!(m.dim(), (3, nc));
    let compressed = mix_coils(data.view(), &m);
    let fft = CenteredFft2::new(ny, nx);
    let a = rss(coil_images(data.view(), &fft).view());
    let b = rss(coil_images(compressed.view(), &fft).view());
    let err = a
        .iter()
        .zip(b.iter())
        .map(|(x, y)| (x - y).abs())
        .fold(0.0f32, f32::max);
    let peak = a.iter().cloned().fold(0.0f32, f32::max);
    assert!(
        err < 1e-4 * peak,
        "largest difference {err} against peak {peak}"
    );
    // Keep-energy mode picks the same 3 coils.
    assert_eq!(
        compression_matrix(data.view(), (0, ny), 0, 0.999).nrows(),
        3
    );
}
