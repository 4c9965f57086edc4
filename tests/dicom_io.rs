//! DICOM cine series, checked against classic MR image files written by pydicom 3.0.2 from
//! synthetic data (tests/fixtures/dicom/make_dicom_fixtures.py): every displayed value is
//! 1000·slice + 100·frame + 10·row + col through RescaleSlope 0.5 / Intercept −10, the
//! orientation is oblique and double-angulated, the matrix non-square.

use std::path::PathBuf;

use cinegauge::io;

use crate::common;

fn fixture(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures/dicom")
        .join(name)
}

fn check_stack(s: &io::npy::ImageSeries, what: &str) {
    assert_eq!(
        s.images.dim(),
        (3, 4, 6, 5),
        "{what}: [slice, frame, row, col]"
    );
    for ((sl, f, r, c), v) in s.images.indexed_iter() {
        // Exact: integers stored as uint16 with slope 0.5 and intercept −10 (exact in binary).
        let want = (1000 * sl + 100 * f + 10 * r + c) as f32;
        assert_eq!(*v, want, "{what} at {:?}", (sl, f, r, c));
    }
    let g = &s.geometry;
    assert_eq!(
        (g.row_spacing_mm, g.col_spacing_mm),
        (1.4, 1.6),
        "{what}: PixelSpacing"
    );
    assert_eq!(g.slice_thickness_mm, 8.0, "{what}: SliceThickness");
    // Positions were written rounded to 1e-4 mm per coordinate: spacing within 1e-3 mm.
    assert!(
        (g.slice_spacing_mm - 10.0).abs() < 1e-3,
        "{what}: {}",
        g.slice_spacing_mm
    );
    assert_eq!(
        g.trigger_times_ms,
        vec![0.0, 45.0, 90.0, 135.0],
        "{what}: TriggerTime"
    );
    assert_eq!(g.rr_interval_ms, Some(900.0), "{what}: NominalInterval");
}

#[test]
fn sorted_and_shuffled_folders_give_the_same_stack() {
    let sorted = io::read_images(&fixture("sorted"), None).unwrap();
    let shuffled = io::read_images(&fixture("shuffled"), None).unwrap();
    check_stack(&sorted, "sorted");
    check_stack(&shuffled, "shuffled");
    assert_eq!(sorted.images, shuffled.images);
    // Slices ascend along the normal (DESIGN.md): positions strictly increasing, 10 mm apart.
    let p = shuffled.positions_mm.unwrap();
    assert!(
        p.windows(2).all(|w| (w[1] - w[0] - 10.0).abs() < 1e-3),
        "{p:?}"
    );
}

#[test]
fn an_enhanced_multi_frame_file_gives_the_same_stack() {
    // The same images as one Enhanced MR Image file (frames shuffled, geometry and timing in
    // the per-frame and shared functional groups, rescale in PixelValueTransformation).
    let enhanced = io::read_images(&fixture("enhanced"), None).unwrap();
    check_stack(&enhanced, "enhanced");
    let sorted = io::read_images(&fixture("sorted"), None).unwrap();
    assert_eq!(enhanced.images, sorted.images);
    assert_eq!(enhanced.files.len(), 1);
}

#[test]
fn a_folder_with_two_series_asks_which_and_reads_the_chosen_one() {
    let err = io::read_images(&fixture("two_series"), None)
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("2 series") && err.contains("--series") && err.contains("localizer"),
        "{err}"
    );
    let cine = io::read_images(&fixture("two_series"), Some("cine short axis")).unwrap();
    check_stack(&cine, "two_series by description");
    let loc = io::read_images(
        &fixture("two_series"),
        Some("1.2.826.0.1.3680043.10.1000.9"),
    )
    .unwrap();
    assert_eq!(loc.images.dim(), (1, 2, 6, 5));
    let err = io::read_images(&fixture("two_series"), Some("no such series"))
        .unwrap_err()
        .to_string();
    assert!(err.contains("no such series"), "{err}");
}

#[test]
fn broken_series_are_refused_naming_the_file_and_attribute() {
    for (folder, names) in [
        (
            "bad_mixed_orientation",
            &["IM0011.dcm", "ImageOrientationPatient"][..],
        ),
        (
            "bad_unequal_frames",
            &["bad_unequal_frames", "unequal frame counts"][..],
        ),
        (
            "bad_duplicate_position",
            &["IM0012.dcm", "duplicate", "TriggerTime"][..],
        ),
        (
            "bad_missing_spacing",
            &["IM0005.dcm", "PixelSpacing (0028,0030)"][..],
        ),
        (
            "bad_truncated",
            &["IM0000.dcm", "not a readable DICOM file"][..],
        ),
        (
            "bad_jpeg2000",
            &[
                "IM0000.dcm",
                "1.2.840.10008.1.2.4.90",
                "JPEG 2000",
                "cannot be decoded",
            ][..],
        ),
    ] {
        let err = io::read_images(&fixture(folder), None)
            .unwrap_err()
            .to_string();
        for n in names {
            assert!(err.contains(n), "{folder}: `{n}` not in: {err}");
        }
    }
}

#[test]
fn measure_and_inspect_read_a_dicom_folder() {
    let exe = env!("CARGO_BIN_EXE_cinegauge");
    let out = std::process::Command::new(exe)
        .args(["inspect", "--json"])
        .arg(fixture("two_series"))
        .output()
        .unwrap();
    assert!(out.status.success());
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["series"].as_array().map(Vec::len), Some(2), "{v}");
    let out = std::process::Command::new(exe)
        .args(["inspect", "--json", "--series", "cine short axis"])
        .arg(fixture("two_series"))
        .output()
        .unwrap();
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(
        v["dims"],
        serde_json::json!({"slices": 3, "frames": 4, "rows": 6, "cols": 5})
    );
    assert_eq!(
        v["geometry"]["heart_rate_bpm"],
        serde_json::json!(60_000.0 / 900.0)
    );
}

#[test]
fn phantom_through_dicom_measures_the_same_as_in_memory() {
    // Round trip: rendered phantom → derived MR series written by this tool → read back by the
    // DICOM reader → measured, against the in-memory stack. Pixels go through 16 bits with a
    // slope of max/65535, so a voxel moves by at most half a step (1/131070 of the maximum);
    // geometry is exact to the 6 decimals of a DS value. Tolerance: 0.1 % on EDV and ESV and
    // 0.1 pp on EF (one boundary pixel flipping in one slice moves EDV by ~0.05 ml).
    use cinegauge::io::dicom::{write_dicom_series, SeriesLabel};
    use cinegauge::pipeline;
    use cinegauge::segment::SegmentParams;
    let (ph, stack, seed) = common::small_phantom_stack();
    let geom = ph.geometry();
    let dir = tempfile::tempdir().unwrap();
    let label = SeriesLabel {
        subject: "RT-01",
        description: "round trip",
        number: 5,
    };
    let files = write_dicom_series(dir.path(), stack.view(), &geom, &label).unwrap();
    assert_eq!(files.len(), 11 * 12);
    let back = io::read_images(dir.path(), None).unwrap();
    assert_eq!(back.images.dim(), stack.dim());
    let max = stack.iter().cloned().fold(0.0f32, f32::max);
    let worst = common::max_abs_diff(&back.images, &stack);
    assert!(worst <= max / 65535.0, "pixel error {worst} of max {max}");
    let g = &back.geometry;
    assert_eq!(
        (g.row_spacing_mm, g.slice_thickness_mm),
        (geom.row_spacing_mm, geom.slice_thickness_mm)
    );
    assert!((g.slice_spacing_mm - geom.slice_spacing_mm).abs() < 1e-6);
    let seeds = [seed];
    let params = SegmentParams::default();
    let (_, a) = pipeline::measure_series(stack.view(), &geom, &seeds, &params).unwrap();
    let (_, b) = pipeline::measure_series(back.images.view(), g, &seeds, &params).unwrap();
    let (a, b) = (a.numbers, b.numbers);
    assert!(
        (a.edv_ml - b.edv_ml).abs() <= 1e-3 * a.edv_ml,
        "EDV {} vs {}",
        a.edv_ml,
        b.edv_ml
    );
    assert!(
        (a.esv_ml - b.esv_ml).abs() <= 1e-3 * a.esv_ml,
        "ESV {} vs {}",
        a.esv_ml,
        b.esv_ml
    );
    assert!(
        (a.ef_pct - b.ef_pct).abs() <= 0.1,
        "EF {} vs {}",
        a.ef_pct,
        b.ef_pct
    );
    // Writing is deterministic: the same stack gives the same bytes.
    let again = tempfile::tempdir().unwrap();
    let files2 = write_dicom_series(again.path(), stack.view(), &geom, &label).unwrap();
    for (x, y) in files.iter().zip(&files2) {
        assert_eq!(
            std::fs::read(x).unwrap(),
            std::fs::read(y).unwrap(),
            "{}",
            x.display()
        );
    }
}

/// A tiny stack with known values: 2 slices × 2 frames × 4 rows × 3 cols, value
/// 100·slice + 10·frame + row + 0.25·col (the written series checked by pydicom).
fn tiny_stack() -> (ndarray::Array4<f32>, cinegauge::geometry::Geometry) {
    let stack = ndarray::Array4::from_shape_fn((2, 2, 4, 3), |(s, f, r, c)| {
        (100 * s + 10 * f + r) as f32 + 0.25 * c as f32
    });
    let sidecar: cinegauge::geometry::GeometrySidecar = serde_json::from_str(
        r#"{"pixel_spacing_mm": [1.5, 1.75], "slice_thickness_mm": 6.0, "slice_spacing_mm": 8.0,
            "trigger_times_ms": [0.0, 37.5], "rr_interval_ms": 800.0}"#,
    )
    .unwrap();
    let g = cinegauge::geometry::Geometry::from_sidecar(&sidecar, 2, "tiny").unwrap();
    (stack, g)
}

#[test]
fn written_series_matches_the_files_pydicom_accepted() {
    // tests/fixtures/dicom/written/ holds this writer's output for `tiny_stack`, read and
    // checked by pydicom 3.0.2 (check_written_with_pydicom.py: dcmread without force,
    // pixel values through the rescale, spacing, timing, valid UIDs). The writer must keep
    // producing exactly those bytes; after a deliberate change, regenerate with
    // CINEGAUGE_REGENERATE=1 and rerun the pydicom script.
    use cinegauge::io::dicom::{write_dicom_series, SeriesLabel};
    let (stack, g) = tiny_stack();
    let label = SeriesLabel {
        subject: "FX-02",
        description: "writer check",
        number: 3,
    };
    let committed = fixture("written");
    if std::env::var_os("CINEGAUGE_REGENERATE").is_some() {
        std::fs::create_dir_all(&committed).unwrap();
        write_dicom_series(&committed, stack.view(), &g, &label).unwrap();
    }
    let dir = tempfile::tempdir().unwrap();
    let files = write_dicom_series(dir.path(), stack.view(), &g, &label).unwrap();
    for f in files {
        let name = f.file_name().unwrap();
        let want = std::fs::read(committed.join(name)).unwrap();
        assert_eq!(
            std::fs::read(&f).unwrap(),
            want,
            "{name:?} differs from the checked file"
        );
    }
    let back = io::read_images(&committed, None).unwrap();
    let worst = common::max_abs_diff(&back.images, &stack);
    assert!(worst <= 110.5 / 65535.0, "pixel error {worst}");
}
