//! DICOM cine series, checked against classic MR image files written by pydicom 3.0.2 from
//! synthetic data (tests/fixtures/dicom/make_dicom_fixtures.py): every displayed value is
//! 1000·slice + 100·frame + 10·row + col through RescaleSlope 0.5 / Intercept −10, the
//! orientation is oblique and double-angulated, the matrix non-square.

use std::path::PathBuf;

use cinegauge::io;

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
