//! Speed of the iterative reconstructions on one slice (8 coils × 24 frames × 160 × 128),
//! side by side with straightforward Python versions (benches/reference/recon_ref.py) on
//! `numpy.fft` and on `scipy.fft` with all cores.
//!
//! Run: `cargo bench -p cinegauge-bench --bench recon` (criterion measures; a table follows
//! with the Python columns, which need python3 with numpy and scipy, otherwise the Rust
//! figures alone).
//! Per-iteration time is `(t(N) − t(1)) / (N − 1)` of criterion's medians, which removes
//! the set-up (adjoint of the data, thresholds) from the figure. The FFT share is the time
//! of exactly the FFT calls one iteration makes (1-D ky transforms of the normal operator,
//! plus the temporal transforms where the method has them), timed alone in the shape the
//! methods call them, over the iteration time. Because this machine's speed drifts by tens
//! of percent between criterion's groups, the share is measured in paired rounds: each
//! round times the method at N and at 1 iteration and the FFT calls back to back, and the
//! table shows the median of the rounds' ratios with their range.

use std::cell::RefCell;
use std::collections::BTreeMap;
use std::hint::black_box;
use std::process::Command;
use std::time::{Duration, Instant};

use cinegauge::fft::{CenteredFft2, Direction, LineFft};
use cinegauge::recon::operator::{Encoding, TILE};
use cinegauge::recon::{self, Params, ReconInput};
use cinegauge::sampling::{Pattern, SamplingMask, SamplingSpec};
use criterion::Criterion;
use ndarray::{Array3, Array4, Axis};
use num_complex::Complex32;
use rayon::prelude::*;

const COILS: usize = 8;
const FRAMES: usize = 24;
const ROWS: usize = 160;
const COLS: usize = 128;
const ITERS: usize = 10;
/// Paired rounds of the FFT-share measurement.
const ROUNDS: usize = 15;
const METHODS: [&str; 3] = ["cg-sense", "xf-sparse", "low-rank-sparse"];

/// Median seconds per call of each benchmark, filled by the `iter_custom` closures.
type Medians = RefCell<BTreeMap<String, Vec<f64>>>;

struct Slice {
    sens: Array3<Complex32>,
    mask: SamplingMask,
    kspace: Array4<Complex32>,
    fft: CenteredFft2,
}

impl Slice {
    fn new() -> Self {
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
            .expect("valid pattern")
            .mask(FRAMES, ROWS)
            .expect("valid mask");
        let mut kspace = Array4::from_shape_fn((COILS, FRAMES, ROWS, COLS), |_| {
            Complex32::new(rnd(), rnd())
        });
        mask.apply(kspace.view_mut());
        Slice {
            sens,
            mask,
            kspace,
            fft: CenteredFft2::new(ROWS, COLS),
        }
    }

    fn input(&self) -> ReconInput<'_> {
        ReconInput {
            kspace: self.kspace.view(),
            mask: &self.mask,
            fft: &self.fft,
            sens: Some(self.sens.view()),
        }
    }
}

/// Forward and inverse 1-D FFTs of `planes` contiguous planes of `lines × n` values,
/// planes in parallel: the transform work of the normal operator (n = rows) or of the
/// temporal transform (n = frames).
fn line_fft_pair(fft: &LineFft, planes: usize, lines: usize) {
    (0..planes).into_par_iter().for_each_init(
        || {
            (
                vec![Complex32::new(1.0, 0.0); lines * fft.len()],
                Vec::new(),
            )
        },
        |(buf, scratch), _| {
            fft.process(buf, Direction::Forward, scratch);
            fft.process(buf, Direction::Inverse, scratch);
            black_box(&buf);
        },
    );
}

/// The ky FFT pairs of one normal-operator application, in the shape it calls them: one call
/// per (tile, frame, coil) of TILE lines.
fn normal_operator_ffts(ky: &LineFft) {
    line_fft_pair(ky, COILS * FRAMES * COLS.div_ceil(TILE), TILE)
}

/// The temporal FFT pairs of one x-f shrinkage, as it calls them: one call per column tile of
/// all its pixels' series.
fn shrinkage_ffts(t: &LineFft) {
    line_fft_pair(t, COLS.div_ceil(TILE), TILE * ROWS)
}

fn measure(c: &mut Criterion, medians: &Medians) {
    let slice = Slice::new();
    let input = slice.input();
    let mut group = c.benchmark_group("recon");
    group
        .sample_size(10)
        .warm_up_time(Duration::from_secs(1))
        .measurement_time(Duration::from_secs(4));
    let mut timed = |name: String, f: &mut dyn FnMut()| {
        group.bench_function(&name, |b| {
            b.iter_custom(|n| {
                let t = Instant::now();
                for _ in 0..n {
                    f();
                }
                let d = t.elapsed();
                medians
                    .borrow_mut()
                    .entry(name.clone())
                    .or_default()
                    .push(d.as_secs_f64() / n as f64);
                d
            })
        });
    };
    for id in METHODS {
        let m = recon::by_id(id).expect("registered");
        for n in [1, ITERS] {
            let given = [
                ("iterations".to_string(), n.to_string()),
                ("tolerance".to_string(), "0".to_string()),
            ];
            let p = Params::resolve(m, &given).expect("valid parameters");
            timed(format!("{id}/{n}"), &mut || {
                black_box(recon::run(m, &input, &p).expect("reconstructs"));
            });
        }
    }
    let op = Encoding::new(slice.sens.view(), &slice.mask.lines, &slice.fft).expect("valid");
    let x = Array3::from_elem((FRAMES, COLS, ROWS), Complex32::new(1.0, 0.5));
    let mut out = Array3::<Complex32>::zeros((FRAMES, COLS, ROWS));
    timed("operator/normal".into(), &mut || {
        op.normal_lines(x.view(), out.view_mut(), |_, _, _, _| ());
    });
    let ky = LineFft::new(ROWS);
    timed("fft/normal-operator".into(), &mut || {
        normal_operator_ffts(&ky)
    });
    let t = LineFft::new(FRAMES);
    timed("fft/temporal".into(), &mut || shrinkage_ffts(&t));
    group.finish();
}

/// Per method and round: seconds at 1 and at `ITERS` iterations, and of the FFT calls of
/// one iteration.
type Rounds = BTreeMap<&'static str, Vec<[f64; 3]>>;

/// The paired measurement of the FFT share (see the module comment): per round, each
/// method at 1 and at `ITERS` iterations, then the FFT calls of one iteration.
fn paired_rounds(rounds: usize) -> Rounds {
    let slice = Slice::new();
    let input = slice.input();
    let (ky, t) = (LineFft::new(ROWS), LineFft::new(FRAMES));
    let time = |f: &mut dyn FnMut()| {
        let s = Instant::now();
        f();
        s.elapsed().as_secs_f64()
    };
    let mut out = Rounds::new();
    for _ in 0..rounds {
        for id in METHODS {
            let m = recon::by_id(id).expect("registered");
            let run = |n: usize| {
                let given = [
                    ("iterations".to_string(), n.to_string()),
                    ("tolerance".to_string(), "0".to_string()),
                ];
                let p = Params::resolve(m, &given).expect("valid parameters");
                black_box(recon::run(m, &input, &p).expect("reconstructs"));
            };
            let one = time(&mut || run(1));
            let many = time(&mut || run(ITERS));
            let mut fft = time(&mut || normal_operator_ffts(&ky));
            if id != "cg-sense" {
                fft += time(&mut || shrinkage_ffts(&t));
            }
            out.entry(id).or_default().push([one, many, fft]);
        }
    }
    out
}

/// Iteration time and FFT share from the rounds' fastest timings (the machine's noise only
/// ever adds time), with the range of the single rounds' shares.
fn best_of(rounds: &[[f64; 3]]) -> (f64, f64, f64, f64) {
    let min = |k: usize| rounds.iter().map(|r| r[k]).fold(f64::INFINITY, f64::min);
    let per_it = (min(1) - min(0)) / (ITERS - 1) as f64;
    let each: Vec<f64> = rounds
        .iter()
        .map(|r| r[2] * (ITERS - 1) as f64 / (r[1] - r[0]))
        .collect();
    let lo = each.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = each.iter().copied().fold(0.0, f64::max);
    (per_it, min(2) / per_it, lo, hi)
}

fn python(backend: &str) -> Option<serde_json::Value> {
    let script = concat!(env!("CARGO_MANIFEST_DIR"), "/reference/recon_ref.py");
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
}

fn median(v: &mut [f64]) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn main() {
    let medians = Medians::default();
    let mut c = Criterion::default().configure_from_args();
    measure(&mut c, &medians);
    c.final_summary();
    let m = medians.borrow();
    let Some(get) = METHODS
        .iter()
        .all(|id| m.contains_key(&format!("{id}/{ITERS}")))
        .then_some(|k: &str| median(&mut m[k].clone()))
    else {
        // A filtered run (`cargo bench -p cinegauge-bench --bench recon -- NAME`): no table.
        return;
    };
    let per_it =
        |id: &str| (get(&format!("{id}/{ITERS}")) - get(&format!("{id}/1"))) / (ITERS - 1) as f64;
    let (fft_op, fft_t) = (get("fft/normal-operator"), get("fft/temporal"));

    let rounds = paired_rounds(ROUNDS);
    let backends = ["numpy", "scipy", "scipy-ky"].map(|b| (b, python(b)));
    println!();
    println!("one slice: {COILS} coils × {FRAMES} frames × {ROWS} × {COLS}, {ITERS} iterations, criterion medians");
    println!(
        "normal operator EᴴE: {:.2} ms, of which its FFTs {:.2} ms ({:.0}%); temporal FFT pair: {:.2} ms",
        get("operator/normal") * 1e3,
        fft_op * 1e3,
        100.0 * fft_op / get("operator/normal"),
        fft_t * 1e3
    );
    println!("paired rounds ({ROUNDS}): iteration time and FFT share from the fastest timings [range of single rounds' shares]");
    println!(
        "{:<16} {:>10} {:>11} {:>16} {:>11} {:>11} {:>11} {:>13} {:>13}",
        "method",
        "Rust ms/it",
        "best ms/it",
        "FFT share",
        "numpy ms/it",
        "scipy ms/it",
        "scipy-ky",
        "faster Py/Rust",
        "scipy-ky/Rust"
    );
    for id in METHODS {
        let t = per_it(id);
        let (paired, share, lo, hi) = best_of(&rounds[id]);
        let share = format!(
            "{:.0}% [{:.0}–{:.0}]",
            100.0 * share,
            100.0 * lo,
            100.0 * hi
        );
        let key = format!("{}_s", id.replace('-', "_"));
        let py: Vec<Option<f64>> = backends
            .iter()
            .map(|(_, v)| v.as_ref().and_then(|v| v[&key].as_f64()))
            .collect();
        let show = |v: Option<f64>| v.map_or("-".into(), |x| format!("{:.2}", x * 1e3));
        let ratio = |v: Option<f64>| v.map_or("-".into(), |x| format!("{:.1}×", x / t));
        let best = match (py[0], py[1]) {
            (Some(a), Some(b)) => Some(a.min(b)),
            (a, b) => a.or(b),
        };
        println!(
            "{:<16} {:>10.2} {:>11.2} {:>16} {:>11} {:>11} {:>11} {:>13} {:>13}",
            id,
            t * 1e3,
            paired * 1e3,
            share,
            show(py[0]),
            show(py[1]),
            show(py[2]),
            ratio(best),
            ratio(py[2])
        );
    }
}
