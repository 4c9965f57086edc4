//! ISMRMRD raw data against files written by the `ismrmrd` Python package 1.15.0 (with h5py
//! 3.16.0 and NumPy 2.4.6; tests/fixtures/ismrmrd/make_ismrmrd_fixtures.py), whose expected
//! k-space and noise covariance NumPy computed. Needs a build with `--features ismrmrd`.
#![cfg(feature = "ismrmrd")]

use std::path::PathBuf;
use std::process::Command;

use cinegauge::io::kspace::open_kspace;
use ndarray::{Array2, Array4, Array5};
use ndarray_npy::ReadNpyExt;
use num_complex::{Complex32, Complex64};

fn fixture(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures/ismrmrd")
        .join(name)
}

fn npy<T: ReadNpyExt>(name: &str) -> T {
    T::read_npy(std::fs::File::open(fixture(name)).expect("fixture")).expect("npy")
}

/// Lines placed by their counters from a shuffled file, two averages averaged, calibration-only
/// and navigator data left out: equal to NumPy's array bit for bit ((a + b) / 2 in float32 is
/// the same operation in both).
#[test]
fn cine_kspace_is_assembled_exactly_from_shuffled_acquisitions() {
    let raw = open_kspace(&fixture("cine.h5")).expect("readable");
    let expected: Array5<Complex32> = npy("cine_kspace.npy");
    assert_eq!(raw.dims, (2, 4, 3, 12, 16));
    for s in 0..2 {
        let k = raw.read(s).expect("slice");
        assert_eq!(k, expected.index_axis(ndarray::Axis(0), s), "slice {s}");
    }
    assert!(raw
        .warnings
        .iter()
        .any(|w| w.contains("24 calibration-only")));
    assert!(raw.warnings.iter().any(|w| w.contains("1 non-imaging")));
}

/// Ψ = N⁻¹ Σ n nᴴ over both noise scans, against NumPy in float64. Tolerance 1e-6 of the
/// largest entry: the reader rounds an f64 sum to f32 (relative 6e-8) once.
#[test]
fn noise_scans_give_the_coil_noise_covariance() {
    let raw = open_kspace(&fixture("cine.h5")).expect("readable");
    let psi = raw.noise_cov.expect("noise scans present");
    let expected: Array2<Complex64> = npy("cine_noise_cov.npy");
    let scale = expected.iter().map(|z| z.norm()).fold(0.0, f64::max);
    for (a, b) in psi.iter().zip(expected.iter()) {
        let a = Complex64::new(a.re.into(), a.im.into());
        assert!((a - b).norm() <= 1e-6 * scale, "{a} vs {b}");
    }
}

/// Geometry from the header and acquisition headers: 2 mm pixels (FOV / matrix), 6 mm
/// thickness (encoded FOV z), 8 mm between oblique slice centres projected on the slice
/// normal (float32 positions: 1e-4 mm), frame times from 10 + 16·phase ticks of 2.5 ms.
#[test]
fn cine_geometry_comes_from_the_headers() {
    let raw = open_kspace(&fixture("cine.h5")).expect("readable");
    let g = &raw.geometry;
    assert_eq!((g.row_spacing_mm, g.col_spacing_mm), (2.0, 2.0));
    assert_eq!(g.slice_thickness_mm, 6.0);
    assert!(
        (g.slice_spacing_mm - 8.0).abs() < 1e-4,
        "{}",
        g.slice_spacing_mm
    );
    let p = raw.positions_mm.expect("positions");
    assert!((p[1] - p[0] - 8.0).abs() < 1e-4);
    assert_eq!(g.trigger_times_ms, vec![25.0, 65.0, 105.0]);
    assert_eq!(g.rr_interval_ms, None);
}

/// Discarded samples dropped and 2× readout oversampling removed: against NumPy's
/// `fftshift(fft(ifftshift(·), norm="ortho"))` crop. Tolerance 1e-5 of the largest value:
/// two float32 FFTs (32 and 16 points) against float64.
#[test]
fn readout_oversampling_is_removed_like_numpy() {
    let raw = open_kspace(&fixture("oversampled.h5")).expect("readable");
    assert_eq!(raw.dims, (1, 2, 2, 8, 16));
    let expected: Array4<Complex32> = npy("oversampled_kspace.npy");
    let k = raw.read(0).expect("slice");
    let scale = expected.iter().map(|z| z.norm()).fold(0.0, f32::max);
    for (a, b) in k.iter().zip(expected.iter()) {
        assert!((a - b).norm() <= 1e-5 * scale, "{a} vs {b}");
    }
    assert_eq!(raw.geometry.col_spacing_mm, 2.0);
}

/// A sidecar beside the file overrides the timing; an unknown key in it is refused by name.
#[test]
fn a_sidecar_overrides_timing_and_unknown_keys_are_refused() {
    let dir = tempfile::tempdir().expect("tmp");
    let file = dir.path().join("study.h5");
    std::fs::copy(fixture("cine.h5"), &file).expect("copy");
    let side = dir.path().join("study.geometry.json");
    std::fs::write(&side, r#"{"frame_interval_ms": 45, "rr_interval_ms": 900}"#).expect("write");
    let raw = open_kspace(&file).expect("readable");
    assert_eq!(raw.geometry.trigger_times_ms, vec![0.0, 45.0, 90.0]);
    assert_eq!(raw.geometry.rr_interval_ms, Some(900.0));
    assert!(!raw.warnings.iter().any(|w| w.contains("ticks")));
    std::fs::write(&side, r#"{"frame_intervl_ms": 45}"#).expect("write");
    let e = open_kspace(&file).err().expect("refused").to_string();
    assert!(
        e.contains("study.geometry.json") && e.contains("frame_intervl_ms"),
        "{e}"
    );
}

/// The binary on a non-Cartesian file: exit code 1 (the work could not be done), no panic,
/// the file and the header field named.
#[test]
fn the_binary_refuses_a_radial_file_by_name() {
    let run = Command::new(env!("CARGO_BIN_EXE_cinegauge"))
        .arg("inspect")
        .arg(fixture("radial.h5"))
        .output()
        .expect("runs");
    let text = String::from_utf8_lossy(&run.stderr);
    assert_eq!(run.status.code(), Some(1), "{text}");
    assert!(!text.contains("panicked"), "{text}");
    assert!(
        text.contains("radial.h5") && text.contains("encoding/trajectory"),
        "{text}"
    );
}

#[test]
fn non_cartesian_and_undersampled_files_are_refused_by_name() {
    let e = open_kspace(&fixture("radial.h5"))
        .err()
        .expect("refused")
        .to_string();
    assert!(
        e.contains("radial.h5") && e.contains("encoding/trajectory is `radial`"),
        "{e}"
    );
    let e = open_kspace(&fixture("undersampled.h5"))
        .err()
        .expect("refused")
        .to_string();
    assert!(
        e.contains("undersampled.h5")
            && e.contains("slice 0, phase 1")
            && e.contains("rows 1, 3, 5, 7"),
        "{e}"
    );
}

/// The binary reconstructs straight from the ISMRMRD file, pre-whitening with its noise scans.
#[test]
fn reconstruct_reads_an_ismrmrd_file() {
    let out = tempfile::tempdir().expect("tmp");
    let run = Command::new(env!("CARGO_BIN_EXE_cinegauge"))
        .args(["--quiet", "reconstruct", "--kspace"])
        .arg(fixture("cine.h5"))
        .args([
            "--pattern",
            "full",
            "--method",
            "reference",
            "--acs-lines",
            "6",
            "--out",
        ])
        .arg(out.path())
        .output()
        .expect("runs");
    assert!(
        run.status.success(),
        "{}",
        String::from_utf8_lossy(&run.stderr)
    );
    let log: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.path().join("recon.json")).expect("log"))
            .expect("json");
    assert_eq!(log["prewhitened"], true);
    assert_eq!(log["input_sha256"][0][0], "cine.h5");
    let images = cinegauge::io::read_images(out.path(), None).expect("images");
    assert_eq!(images.images.dim(), (2, 3, 12, 16));
    assert!(images.images.iter().all(|v| v.is_finite() && *v >= 0.0));
}
