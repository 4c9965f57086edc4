//! Method of discs against analytic solid geometry.

use cinegauge::geometry::Geometry;
use cinegauge::measure::{measure, volumetry_from_areas, MeasureError, PhaseChoice};
use cinegauge::phantom::anatomy::{ellipsoid_slab_volume, truncated_ellipsoid_volume};
use cinegauge::tolerances::DISC_SUM_REL_FINE;
use ndarray::Array4;
use std::f64::consts::PI;

fn geometry(spacing: f64, frames: usize, px: f64) -> Geometry {
    Geometry {
        row_spacing_mm: px,
        col_spacing_mm: px,
        slice_thickness_mm: spacing,
        slice_spacing_mm: spacing,
        trigger_times_ms: (0..frames).map(|f| f as f64 * 40.0).collect(),
        rr_interval_ms: Some(40.0 * frames as f64),
    }
}

/// Discs of thickness h through an ellipsoid with semi-axes (a, b, c): cross-section area
/// at each disc centre is π·a·b·(1 − z²/c²).
fn disc_areas(a: f64, b: f64, c: f64, h: f64) -> Vec<Vec<f64>> {
    let n = (2.0 * c / h).round() as usize;
    (0..n)
        .map(|k| {
            let z = -c + (k as f64 + 0.5) * h;
            vec![PI * a * b * (1.0 - (z / c).powi(2)).max(0.0)]
        })
        .collect()
}

#[test]
fn disc_sum_converges_to_the_ellipsoid_volume() {
    // Source: volume of an ellipsoid, 4/3·π·a·b·c (textbook solid geometry). The midpoint
    // disc sum underestimates by π·a·b·h²·(2c)/(12·c²)·... ∝ h², so halving h quarters the error.
    let (a, b, c) = (25.0, 22.0, 45.0);
    let exact = 4.0 / 3.0 * PI * a * b * c / 1000.0;
    let mut last = f64::INFINITY;
    for h in [10.0, 5.0, 2.5, 1.0, 0.5] {
        let v = volumetry_from_areas(
            disc_areas(a, b, c, h),
            &geometry(h, 1, 1.0),
            PhaseChoice::default(),
        )
        .unwrap();
        let err = ((v.numbers.edv_ml - exact) / exact).abs();
        assert!(
            err < last,
            "error must shrink as discs get thinner: h={h} err={err} previous {last}"
        );
        last = err;
    }
    assert!(
        last < DISC_SUM_REL_FINE,
        "0.5 mm discs: relative error {last}"
    );
}

#[test]
fn rasterised_ellipsoid_masks_give_the_volume() {
    // Source: 4/3·π·a·b·c (textbook); masks at 0.25 mm pixels and 0.5 mm discs. Pixel
    // counting of an ellipse has an error of order perimeter × pixel / area ≈ 1 %/mm of
    // pixel; at 0.25 mm the bound of 0.5 % holds with margin.
    let (a, b, c) = (12.0, 9.0, 20.0);
    let (px, h) = (0.25, 0.5);
    let n = (2.0 * c / h) as usize;
    let size = (2.0 * a / px) as usize + 8;
    let mut masks = Array4::<bool>::from_elem((n, 1, size, size), false);
    for k in 0..n {
        let z = -c + (k as f64 + 0.5) * h;
        let s = (1.0 - (z / c).powi(2)).max(0.0).sqrt();
        for r in 0..size {
            for col in 0..size {
                let y = (r as f64 - (size as f64 - 1.0) / 2.0) * px;
                let x = (col as f64 - (size as f64 - 1.0) / 2.0) * px;
                masks[(k, 0, r, col)] =
                    s > 0.0 && (x / (a * s)).powi(2) + (y / (b * s)).powi(2) <= 1.0;
            }
        }
    }
    let v = measure(masks.view(), &geometry(h, 1, px), PhaseChoice::default()).unwrap();
    let exact = 4.0 / 3.0 * PI * a * b * c / 1000.0;
    assert!(
        ((v.numbers.edv_ml - exact) / exact).abs() < 5e-3,
        "{} vs {exact}",
        v.numbers.edv_ml
    );
}

#[test]
fn truncated_ellipsoid_formula_agrees_with_integration() {
    // Source: integral of π·a·b·(1 − u²/c²) du (textbook). At τ = 1 the truncated volume is
    // the whole ellipsoid 4/3·π·a·b·c; at τ = 0 it is the half ellipsoid 2/3·π·a·b·c.
    let (a, b, c) = (20.0, 18.0, 40.0);
    let whole = 4.0 / 3.0 * PI * a * b * c;
    assert!((truncated_ellipsoid_volume(a, b, c, c) - whole).abs() / whole < 1e-12);
    assert!((truncated_ellipsoid_volume(a, b, c, 0.0) - whole / 2.0).abs() / whole < 1e-12);
    let h = 0.8 * c;
    let slabs: f64 = (0..200)
        .map(|i| {
            let z0 = -c + i as f64 * (2.0 * c / 200.0);
            ellipsoid_slab_volume(a, b, c, 0.0, h, z0, z0 + 2.0 * c / 200.0)
        })
        .sum();
    let v = truncated_ellipsoid_volume(a, b, c, h);
    assert!((slabs - v).abs() / v < 1e-12, "{slabs} vs {v}");
}

#[test]
fn ef_bounds_and_phase_rules() {
    // Definitions: ED = largest volume, ES = smallest; EF = 100·(EDV − ESV)/EDV lies in
    // [0, 100] and EDV ≥ ESV. Worked example: EDV 120 ml, ESV 50 ml → SV 70 ml, EF 58.33 %.
    let areas: Vec<Vec<f64>> = vec![vec![6000.0, 4000.0, 2500.0, 5000.0]; 2];
    let g = geometry(10.0, 4, 1.0);
    let v = volumetry_from_areas(areas, &g, PhaseChoice::default()).unwrap();
    assert_eq!((v.numbers.ed_frame, v.numbers.es_frame), (0, 2));
    assert!((v.numbers.edv_ml - 120.0).abs() < 1e-9 && (v.numbers.esv_ml - 50.0).abs() < 1e-9);
    assert!((v.numbers.ef_pct - 58.333_333_333).abs() < 1e-6);
    assert!(v.numbers.edv_ml >= v.numbers.esv_ml && (0.0..=100.0).contains(&v.numbers.ef_pct));
    // Peak rates by differences (hand-worked): frames 40 ms apart, V = 120, 80, 50, 100 ml.
    // dV/dt: frame 0 (one-sided) (80 − 120)/40 ms = −1000 ml/s; frame 1 (50 − 120)/80 = −875;
    // frame 2 (100 − 80)/80 = 250; frame 3 (one-sided) (100 − 50)/40 = 1250 ml/s.
    assert!(
        (v.numbers.peak_ejection_rate_ml_s.unwrap() - 1000.0).abs() < 1e-9,
        "{:?}",
        v.numbers.peak_ejection_rate_ml_s
    );
    assert!((v.numbers.peak_filling_rate_ml_s.unwrap() - 1250.0).abs() < 1e-9);
    assert!((v.numbers.heart_rate_bpm.unwrap() - 375.0).abs() < 1e-9);
}

#[test]
fn empty_blood_pool_is_an_error_not_nan() {
    let g = geometry(10.0, 3, 1.0);
    let e = volumetry_from_areas(vec![vec![0.0; 3]; 4], &g, PhaseChoice::default()).unwrap_err();
    assert_eq!(e, MeasureError::Empty);
    let e = volumetry_from_areas(
        vec![vec![1.0; 3]],
        &g,
        PhaseChoice {
            ed_frame: Some(5),
            es_frame: None,
        },
    )
    .unwrap_err();
    assert!(matches!(e, MeasureError::FixedFrame { frame: 5, .. }));
}
