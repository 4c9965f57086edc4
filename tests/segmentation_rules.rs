//! Segmentation rules on the synthetic phantom against its analytic truth (exact geometry:
//! `phantom::anatomy` and the papillary discs of `phantom::render`).

use cinegauge::demo;
use cinegauge::phantom::Phantom;
use cinegauge::pipeline::{self, RunRequest};
use cinegauge::recon;
use cinegauge::sampling::SamplingSpec;
use cinegauge::seed_jitter::seed_jitter;
use cinegauge::segment::{BloodPoolConvention, SegmentParams};

/// The fully sampled reconstruction of demo subject `k` and its phantom.
fn reference(k: usize) -> (Phantom, ndarray::Array4<f32>) {
    let subject = demo::subjects(1).remove(k);
    let ph = Phantom::new(subject.spec).expect("valid phantom");
    let run = [RunRequest::with_defaults(
        recon::by_id("reference").expect("registered"),
        SamplingSpec::full(),
    )];
    let stack = pipeline::reconstruct_phantom(&ph, &run, &Default::default())
        .expect("reconstructs")
        .remove(0)
        .stack
        .expect("stack");
    (ph, stack)
}

/// Excluding papillary muscles lowers EDV and ESV by the phantom's papillary volume (its
/// disc sum at the same frame) within 10 % of that volume (the acceptance value).
#[test]
fn excluding_papillary_muscles_removes_their_known_volume() {
    for subject in 0..3 {
        excluding_papillary_muscles_on(subject);
    }
}

fn excluding_papillary_muscles_on(subject: usize) {
    let (ph, stack) = reference(subject);
    let truth = ph.truth();
    let seeds = [pipeline::phantom_seed(&ph)];
    let geom = ph.geometry();
    let included = SegmentParams::default();
    let mut excluded = SegmentParams::default();
    excluded.grow.convention = BloodPoolConvention::PapillaryExcluded;
    let (seg_in, v_in) =
        pipeline::measure_series(stack.view(), &geom, &seeds, &included).expect("segments");
    let (seg_ex, v_ex) =
        pipeline::measure_series(stack.view(), &geom, &seeds, &excluded).expect("segments");
    assert_eq!(seg_in.convention, BloodPoolConvention::PapillaryIncluded);
    assert_eq!(seg_ex.convention, BloodPoolConvention::PapillaryExcluded);
    for (name, frame, with, without) in [
        (
            "ED",
            v_in.numbers.ed_frame,
            v_in.numbers.edv_ml,
            v_ex.numbers.volume_curve_ml[v_in.numbers.ed_frame],
        ),
        (
            "ES",
            v_in.numbers.es_frame,
            v_in.numbers.esv_ml,
            v_ex.numbers.volume_curve_ml[v_in.numbers.es_frame],
        ),
    ] {
        let expected = truth.papillary_volume_curve_ml[frame];
        let drop = with - without;
        assert!(
            expected > 1.0,
            "{name}: the phantom has papillary muscles ({expected:.2} ml)"
        );
        assert!(
            (drop - expected).abs() <= 0.10 * expected,
            "subject {subject}, {name} (frame {frame}): volume drop {drop:.2} ml, papillary volume {expected:.2} ml"
        );
    }
}

/// Seeds moved by 3 px in eight directions on the fully sampled phantom: every run measures
/// and EF changes by less than 1 pp (the acceptance value for the repeatability floor).
#[test]
fn three_pixel_seed_jitter_moves_ef_by_under_one_point() {
    for subject in 0..3 {
        let (ph, stack) = reference(subject);
        let seeds = [pipeline::phantom_seed(&ph)];
        let params = SegmentParams::default();
        let geom = ph.geometry();
        let (_, base) =
            pipeline::measure_series(stack.view(), &geom, &seeds, &params).expect("segments");
        let j = seed_jitter(stack.view(), &geom, &seeds, &params, 3, &base.numbers);
        assert_eq!(j.runs_ok, 8, "subject {subject}: {:?}", j.failed);
        let ef = j.ef_pct.expect("runs measured");
        assert!(
            ef.max_change < 1.0,
            "subject {subject}: EF moved {:.2} pp",
            ef.max_change
        );
    }
}
