//! Speed of segmentation and measurement on a 12-slice × 25-frame × 192 × 160 stack (the
//! fully sampled reconstruction of a synthetic subject), on one core and on all cores, side
//! by side with a flood-fill reference in scikit-image (benches/reference/segment_ref.py).
//!
//! Run: `cargo bench -p cinegauge-bench --bench segment` (the reference needs python3 with
//! numpy, scipy and scikit-image; without them the Rust figures alone are printed).

use std::cell::RefCell;
use std::process::Command;
use std::time::Instant;

use cinegauge::phantom::{Phantom, PhantomSpec};
use cinegauge::pipeline::{self, RunRequest};
use cinegauge::recon;
use cinegauge::sampling::SamplingSpec;
use cinegauge::segment::SegmentParams;
use criterion::Criterion;
use ndarray_npy::WriteNpyExt;

fn main() {
    let spec = PhantomSpec {
        slices: 12,
        frames: 25,
        rows: 192,
        cols: 160,
        pixel_mm: 1.6,
        coils: 4,
        ..PhantomSpec::default()
    };
    let ph = Phantom::new(spec).expect("valid phantom");
    let run = [RunRequest::with_defaults(
        recon::by_id("reference").expect("registered"),
        SamplingSpec::full(),
    )];
    let stack = pipeline::reconstruct_phantom(&ph, &run, &Default::default())
        .expect("reconstructs")
        .remove(0)
        .stack
        .expect("stack");
    let geom = ph.geometry();
    let seeds = [pipeline::phantom_seed(&ph)];
    let params = SegmentParams::default();
    let one = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .expect("pool");
    let times = RefCell::new(Vec::<(&str, f64)>::new());
    let mut c = Criterion::default().sample_size(10).configure_from_args();
    for (name, single) in [
        ("segment+measure/1-thread", true),
        ("segment+measure/all-threads", false),
    ] {
        c.bench_function(name, |b| {
            b.iter_custom(|n| {
                let t = Instant::now();
                for _ in 0..n {
                    let go = || pipeline::measure_series(stack.view(), &geom, &seeds, &params);
                    let r = if single { one.install(go) } else { go() };
                    std::hint::black_box(r.expect("segments"));
                }
                let e = t.elapsed();
                times.borrow_mut().push((name, e.as_secs_f64() / n as f64));
                e
            })
        });
    }
    c.final_summary();
    let median = |name: &str| {
        let mut v: Vec<f64> = times
            .borrow()
            .iter()
            .filter(|(n, _)| *n == name)
            .map(|(_, t)| *t)
            .collect();
        v.sort_by(f64::total_cmp);
        v.get(v.len() / 2).copied()
    };
    let (Some(t1), Some(tn)) = (
        median("segment+measure/1-thread"),
        median("segment+measure/all-threads"),
    ) else {
        return; // a filtered run
    };
    let dir = tempfile::tempdir().expect("temporary folder");
    let file = dir.path().join("stack.npy");
    stack
        .write_npy(std::fs::File::create(&file).expect("create"))
        .expect("write");
    let s = seeds[0];
    let script = concat!(env!("CARGO_MANIFEST_DIR"), "/reference/segment_ref.py");
    let py = Command::new("python3")
        .arg(script)
        .arg(&file)
        .args([s.slice, s.frame, s.row, s.col].map(|v| v.to_string()))
        .output()
        .ok()
        .filter(|o| o.status.success())
        .and_then(|o| serde_json::from_slice::<serde_json::Value>(&o.stdout).ok())
        .and_then(|v| v["seconds"].as_f64());
    let (ns, nf, nr, nc) = stack.dim();
    println!();
    println!("segmentation and measurement of {ns} slices × {nf} frames × {nr} × {nc}, criterion medians");
    println!("Rust, one core:   {:>8.1} ms", t1 * 1e3);
    println!("Rust, all cores:  {:>8.1} ms", tn * 1e3);
    match py {
        Some(p) => println!(
            "scikit-image flood reference (one core): {:.1} ms; reference / Rust one core: {:.1}×",
            p * 1e3,
            p / t1
        ),
        None => println!(
            "scikit-image reference did not run (python3 with numpy, scipy, scikit-image needed)"
        ),
    }
}
