//! NumPy image series: `.npz` archives and refusals, against files written by NumPy 2.1.3
//! (tests/fixtures/npy/make_npy_fixtures.py).

use std::path::PathBuf;

use cinegauge::io;

fn fixture(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures/npy")
        .join(name)
}

#[test]
fn npz_archive_reads_the_images_array_exactly() {
    for path in [fixture("archive"), fixture("archive/images.npz")] {
        let s = io::read_images(&path, None).unwrap();
        assert_eq!(s.images.dim(), (2, 3, 4, 5));
        for ((sl, f, r, c), v) in s.images.indexed_iter() {
            // Exact: float64 values with one binary decimal, representable in float32.
            assert_eq!(*v, (1000 * sl + 100 * f + 10 * r + c) as f32 + 0.5);
        }
        assert_eq!(s.geometry.trigger_times_ms, vec![0.0, 40.0, 80.0]);
    }
}

#[test]
fn wrong_dtype_and_shape_are_refused_naming_the_file() {
    for (folder, word) in [
        ("wrong_dtype", "float32 or float64"),
        ("wrong_shape", "4-D"),
    ] {
        let err = io::read_images(&fixture(folder), None)
            .unwrap_err()
            .to_string();
        assert!(
            err.contains("images.npy") && err.contains(word),
            "{folder}: {err}"
        );
    }
}
