//! Speed of the iterative reconstructions on one slice (8 coils × 24 frames × 160 × 128),
//! side by side with straightforward Python versions (benches/reference/recon_ref.py) on
//! `numpy.fft` and on `scipy.fft` with all cores.
//!
//! Run: `cargo bench --bench recon` (prints a table; needs python3 with numpy and scipy for
//! the side-by-side columns, otherwise prints the Rust figures alone).
//! Per-iteration time is `(t(N) − t(1)) / (N − 1)`, which removes the set-up (adjoint of
//! the data, thresholds) from the figure; each figure is the median of 3 runs.

use std::process::Command;
use std::time::Instant;

use cinegauge::fft::{CenteredFft2, Direction, TemporalFft};
use cinegauge::recon::{self, Params, ReconInput};
use cinegauge::sampling::{Pattern, SamplingSpec};
use ndarray::{Array3, Array4, Axis};
use num_complex::Complex32;

const COILS: usize = 8;
const FRAMES: usize = 24;
const ROWS: usize = 160;
const COLS: usize = 128;
const ITERS: usize = 10;

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn main() {
    let mut state = 1u64;
    let mut rnd = || {
        state = cinegauge::rng::stream_seed(state, 7);
        (state >> 11) as f32 / (1u64 << 53) as f32 - 0.5
    };
    let mut sens = Array3::from_shape_fn((COILS, ROWS, COLS), |_| Complex32::new(rnd(), rnd()));
    let norm = sens.map_axis(Axis(0), |v| {
        v.iter().map(|z| z.norm_sqr()).sum::<f32>().sqrt()
    });
    for mut c in sens.outer_iter_mut() {
        c.zip_mut_with(&norm, |z, n| *z /= *n);
    }
    let mask = SamplingSpec::new(Pattern::VariableDensity, 4.0, 16)
        .unwrap()
        .mask(FRAMES, ROWS)
        .unwrap();
    let mut k = Array4::from_shape_fn((COILS, FRAMES, ROWS, COLS), |_| {
        Complex32::new(rnd(), rnd())
    });
    mask.apply(k.view_mut());
    let fft = CenteredFft2::new(ROWS, COLS);
    let input = ReconInput {
        kspace: k.view(),
        mask: &mask,
        fft: &fft,
        sens: Some(sens.view()),
    };

    // FFT time of one normal-operator application: every coil × frame plane forward and back.
    let mut planes = k.clone();
    let fft_pair = median(
        (0..3)
            .map(|_| {
                let t = Instant::now();
                let flat = planes
                    .view_mut()
                    .into_shape_with_order((COILS * FRAMES, ROWS, COLS))
                    .unwrap();
                fft.process_batch(flat, Direction::Forward);
                let flat = planes
                    .view_mut()
                    .into_shape_with_order((COILS * FRAMES, ROWS, COLS))
                    .unwrap();
                fft.process_batch(flat, Direction::Inverse);
                t.elapsed().as_secs_f64()
            })
            .collect(),
    );
    let tf = TemporalFft::new(FRAMES);
    let mut series = Array3::<Complex32>::zeros((FRAMES, ROWS, COLS));
    let temporal_pair = median(
        (0..3)
            .map(|_| {
                let t = Instant::now();
                tf.process(series.view_mut(), Direction::Forward);
                tf.process(series.view_mut(), Direction::Inverse);
                t.elapsed().as_secs_f64()
            })
            .collect(),
    );

    let per_iteration = |id: &str, extra: &[(&str, &str)]| -> f64 {
        let m = recon::by_id(id).unwrap();
        let run = |n: usize| {
            let mut given = vec![
                ("iterations".to_string(), n.to_string()),
                ("tolerance".to_string(), "0".to_string()),
            ];
            given.extend(extra.iter().map(|(a, b)| (a.to_string(), b.to_string())));
            let p = Params::resolve(m, &given).unwrap();
            let t = Instant::now();
            recon::run(m, &input, &p).unwrap();
            t.elapsed().as_secs_f64()
        };
        median(
            (0..3)
                .map(|_| (run(ITERS) - run(1)) / (ITERS - 1) as f64)
                .collect(),
        )
    };
    let rust = [
        ("cg-sense", per_iteration("cg-sense", &[]), fft_pair),
        (
            "xf-sparse",
            per_iteration("xf-sparse", &[]),
            fft_pair + temporal_pair,
        ),
        (
            "low-rank-sparse",
            per_iteration("low-rank-sparse", &[]),
            fft_pair + temporal_pair,
        ),
    ];

    let python = |backend: &str| -> Option<serde_json::Value> {
        let script = concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/benches/reference/recon_ref.py"
        );
        let out = Command::new("python3")
            .args([script, backend])
            .args([COILS, FRAMES, ROWS, COLS, ITERS].map(|v| v.to_string()))
            .output()
            .ok()?;
        if !out.status.success() {
            eprintln!(
                "python reference ({backend}) did not run: {}",
                String::from_utf8_lossy(&out.stderr)
            );
            return None;
        }
        serde_json::from_slice(&out.stdout).ok()
    };
    let numpy = python("numpy");
    let scipy = python("scipy");

    println!("one slice: {COILS} coils × {FRAMES} frames × {ROWS} × {COLS}, {ITERS} iterations, median of 3");
    println!(
        "FFT of all planes forward + inverse: {:.2} ms (Rust)",
        fft_pair * 1e3
    );
    if let (Some(n), Some(s)) = (&numpy, &scipy) {
        println!(
            "                                    {:.2} ms (numpy.fft), {:.2} ms (scipy.fft, all cores)",
            n["fft_pair_s"].as_f64().unwrap_or(f64::NAN) * 1e3,
            s["fft_pair_s"].as_f64().unwrap_or(f64::NAN) * 1e3
        );
    }
    println!(
        "{:<16} {:>12} {:>10} {:>14} {:>14} {:>16}",
        "method", "Rust ms/it", "FFT share", "numpy ms/it", "scipy ms/it", "faster Py / Rust"
    );
    for (id, t, fft_t) in rust {
        let key = format!("{}_s", id.replace('-', "_"));
        let n = numpy.as_ref().and_then(|v| v[&key].as_f64());
        let s = scipy.as_ref().and_then(|v| v[&key].as_f64());
        let best = match (n, s) {
            (Some(a), Some(b)) => Some(a.min(b)),
            (a, b) => a.or(b),
        };
        let show = |v: Option<f64>| {
            v.map(|x| format!("{:.2}", x * 1e3))
                .unwrap_or_else(|| "-".into())
        };
        println!(
            "{:<16} {:>12.2} {:>9.0}% {:>14} {:>14} {:>16}",
            id,
            t * 1e3,
            100.0 * (fft_t / t).min(1.0),
            show(n),
            show(s),
            best.map(|b| format!("{:.1}×", b / t))
                .unwrap_or_else(|| "-".into())
        );
    }
}
