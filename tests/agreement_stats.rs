//! The agreement statistics against published worked examples and reference libraries
//! (`tests/fixtures/stats/stats_reference.json`, made by `make_stats_fixtures.py` with the
//! NumPy, SciPy, pingouin and scikit-image versions recorded in it).

use cinegauge::stats::bland_altman::{bland_altman, Options};
use cinegauge::stats::concordance::{lin_ccc, pearson};
use cinegauge::stats::dist::{f_quantile, t_quantile, z_quantile};
use cinegauge::stats::icc::{icc_all, mean_squares};
use cinegauge::stats::image_quality::{mean_in, nrmse, psnr, ssim, ssim_map};
use cinegauge::stats::overlap::{dice, hausdorff95};
use cinegauge::stats::paired::{paired_t, tost, wilcoxon};
use cinegauge::stats::sample_size::subjects_for_limits;
use cinegauge::stats::temporal::curve_error;
use cinegauge::stats::StatsError;
use ndarray::{Array2, Array3};
use serde_json::Value;

/// Bland & Altman 1986 (Lancet), Table 1: first PEF reading (l/min), Wright and mini Wright.
const WRIGHT: [f64; 17] = [
    494., 395., 516., 434., 476., 557., 413., 442., 650., 433., 417., 656., 267., 478., 178., 423.,
    427.,
];
const MINI: [f64; 17] = [
    512., 430., 520., 428., 500., 600., 364., 380., 658., 445., 432., 626., 260., 477., 259., 350.,
    451.,
];

/// Shrout & Fleiss 1979, Table 2: six targets rated by four judges.
fn shrout_fleiss() -> Vec<Vec<f64>> {
    [
        [9., 2., 5., 8.],
        [6., 1., 3., 2.],
        [8., 4., 6., 8.],
        [7., 1., 2., 6.],
        [10., 5., 6., 9.],
        [6., 2., 4., 7.],
    ]
    .iter()
    .map(|r| r.to_vec())
    .collect()
}

fn fixture() -> Value {
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/fixtures/stats/stats_reference.json"
    ))
    .unwrap();
    serde_json::from_str(&text).unwrap()
}

fn num(v: &Value) -> f64 {
    v.as_f64().unwrap()
}

fn close(a: f64, b: f64, tol: f64, what: &str) {
    assert!((a - b).abs() <= tol, "{what}: {a} vs {b} (tolerance {tol})");
}

#[test]
fn bland_altman_reproduces_the_lancet_peak_flow_example() {
    // Published (Bland & Altman 1986, section "Limits of agreement"): mean difference
    // −2.1 l/min, SD 38.8 l/min, limits (mean ± 2 SD) −79.7 to 75.5 l/min; printed to 0.1,
    // so checked to 0.05. The paper's limits come from the rounded mean and SD
    // (−2.1 ∓ 2·38.8), so the unrounded ones are checked to 0.1.
    let ba = bland_altman(&WRIGHT, &MINI, Options::default()).unwrap();
    close(ba.bias.value, -2.1, 0.05, "bias");
    close(ba.sd_diff, 38.8, 0.05, "SD of differences");
    close(
        ba.bias.value - 2.0 * ba.sd_diff,
        -79.7,
        0.1,
        "lower limit (2 SD)",
    );
    close(
        ba.bias.value + 2.0 * ba.sd_diff,
        75.5,
        0.1,
        "upper limit (2 SD)",
    );
    let r1 = |x: f64| (x * 10.0).round() / 10.0;
    close(
        r1(ba.bias.value) - 2.0 * r1(ba.sd_diff),
        -79.7,
        1e-9,
        "from rounded values",
    );
    close(
        r1(ba.bias.value) + 2.0 * r1(ba.sd_diff),
        75.5,
        1e-9,
        "from rounded values",
    );
    // 1.96 SD limits and the bias interval: the bias interval is SciPy's paired t interval
    // (ttest_rel(...).confidence_interval(0.95)), to 1e-9 (floating point only).
    let f = fixture();
    let ci = &f["pef"]["paired_t"]["ci"];
    close(ba.bias.ci_lower, num(&ci[0]), 1e-9, "bias CI lower");
    close(ba.bias.ci_upper, num(&ci[1]), 1e-9, "bias CI upper");
    // A limit's standard error: the 1986 paper's approximation √(3s²/n) is within 1 % of the
    // 1999 form used here for n = 17 (variance 3/17 against 1/17 + 1.96²/32).
    let se = (ba.loa_upper.ci_upper - ba.loa_upper.value) / t_quantile(0.975, 16.0);
    let approx = (3.0 * ba.sd_diff.powi(2) / 17.0).sqrt();
    assert!(
        (se / approx - 1.0).abs() < 0.01,
        "SE {se} vs √(3s²/n) {approx}"
    );
    // Proportional bias: SciPy's linregress of difference on mean, to 1e-9.
    let reg = &f["pef"]["regression"];
    let p = ba.proportional.unwrap();
    close(p.slope, num(&reg["slope"]), 1e-9, "slope");
    close(p.intercept, num(&reg["intercept"]), 1e-7, "intercept");
    close(p.slope_se, num(&reg["slope_se"]), 1e-9, "slope SE");
    close(p.p_value, num(&reg["p"]), 1e-9, "slope p");
}

#[test]
fn percentage_differences_are_relative_to_the_pair_mean() {
    // Analytic: b = 1.1·a gives every difference 100·(a − 1.1a)/(1.05a) = −9.5238 %, so the
    // bias is that and the SD is zero (refused); with one pair changed, the bias moves.
    let a = [100.0, 150.0, 200.0, 250.0];
    let b: Vec<f64> = a.iter().map(|x| 1.1 * x).collect();
    let opts = Options {
        percentage: true,
        ..Options::default()
    };
    assert!(matches!(
        bland_altman(&a, &b, opts),
        Err(StatsError::ZeroVariance { .. })
    ));
    let mut b2 = b.clone();
    b2[0] = 100.0;
    let ba = bland_altman(&a, &b2, opts).unwrap();
    let expected = (0.0 + 3.0 * (-10.0 / 1.05)) / 4.0;
    close(ba.bias.value, expected, 1e-12, "percentage bias");
}

#[test]
fn icc_reproduces_shrout_and_fleiss_table_4() {
    // Shrout & Fleiss 1979, Table 3 (mean squares) and Table 4 (the six ICCs), printed to two
    // decimals: checked to 0.005. Intervals: pingouin's intraclass_corr (rounded by it to
    // two decimals), checked to 0.006.
    let ms = mean_squares(&shrout_fleiss()).unwrap();
    close(ms.bms, 11.24, 0.005, "BMS");
    close(ms.wms, 6.26, 0.005, "WMS");
    close(ms.jms, 32.49, 0.005, "JMS");
    close(ms.ems, 1.02, 0.005, "EMS");
    let all = icc_all(&shrout_fleiss(), 0.95).unwrap();
    let published = [
        ("1,1", 0.17, "ICC(1,1)"),
        ("A,1", 0.29, "ICC(A,1)"),
        ("C,1", 0.71, "ICC(C,1)"),
        ("1,k", 0.44, "ICC(1,k)"),
        ("A,k", 0.62, "ICC(A,k)"),
        ("C,k", 0.91, "ICC(C,k)"),
    ];
    let f = fixture();
    for (form, value, pg) in published {
        let icc = all.iter().find(|i| i.form == form).unwrap();
        close(icc.value, value, 0.005, form);
        let r = &f["icc_sf"][pg];
        close(
            icc.value,
            num(&r["icc"]),
            1e-9,
            &format!("{form} vs pingouin"),
        );
        close(
            icc.ci_lower.expect("defined for this data"),
            num(&r["ci"][0]),
            0.006,
            &format!("{form} CI lower"),
        );
        close(
            icc.ci_upper.expect("defined for this data"),
            num(&r["ci"][1]),
            0.006,
            &format!("{form} CI upper"),
        );
        close(icc.f, num(&r["f"]), 1e-9, &format!("{form} F"));
        close(icc.p_value, num(&r["p"]), 1e-9, &format!("{form} p"));
    }
}

#[test]
fn quantiles_match_published_tables_and_scipy() {
    // Published tables (e.g. Fisher & Yates; any statistics text): t(0.975, 16) = 2.120,
    // t(0.975, 5) = 2.571, F(0.975; 5, 15) = 3.576, F(0.95; 3, 10) = 3.71, z(0.975) = 1.960,
    // printed to three or four figures; SciPy's values (fixture) to 1e-9.
    close(t_quantile(0.975, 16.0), 2.120, 0.0005, "t(0.975,16)");
    close(t_quantile(0.975, 5.0), 2.571, 0.0005, "t(0.975,5)");
    close(f_quantile(0.975, 5.0, 15.0), 3.576, 0.0005, "F(0.975;5,15)");
    close(f_quantile(0.95, 3.0, 10.0), 3.71, 0.005, "F(0.95;3,10)");
    close(z_quantile(0.975), 1.960, 0.0005, "z(0.975)");
    let q = &fixture()["quantiles"];
    close(
        t_quantile(0.975, 16.0),
        num(&q["t_0975_16"]),
        1e-9,
        "t vs SciPy",
    );
    close(
        t_quantile(0.975, 5.0),
        num(&q["t_0975_5"]),
        1e-9,
        "t vs SciPy",
    );
    close(
        f_quantile(0.975, 5.0, 15.0),
        num(&q["f_0975_5_15"]),
        1e-8,
        "F vs SciPy",
    );
    close(
        f_quantile(0.95, 3.0, 10.0),
        num(&q["f_095_3_10"]),
        1e-8,
        "F vs SciPy",
    );
    close(z_quantile(0.975), num(&q["z_0975"]), 1e-9, "z vs SciPy");
}

#[test]
fn paired_tests_match_scipy_and_pingouin() {
    let f = fixture();
    let pef = &f["pef"];
    // SciPy ttest_rel, to 1e-9.
    let t = paired_t(&WRIGHT, &MINI, 0.95).unwrap();
    close(t.t, num(&pef["paired_t"]["t"]), 1e-9, "t");
    close(t.p_value, num(&pef["paired_t"]["p"]), 1e-9, "p");
    // SciPy wilcoxon: tied magnitudes here, so the normal approximation with the tie
    // correction; to 1e-9.
    let w = wilcoxon(&WRIGHT, &MINI).unwrap();
    assert!(!w.exact);
    close(w.statistic, num(&pef["wilcoxon"]["statistic"]), 0.0, "W");
    close(w.p_value, num(&pef["wilcoxon"]["p"]), 1e-9, "Wilcoxon p");
    // No ties: SciPy's exact distribution (p = 20/512).
    let ex = &f["wilcoxon_exact"];
    let x: Vec<f64> = ex["x"].as_array().unwrap().iter().map(num).collect();
    let y: Vec<f64> = ex["y"].as_array().unwrap().iter().map(num).collect();
    let w = wilcoxon(&x, &y).unwrap();
    assert!(w.exact);
    close(w.statistic, num(&ex["statistic"]), 0.0, "W exact");
    close(w.p_value, num(&ex["p"]), 1e-12, "exact p");
    // pingouin tost(paired=True, bound=20), to 1e-9; 20 l/min is shown equivalent at 5 %.
    let e = tost(&WRIGHT, &MINI, 20.0, 0.05).unwrap();
    close(e.p_value, num(&pef["tost_bound_20"]["p"]), 1e-9, "TOST p");
    assert!(e.equivalent);
    assert!(!tost(&WRIGHT, &MINI, 10.0, 0.05).unwrap().equivalent);
    // Pearson r and its Fisher-z interval: SciPy pearsonr, to 1e-9.
    let r = pearson(&WRIGHT, &MINI, 0.95).unwrap();
    close(r.value, num(&pef["pearson"]["r"]), 1e-12, "r");
    close(
        r.ci_lower,
        num(&pef["pearson"]["ci"][0]),
        1e-9,
        "r CI lower",
    );
    close(
        r.ci_upper,
        num(&pef["pearson"]["ci"][1]),
        1e-9,
        "r CI upper",
    );
}

#[test]
fn concordance_matches_its_analytic_values() {
    // Lin 1989: ρc = 2·s_xy / (s_x² + s_y² + (x̄ − ȳ)²). Identical columns give 1; a shift
    // by c gives 2s²/(2s² + c²) exactly (population moments); a scale b·x gives
    // 2b·s²/(s²(1 + b²)).
    let x = [1.0, 2.0, 3.0, 4.0, 5.0, 6.0];
    let s2 = 17.5 / 6.0;
    close(lin_ccc(&x, &x, 0.95).unwrap().value, 1.0, 1e-12, "identity");
    let shifted: Vec<f64> = x.iter().map(|v| v + 1.5).collect();
    let c = lin_ccc(&x, &shifted, 0.95).unwrap();
    close(c.value, 2.0 * s2 / (2.0 * s2 + 2.25), 1e-12, "shift");
    assert!(c.ci_lower < c.value && c.value < c.ci_upper);
    let scaled: Vec<f64> = x.iter().map(|v| 2.0 * v).collect();
    let m = 3.5;
    let expected = 2.0 * 2.0 * s2 / (s2 + 4.0 * s2 + m * m);
    close(
        lin_ccc(&x, &scaled, 0.95).unwrap().value,
        expected,
        1e-12,
        "scale",
    );
}

#[test]
fn dice_and_hausdorff_match_analytic_shapes() {
    // Two 10 × 10 squares overlapping in a 10 × 6 strip: Dice = 2·60/200 = 0.6 exactly.
    let mut a = Array3::from_elem((1, 40, 40), false);
    let mut b = a.clone();
    a.slice_mut(ndarray::s![0, 5..15, 5..15]).fill(true);
    b.slice_mut(ndarray::s![0, 5..15, 9..19]).fill(true);
    close(dice(a.iter(), b.iter()).unwrap(), 0.6, 1e-12, "Dice");
    // Concentric discs of radius 8 and 12 px at 1.5 mm: every boundary point of one lies
    // (12 − 8)·1.5 = 6 mm from the other's, within a pixel's diagonal of boundary
    // discretisation (1.5·√2 ≈ 2.1 mm).
    let disc = |r: f64| {
        Array3::from_shape_fn((1, 64, 64), |(_, y, x)| {
            (y as f64 - 32.0).hypot(x as f64 - 32.0) <= r
        })
    };
    let hd = hausdorff95(disc(8.0).view(), disc(12.0).view(), (8.0, 1.5, 1.5)).unwrap();
    assert!((hd - 6.0).abs() <= 2.1, "HD95 {hd}");
    close(
        hausdorff95(disc(8.0).view(), disc(8.0).view(), (8.0, 1.5, 1.5)).unwrap(),
        0.0,
        0.0,
        "identical",
    );
    // The same disc on the next slice (10 mm spacing): every point 10 mm away.
    let mut two = Array3::from_elem((2, 64, 64), false);
    two.slice_mut(ndarray::s![1, .., ..])
        .assign(&disc(8.0).slice(ndarray::s![0, .., ..]));
    let mut one = Array3::from_elem((2, 64, 64), false);
    one.slice_mut(ndarray::s![0, .., ..])
        .assign(&disc(8.0).slice(ndarray::s![0, .., ..]));
    close(
        hausdorff95(one.view(), two.view(), (10.0, 1.5, 1.5)).unwrap(),
        10.0,
        1e-12,
        "slice",
    );
    assert!(hausdorff95(
        one.view(),
        Array3::from_elem((2, 64, 64), false).view(),
        (10.0, 1.5, 1.5)
    )
    .is_none());
}

#[test]
fn ssim_psnr_nrmse_match_scikit_image() {
    // scikit-image structural_similarity (gaussian_weights, σ 1.5, K1 0.01, K2 0.03,
    // population covariance) and peak_signal_noise_ratio on committed images, within 1e-4
    // (the issue's tolerance; the difference is floating-point summation order).
    let dir = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/fixtures/stats/");
    let a: Array2<f64> = ndarray_npy::read_npy(format!("{dir}ssim_a.npy")).unwrap();
    let b: Array2<f64> = ndarray_npy::read_npy(format!("{dir}ssim_b.npy")).unwrap();
    let m: Array2<u8> = ndarray_npy::read_npy(format!("{dir}ssim_mask.npy")).unwrap();
    let mask = m.mapv(|v| v != 0);
    let f = fixture();
    let s = &f["ssim"];
    let range = num(&s["data_range"]);
    close(
        ssim(b.view(), a.view(), range),
        num(&s["mssim"]),
        1e-4,
        "mean SSIM",
    );
    let map = ssim_map(b.view(), a.view(), range);
    close(
        mean_in(map.view(), mask.view()).unwrap(),
        num(&s["ssim_in_mask"]),
        1e-4,
        "SSIM in mask",
    );
    close(
        psnr(b.view(), a.view(), range).unwrap(),
        num(&s["psnr"]),
        1e-4,
        "PSNR",
    );
    close(
        nrmse(b.view(), a.view()).unwrap(),
        num(&s["nrmse"]),
        1e-9,
        "NRMSE",
    );
    close(
        ssim(a.view(), a.view(), range),
        1.0,
        1e-12,
        "SSIM of an image with itself",
    );
}

#[test]
fn curve_error_and_sample_size_follow_their_definitions() {
    // Analytic: a curve 3 ml above the reference in every frame has RMS 3 ml and max 3 ml.
    let r = [150.0, 120.0, 80.0, 60.0, 90.0, 140.0];
    let c: Vec<f64> = r.iter().map(|v| v + 3.0).collect();
    let e = curve_error(&c, &r).unwrap();
    close(e.rms_ml, 3.0, 1e-12, "RMS");
    close(e.max_abs_ml, 3.0, 1e-12, "max");
    close(e.rms_pct_of_edv, 2.0, 1e-12, "RMS % of EDV");
    // Sample size: with bias 0, SD 2 pp and margin 5 pp the limits (±3.92) need their CI
    // half-width below 1.08 pp; the returned n meets it and n − 1 does not (the definition,
    // checked with the t quantile of the published tables' kind).
    let n = subjects_for_limits(0.0, 2.0, 5.0, 0.95, 0.95).unwrap();
    let half = |n: f64| {
        t_quantile(0.975, n - 1.0) * 2.0 * (1.0 / n + 1.96f64.powi(2) / (2.0 * (n - 1.0))).sqrt()
    };
    let z = z_quantile(0.975);
    assert!(
        z * 2.0 + half(n as f64) <= 5.0 + 1e-9 && z * 2.0 + half(n as f64 - 1.0) > 5.0 - 1e-3,
        "n = {n}"
    );
    assert!(
        subjects_for_limits(1.5, 2.0, 5.0, 0.95, 0.95).is_none(),
        "1.5 + 3.92 > 5"
    );
    // Bland's worked figure (from memory: his note on sample size for agreement studies): with
    // 100 subjects the 95 % CI of each limit is about ±0.34 SD. So a margin of 1.96 + 0.34 SD
    // needs about 100 subjects (95 to 105: the note rounds to two decimals).
    let n = subjects_for_limits(0.0, 1.0, 1.96 + 0.34, 0.95, 0.95).unwrap();
    assert!((95..=105).contains(&n), "n = {n}");
}

#[test]
fn bad_input_is_refused_with_the_reason() {
    assert!(matches!(
        bland_altman(&[1.0, 2.0], &[1.0, 2.0], Options::default()),
        Err(StatsError::TooFew { n: 2, min: 3, .. })
    ));
    assert!(matches!(
        bland_altman(&[1.0, 2.0, 3.0], &[1.0, 2.0], Options::default()),
        Err(StatsError::Unequal { a: 3, b: 2, .. })
    ));
    assert!(matches!(
        paired_t(&[1.0, f64::NAN, 3.0], &[1.0, 2.0, 3.0], 0.95),
        Err(StatsError::NonFinite { index: 2, .. })
    ));
    assert!(matches!(
        paired_t(&[1.0, 2.0, 3.0], &[0.0, 1.0, 2.0], 0.95),
        Err(StatsError::ZeroVariance { .. })
    ));
    let e = icc_all(&[vec![1.0, 1.0], vec![2.0, 2.0], vec![3.0, 3.0]], 0.95).unwrap_err();
    assert!(e.to_string().contains("zero variance"), "{e}");
}

/// Fidelity of a reconstruction to itself: NRMSE 0, PSNR undefined (no error), SSIM 1, Dice 1
/// and Hausdorff 0 (definitions); and a mask shifted by one pixel lowers Dice below 1 and
/// gives a Hausdorff distance of one pixel (2 mm).
#[test]
fn fidelity_of_identical_and_shifted_series() {
    use cinegauge::fidelity::fidelity;
    use cinegauge::geometry::Geometry;
    use ndarray::Array4;
    let geom = Geometry {
        row_spacing_mm: 2.0,
        col_spacing_mm: 2.0,
        slice_thickness_mm: 8.0,
        slice_spacing_mm: 10.0,
        trigger_times_ms: vec![0.0, 40.0],
        rr_interval_ms: None,
    };
    let img = Array4::from_shape_fn((2, 2, 32, 32), |(s, f, r, c)| {
        ((r as f32 - 16.0).hypot(c as f32 - 16.0) < 6.0 + s as f32 + f as f32) as u8 as f32 + 0.1
    });
    let masks = img.mapv(|v| v > 0.5);
    let same = fidelity(
        img.view(),
        img.view(),
        masks.view(),
        masks.view(),
        &geom,
        (0, 1),
    );
    assert_eq!(same.nrmse, Some(0.0));
    assert_eq!(same.psnr_db, None);
    close(same.ssim, 1.0, 1e-12, "SSIM");
    assert_eq!(same.dice_ed, Some(1.0));
    assert_eq!(same.hd95_es_mm, Some(0.0));
    let mut shifted = Array4::from_elem(masks.dim(), false);
    shifted
        .slice_mut(ndarray::s![.., .., 1.., ..])
        .assign(&masks.slice(ndarray::s![.., .., ..31, ..]));
    let moved = fidelity(
        img.view(),
        img.view(),
        shifted.view(),
        masks.view(),
        &geom,
        (0, 1),
    );
    assert!(moved.dice_ed.unwrap() < 1.0);
    close(
        moved.hd95_ed_mm.unwrap(),
        2.0,
        1e-12,
        "HD95 of a one-pixel shift",
    );
}

/// Weighted kappa (Cohen 1968) against scikit-learn's `cohen_kappa_score` with labels 1..5
/// (fixture `kappa.json`, made by `make_kappa_fixture.py`). Tolerance 1e-12: the same sums
/// in a different order.
#[test]
fn weighted_kappa_matches_scikit_learn() {
    use cinegauge::stats::kappa::{weighted_kappa, Weights};
    let path =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/stats/kappa.json");
    let f: Value = serde_json::from_slice(&std::fs::read(path).unwrap()).unwrap();
    let cases = f["cases"].as_array().unwrap();
    assert_eq!(cases.len(), 4);
    for c in cases {
        let col = |k: &str| -> Vec<u32> {
            c[k].as_array()
                .unwrap()
                .iter()
                .map(|v| v.as_u64().unwrap() as u32)
                .collect()
        };
        let (a, b) = (col("a"), col("b"));
        for (w, key) in [
            (Weights::Linear, "linear"),
            (Weights::Quadratic, "quadratic"),
        ] {
            let k = weighted_kappa(&a, &b, (1, 5), w).unwrap();
            let expected = c[key].as_f64().unwrap();
            assert!((k - expected).abs() < 1e-12, "{key}: {k} vs {expected}");
        }
    }
}
