//! Receive-coil sensitivities and simulated acquisition of the phantom.
//!
//! Coils sit on an ellipse around the chest; each sensitivity is a smooth Gaussian
//! fall-off with a linear phase, normalised so that `Σ_c |S_c|² = 1` at every pixel.
//! With that normalisation and white, uncorrelated coil noise of complex standard
//! deviation `σ`, the sensitivity-weighted coil combination has noise `σ`, so
//! `SNR = LV blood signal / σ` (see [`super::PhantomSpec::snr`]).

use ndarray::{Array3, Array4, Axis};
use num_complex::Complex32;
use rand_distr::{Distribution, Normal};

use super::render::signal;
use super::Phantom;
use crate::fft::{CenteredFft2, Direction};

/// Coil sensitivities `[coil, row, col]` of a phantom (normalised: `Σ_c |S_c|² = 1`).
pub fn sensitivities(ph: &Phantom) -> Array3<Complex32> {
    let spec = ph.spec();
    let (nc, nr, ncol) = (spec.coils, spec.rows, spec.cols);
    let fov_x = ncol as f64 * spec.pixel_mm;
    let fov_y = nr as f64 * spec.pixel_mm;
    let (ex, ey) = (0.55 * fov_x, 0.55 * fov_y);
    let width = 0.3 * (fov_x + fov_y) / 2.0;
    let mut s = Array3::<Complex32>::zeros((nc, nr, ncol));
    for c in 0..nc {
        let th = std::f64::consts::TAU * c as f64 / nc as f64 + 0.3;
        let (cx, cy) = (ex * th.cos(), ey * th.sin());
        for r in 0..nr {
            for k in 0..ncol {
                let (x, y) = ph.pixel_xy_mm(r as f64, k as f64);
                let d2 = (x - cx).powi(2) + (y - cy).powi(2);
                let mag = (-d2 / (2.0 * width * width)).exp() + 0.02;
                let phase = th + 0.01 * (x * th.cos() + y * th.sin());
                s[(c, r, k)] = Complex32::from_polar(mag as f32, phase as f32);
            }
        }
    }
    let rss = s.map_axis(Axis(0), |v| {
        v.iter().map(|z| z.norm_sqr()).sum::<f32>().sqrt()
    });
    for mut coil in s.outer_iter_mut() {
        coil.zip_mut_with(&rss, |z, n| *z /= *n);
    }
    s
}

/// A smooth object phase (radians) at `(x, y)` mm, as bSSFP images have.
fn object_phase(x: f64, y: f64) -> f64 {
    0.004 * x - 0.003 * y + 2.0e-5 * (x * x - y * y)
}

/// Multi-coil k-space `[coil, frame, ky, kx]` of one rendered slice, with complex Gaussian noise.
pub fn acquire(ph: &Phantom, slice: usize, image: &Array3<f32>) -> Array4<Complex32> {
    let spec = ph.spec();
    let (nf, nr, ncol) = image.dim();
    let sens = sensitivities(ph);
    let nc = spec.coils;
    let mut k = Array4::<Complex32>::zeros((nc, nf, nr, ncol));
    let phase = Array3::from_shape_fn((1, nr, ncol), |(_, r, c)| {
        let (x, y) = ph.pixel_xy_mm(r as f64, c as f64);
        Complex32::from_polar(1.0, object_phase(x, y) as f32)
    });
    for c in 0..nc {
        for f in 0..nf {
            for r in 0..nr {
                for col in 0..ncol {
                    k[(c, f, r, col)] = sens[(c, r, col)] * phase[(0, r, col)] * image[(f, r, col)];
                }
            }
        }
    }
    let fft = CenteredFft2::new(nr, ncol);
    {
        let flat = k
            .view_mut()
            .into_shape_with_order((nc * nf, nr, ncol))
            .expect("standard layout");
        fft.process_batch(flat, Direction::Forward);
    }
    let sigma = f64::from(signal::LV_BLOOD) / spec.snr;
    let normal = Normal::new(0.0, sigma / std::f64::consts::SQRT_2).expect("sigma is positive");
    let mut rng = crate::rng::stream(spec.rng_seed, slice as u64);
    for z in k.iter_mut() {
        let re = normal.sample(&mut rng) as f32;
        let im = normal.sample(&mut rng) as f32;
        *z += Complex32::new(re, im);
    }
    k
}
