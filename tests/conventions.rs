//! The demo's acquisition geometry against typical clinical cine values, the sampling
//! pattern's line counts, and the geometry sidecar rules.

use cinegauge::demo;
use cinegauge::geometry::{Geometry, GeometrySidecar};
use cinegauge::phantom::Phantom;
use cinegauge::sampling::{Pattern, SamplingSpec};

#[test]
fn demo_geometry_is_typical_of_clinical_cine() {
    // Common practice for short-axis cine (check values, not a standard): slice thickness
    // 6–8 mm with a 2–4 mm gap, 20–30 frames per R–R interval, in-plane pixels ≈1.5–2 mm.
    for s in demo::subjects(1) {
        let g = Phantom::new(s.spec.clone()).unwrap().geometry();
        assert!((6.0..=8.0).contains(&g.slice_thickness_mm), "{}", s.code);
        let gap = g.slice_spacing_mm - g.slice_thickness_mm;
        assert!((2.0..=4.0).contains(&gap), "{}: gap {gap}", s.code);
        assert!((20..=30).contains(&g.frames()), "{}", s.code);
        assert!((1.5..=2.0).contains(&g.row_spacing_mm) && (1.5..=2.0).contains(&g.col_spacing_mm));
        let rr = g.rr_interval_ms.unwrap();
        assert!((60_000.0 / rr - s.spec.heart_rate_bpm).abs() < 1e-9);
        assert!(
            g.trigger_times_ms.last().unwrap() < &rr,
            "frames lie within one R–R interval"
        );
    }
}

#[test]
fn equispaced_line_counts() {
    // Hand count for 112 lines, R = 4, 16 ACS lines centred on line 56: ACS lines 48..63,
    // plus lines at |ky − 56| divisible by 4 outside it: 0, 4, …, 44 (12) and 64, …, 108
    // (12): 40 lines, effective R = 112/40 = 2.8.
    let m = SamplingSpec::new(Pattern::Equispaced, 4.0, 16)
        .unwrap()
        .mask(3, 112)
        .unwrap();
    assert_eq!(m.lines.row(0).iter().filter(|&&b| b).count(), 40);
    assert!((m.accel_effective() - 2.8).abs() < 1e-12);
    // Line 64 is an equispaced line right after the ACS block, so the contiguous fully
    // sampled block is 48..=64.
    assert_eq!(m.calibration_block(), Some((48, 65)));
    let d = m.density();
    assert!((d[56] - 1.0).abs() < 1e-6 && (d[20] - 0.25).abs() < 1e-6);
    assert!(
        SamplingSpec::new(Pattern::Equispaced, 2.5, 16).is_err(),
        "equispaced needs a whole R"
    );
    assert!(
        SamplingSpec::new(Pattern::Equispaced, 30.0, 16).is_err(),
        "R above 24 refused"
    );
    assert!(SamplingSpec::new(Pattern::Equispaced, 4.0, 200)
        .unwrap()
        .mask(1, 112)
        .is_err());
    assert!(SamplingSpec::full().mask(2, 9).unwrap().is_full());
}

fn sidecar() -> GeometrySidecar {
    serde_json::from_str(
        r#"{"pixel_spacing_mm":[1.8,1.6],"slice_thickness_mm":8,"slice_spacing_mm":10,
            "frame_interval_ms":40,"rr_interval_ms":900,"vendor_extra":1}"#,
    )
    .unwrap()
}

#[test]
fn sidecar_rules() {
    let s = sidecar();
    assert_eq!(
        s.unknown.keys().collect::<Vec<_>>(),
        vec!["vendor_extra"],
        "unknown keys kept for a warning"
    );
    let g = Geometry::from_sidecar(&s, 20, "g.json").unwrap();
    assert_eq!(g.trigger_times_ms[19], 760.0);
    assert!((g.pixel_area_mm2() - 2.88).abs() < 1e-12);
    let mut bad = s.clone();
    bad.slice_spacing_mm = 6.0;
    let e = Geometry::from_sidecar(&bad, 20, "g.json")
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("g.json") && e.contains("slice_spacing_mm"),
        "{e}"
    );
    let mut bad = s.clone();
    bad.rr_interval_ms = Some(700.0);
    assert!(Geometry::from_sidecar(&bad, 20, "g.json")
        .unwrap_err()
        .to_string()
        .contains("rr_interval_ms"));
    let mut bad = s.clone();
    bad.trigger_times_ms = Some(vec![0.0; 20]);
    assert!(Geometry::from_sidecar(&bad, 20, "g.json")
        .unwrap_err()
        .to_string()
        .contains("not both"));
    let mut bad = s;
    bad.pixel_spacing_mm = vec![0.0, 1.0];
    assert!(Geometry::from_sidecar(&bad, 20, "g.json")
        .unwrap_err()
        .to_string()
        .contains("pixel_spacing_mm"));
}

#[test]
fn shipped_templates_and_demo_study_parse() {
    // The templates users copy must be accepted as they are.
    let root = env!("CARGO_MANIFEST_DIR");
    let seeds = cinegauge::segment::seeds::read_seeds(std::path::Path::new(&format!(
        "{root}/templates/seeds.toml"
    )))
    .unwrap();
    assert_eq!(seeds.len(), 1);
    let s = cinegauge::geometry::read_sidecar(std::path::Path::new(&format!(
        "{root}/templates/geometry.json"
    )))
    .unwrap();
    assert!(s.unknown.is_empty());
    Geometry::from_sidecar(&s, 20, "templates/geometry.json").unwrap();
    assert_eq!(demo::subjects(1).len(), 3);
    assert_eq!(
        demo::runs(1).len(),
        1 + 4 * 3,
        "reference + 4 methods × 3 accelerations"
    );
    let efs: Vec<f64> = demo::subjects(1).iter().map(|s| s.spec.ef_pct).collect();
    assert!(
        efs[0] >= 55.0 && (40.0..50.0).contains(&efs[1]) && efs[2] < 35.0,
        "normal, mildly and severely reduced EF"
    );
}
