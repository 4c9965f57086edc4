//! NIfTI-1 reading and writing, checked against files written by nibabel 5.4.2
//! (tests/fixtures/nifti/make_nifti_fixtures.py) and by a round trip through the phantom.

use std::path::PathBuf;
use std::process::Command;

use cinegauge::io::{self, nifti};
use cinegauge::pipeline;
use cinegauge::segment::SegmentParams;

use crate::common;

fn fixture(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures/nifti")
        .join(name)
}

/// The fixture's value at (slice, frame, row, col): 1000·z + 100·t + 10·y + x with
/// x = col, y = row, z = slice, t = frame (DESIGN.md's NIfTI axis mapping).
fn expected(s: usize, f: usize, r: usize, c: usize) -> f32 {
    (1000 * s + 100 * f + 10 * r + c) as f32
}

#[test]
fn nibabel_files_read_with_axes_spacing_and_values_exact() {
    for name in ["cine.nii.gz", "scaled.nii"] {
        let s = io::read_images(&fixture(name), None).unwrap();
        assert_eq!(
            s.images.dim(),
            (3, 4, 5, 6),
            "{name}: [slice, frame, row, col]"
        );
        for ((sl, f, r, c), v) in s.images.indexed_iter() {
            // Exact: small integers, and slope 0.5 / intercept −3 are exact in binary.
            assert_eq!(*v, expected(sl, f, r, c), "{name} at {:?}", (sl, f, r, c));
        }
        let g = &s.geometry;
        // Sizes given in mm (cine) or metres (scaled) as float32: compare to 1e-6 relative.
        let close = |a: f64, b: f64| (a - b).abs() <= 1e-6 * b;
        assert!(close(g.col_spacing_mm, 1.5), "{name}: {}", g.col_spacing_mm);
        assert!(
            close(g.row_spacing_mm, 1.25),
            "{name}: {}",
            g.row_spacing_mm
        );
        assert!(
            close(g.slice_spacing_mm, 9.0),
            "{name}: {}",
            g.slice_spacing_mm
        );
        let dt = g.trigger_times_ms[1] - g.trigger_times_ms[0];
        assert!(close(dt, 40.0), "{name}: frame interval {dt}");
        assert!(s.warnings.iter().any(|w| w.contains("slice thickness")));
    }
}

#[test]
fn zero_voxel_size_is_refused_naming_the_field() {
    let err = io::read_images(&fixture("zero_pixdim.nii"), None)
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("zero_pixdim.nii") && err.contains("pixdim[1]"),
        "{err}"
    );
}

#[test]
fn wrong_magic_and_truncated_files_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let bytes = std::fs::read(fixture("scaled.nii")).unwrap();
    let mut wrong = bytes.clone();
    wrong[344..348].copy_from_slice(b"abc\0"); // the magic field (NIfTI-1 standard, offset 344)
    let cases = [
        ("wrong_magic.nii", wrong),
        ("truncated.nii", bytes[..400].to_vec()),
        ("empty.nii", Vec::new()),
    ];
    for (name, content) in cases {
        let p = dir.path().join(name);
        std::fs::write(&p, content).unwrap();
        let err = io::read_images(&p, None).unwrap_err().to_string();
        assert!(err.contains(name), "{name}: {err}");
    }
}

#[test]
fn phantom_through_nifti_measures_the_same_as_in_memory() {
    // Round trip: rendered phantom → .nii.gz → read back → measured, against the same
    // measurement of the in-memory stack. The images must come back bit for bit; volumes
    // may differ only by the float32 rounding of the voxel sizes in the header (1e-6).
    let (ph, stack, seed) = common::small_phantom_stack();
    let geom = ph.geometry();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("phantom.nii.gz");
    nifti::write_nifti_series(&path, stack.view(), &geom).unwrap();
    let back = io::read_images(&path, None).unwrap();
    assert_eq!(back.images, stack);
    let seeds = [seed];
    let params = SegmentParams::default();
    let (_, direct) = pipeline::measure_series(stack.view(), &geom, &seeds, &params).unwrap();
    let (_, read) =
        pipeline::measure_series(back.images.view(), &back.geometry, &seeds, &params).unwrap();
    let (a, b) = (direct.numbers, read.numbers);
    for (what, x, y) in [
        ("EDV", a.edv_ml, b.edv_ml),
        ("ESV", a.esv_ml, b.esv_ml),
        ("EF", a.ef_pct, b.ef_pct),
    ] {
        assert!(
            (x - y).abs() <= 1e-6 * x.abs(),
            "{what}: {x} in memory, {y} via NIfTI"
        );
    }
}

#[test]
fn measure_refuses_a_bad_nifti_naming_the_field() {
    let exe = env!("CARGO_BIN_EXE_cinegauge");
    let dir = tempfile::tempdir().unwrap();
    let seeds = dir.path().join("seeds.toml");
    std::fs::write(&seeds, "[[seed]]\nslice = 1\nframe = 0\nrow = 2\ncol = 3\n").unwrap();
    let out = Command::new(exe)
        .args(["measure", "--quiet", "--subject", "FX-01", "--images"])
        .arg(fixture("zero_pixdim.nii"))
        .arg("--seeds")
        .arg(&seeds)
        .arg("--out")
        .arg(dir.path().join("m"))
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "{err}");
    assert!(
        err.contains("pixdim[1]") && !err.contains("panicked"),
        "{err}"
    );
}

#[test]
fn inspect_reports_what_the_reader_found() {
    // The same facts as the nibabel fixture's header (see make_nifti_fixtures.py).
    let out = Command::new(env!("CARGO_BIN_EXE_cinegauge"))
        .args(["inspect", "--json"])
        .arg(fixture("cine.nii.gz"))
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(
        v["dims"],
        serde_json::json!({"slices": 3, "frames": 4, "rows": 5, "cols": 6})
    );
    assert_eq!(
        v["geometry"]["pixel_spacing_mm"],
        serde_json::json!([1.25, 1.5])
    );
    assert_eq!(
        v["geometry"]["trigger_times_ms"],
        serde_json::json!([0.0, 40.0, 80.0, 120.0])
    );
    let missing = Command::new(env!("CARGO_BIN_EXE_cinegauge"))
        .args(["inspect", "/nonexistent/cine.nii"])
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&missing.stderr);
    assert_eq!(missing.status.code(), Some(1));
    assert!(
        err.contains("/nonexistent/cine.nii") && !err.contains("panicked"),
        "{err}"
    );
}
