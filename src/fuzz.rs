//! Entry points that feed raw bytes to every reader of user data, for the fuzz targets
//! (`fuzz/`) and for the tests that replay their corpora and the inputs they found.
//!
//! Each function writes the bytes where the reader expects a file (a scratch folder per
//! thread), reads it as a user's command would, and checks the reader's contract: either a
//! clear error, or a result whose numbers are all finite and whose geometry is physical. Any
//! panic, abort or contract failure here is a bug in the reader.

use std::cell::RefCell;
use std::path::{Path, PathBuf};

use crate::geometry::{read_sidecar, Geometry};
use crate::io::ismrmrd::assemble::{AcqHead, Acquisitions, Counters, RawData};
use crate::io::npy::ImageSeries;

/// A fuzz target: its name (the binary in `fuzz/`) and its entry point.
pub type Target = (&'static str, fn(&[u8]));

/// Every target, in the order `fuzz/run` runs them.
pub const TARGETS: [Target; 14] = [
    ("dicom_file", dicom_file),
    ("dicom_folder", dicom_folder),
    ("nifti", nifti),
    ("npy_images", npy_images),
    ("npz_images", npz_images),
    ("kspace_npy", kspace_npy),
    ("geometry", geometry),
    ("ismrmrd_header", ismrmrd_header),
    ("ismrmrd_acquisitions", ismrmrd_acquisitions),
    ("plan", plan),
    ("seeds", seeds),
    ("agreement_csv", agreement_csv),
    ("reader_sheets", reader_sheets),
    ("results_json", results_json),
];

/// The separator between files in a `dicom_folder` input.
pub const NEXT_FILE: &[u8] = b"--cinegauge-next-file--";

/// A valid sidecar used beside fuzzed arrays (so the array reader is what is exercised).
const SIDECAR: &str = r#"{"pixel_spacing_mm": [1.5, 1.5], "slice_thickness_mm": 8.0,
"slice_spacing_mm": 10.0, "frame_interval_ms": 40.0}"#;

thread_local! {
    static SCRATCH: RefCell<Option<PathBuf>> = const { RefCell::new(None) };
}

/// An empty scratch folder of this thread (created once, emptied on every call).
fn scratch() -> PathBuf {
    SCRATCH.with(|s| {
        let mut s = s.borrow_mut();
        let dir = s
            .get_or_insert_with(|| {
                std::env::temp_dir().join(format!(
                    "cinegauge-fuzz-{}-{:?}",
                    std::process::id(),
                    std::thread::current().id()
                ))
            })
            .clone();
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(&dir).expect("scratch folder");
        dir
    })
}

fn put(dir: &Path, name: &str, data: &[u8]) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, data).expect("scratch file");
    p
}

/// The contract of a series a reader accepted: finite values and a physical geometry.
fn check_series(s: &ImageSeries) {
    assert!(
        s.images.iter().all(|v| v.is_finite()),
        "a non-finite value was accepted"
    );
    check_geometry(&s.geometry, s.images.dim().1);
}

fn check_geometry(g: &Geometry, frames: usize) {
    let (r, c) = g.pixel_mm();
    for v in [r, c, g.slice_spacing_mm, g.slice_thickness_mm] {
        assert!(
            v.is_finite() && v > 0.0,
            "non-physical spacing {v} accepted"
        );
    }
    assert_eq!(g.frames(), frames, "geometry frames differ from the data");
    assert!(g.trigger_times_ms.iter().all(|t| t.is_finite()));
}

/// One DICOM file in a folder, read as a series.
pub fn dicom_file(data: &[u8]) {
    let dir = scratch();
    put(&dir, "IM0001.dcm", data);
    if let Ok(s) = crate::io::dicom::read_dicom_series(&dir, None) {
        check_series(&s);
    }
}

/// Several DICOM files (split at [`NEXT_FILE`]) in a folder: the series scan, then reading.
pub fn dicom_folder(data: &[u8]) {
    let dir = scratch();
    for (i, part) in split(data, NEXT_FILE).into_iter().take(8).enumerate() {
        put(&dir, &format!("IM{i:04}.dcm"), part);
    }
    let _ = crate::io::dicom::list_series(&dir);
    if let Ok(s) = crate::io::dicom::read_dicom_series(&dir, None) {
        check_series(&s);
    }
}

fn split<'a>(data: &'a [u8], sep: &[u8]) -> Vec<&'a [u8]> {
    let mut parts = Vec::new();
    let mut rest = data;
    while let Some(at) = rest.windows(sep.len()).position(|w| w == sep) {
        parts.push(&rest[..at]);
        rest = &rest[at + sep.len()..];
    }
    parts.push(rest);
    parts
}

/// A NIfTI-1 file (`.nii`).
pub fn nifti(data: &[u8]) {
    let dir = scratch();
    let p = put(&dir, "cine.nii", data);
    if let Ok(s) = crate::io::nifti::read_nifti_series(&p) {
        check_series(&s);
    }
}

/// An image `.npy` with a valid sidecar.
pub fn npy_images(data: &[u8]) {
    let dir = scratch();
    put(&dir, "images.npy", data);
    put(&dir, "geometry.json", SIDECAR.as_bytes());
    if let Ok(s) = crate::io::npy::read_image_series(&dir) {
        check_series(&s);
    }
}

/// An image `.npz` archive with a valid sidecar.
pub fn npz_images(data: &[u8]) {
    let dir = scratch();
    put(&dir, "images.npz", data);
    put(&dir, "geometry.json", SIDECAR.as_bytes());
    if let Ok(s) = crate::io::npy::read_image_series(&dir) {
        check_series(&s);
    }
}

/// One slice of raw k-space (`slice_00.npy`) in a k-space folder, opened and read.
pub fn kspace_npy(data: &[u8]) {
    let dir = scratch();
    put(&dir, "slice_00.npy", data);
    put(&dir, "geometry.json", SIDECAR.as_bytes());
    if let Ok(k) = crate::io::kspace::open_kspace(&dir) {
        if let Ok(slice) = k.read(0) {
            assert!(slice.iter().all(|z| z.re.is_finite() && z.im.is_finite()));
        }
    }
}

/// The `geometry.json` sidecar; the first byte is the frame count the data would have.
pub fn geometry(data: &[u8]) {
    let Some((&frames, text)) = data.split_first() else {
        return;
    };
    let dir = scratch();
    let p = put(&dir, "geometry.json", text);
    if let Ok(s) = read_sidecar(&p) {
        let frames = usize::from(frames);
        if let Ok(g) = Geometry::from_sidecar(&s, frames, "geometry.json") {
            check_geometry(&g, frames);
        }
    }
}

/// The ISMRMRD XML header.
pub fn ismrmrd_header(data: &[u8]) {
    let _ = crate::io::ismrmrd::header::parse(&String::from_utf8_lossy(data));
}

/// ISMRMRD acquisitions assembled into k-space: the first 24 bytes give a small header
/// (matrix, slices, phases, step-1 limits), then 40-byte records give acquisition headers
/// whose samples are a ramp (the HDF5 container is the system library's; what this reader
/// adds is the checking and placing of lines).
pub fn ismrmrd_acquisitions(data: &[u8]) {
    use crate::io::ismrmrd::header::RawHeader;
    if data.len() < 24 {
        return;
    }
    let (h, rest) = data.split_at(24);
    let small = |i: usize, max: usize| usize::from(h[i]) % max + 1;
    let (nx, ny) = (small(0, 16), small(1, 16));
    let header = RawHeader {
        encoded_matrix: [nx, ny, small(2, 2)],
        encoded_fov_mm: [
            f64::from(h[3]) * 2.0,
            f64::from(h[4]) * 2.0,
            f64::from(h[5]),
        ],
        recon_matrix: [small(6, 16), small(7, 16), 1],
        recon_fov_mm: [f64::from(h[8]) * 2.0, f64::from(h[9]) * 2.0, 8.0],
        step1: (
            usize::from(h[10]) % 4,
            usize::from(h[11]),
            usize::from(h[12]),
        ),
        slices: small(13, 3),
        phases: small(14, 4),
        trajectory: if h[15] == 7 { "radial" } else { "cartesian" }.into(),
        receiver_channels: (h[16] > 0).then(|| usize::from(h[16] % 5)),
        encodings: small(17, 2),
    };
    let mut heads = Vec::new();
    for r in rest.chunks_exact(40).take(512) {
        let u16at = |i: usize| u16::from_le_bytes([r[i], r[i + 1]]);
        let f32at = |i: usize| f32::from(r[i] as i8) * 2.5;
        heads.push(AcqHead {
            flags: u64::from(r[0]) << (r[1] % 40),
            number_of_samples: u16at(2) % 64,
            active_channels: u16at(4) % 5,
            discard_pre: u16at(6) % 8,
            discard_post: u16at(8) % 8,
            trajectory_dimensions: u16::from(r[10] == 3),
            physiology_time_stamp: [u32::from(u16at(11)), 0, 0],
            position: [f32at(13), f32at(14), f32at(15)],
            slice_dir: [f32at(16), f32at(17), f32at(18)],
            idx: Counters {
                kspace_encode_step_1: u16at(19) % 20,
                kspace_encode_step_2: u16::from(r[21] % 2),
                average: u16::from(r[22] % 3),
                slice: u16::from(r[23] % 4),
                contrast: u16::from(r[24] == 9),
                phase: u16::from(r[25] % 5),
                repetition: u16::from(r[26] == 9),
                set: u16::from(r[27] == 9),
            },
        });
    }
    struct Ramp(Vec<AcqHead>);
    impl Acquisitions for Ramp {
        fn heads(&self) -> &[AcqHead] {
            &self.0
        }
        fn data(&self, range: std::ops::Range<usize>) -> Result<Vec<Vec<f32>>, String> {
            Ok(self.0[range]
                .iter()
                .map(|h| {
                    let n = 2 * usize::from(h.number_of_samples) * usize::from(h.active_channels);
                    (0..n).map(|i| i as f32 * 0.25 - 3.0).collect()
                })
                .collect())
        }
    }
    let path = Path::new("fuzz.h5");
    if let Ok(raw) = RawData::new(path, &header, Box::new(Ramp(heads)), None) {
        check_geometry(&raw.geometry, raw.geometry.frames());
        for k in 0..raw.dims.0 {
            if let Ok(slice) = raw.read(k) {
                assert!(slice.iter().all(|z| z.re.is_finite() && z.im.is_finite()));
            }
        }
    }
}

/// The study-plan TOML (paths resolve against an empty scratch folder).
pub fn plan(data: &[u8]) {
    let dir = scratch();
    let _ = crate::plan::parse(&String::from_utf8_lossy(data), "plan.toml", &dir);
}

/// The seeds TOML.
pub fn seeds(data: &[u8]) {
    let text = String::from_utf8_lossy(data);
    if let Ok(f) = crate::segment::seeds::parse_seed_file(&text, "seeds.toml") {
        let _ = crate::segment::seeds::seeds_to_toml(&f.seed);
    }
}

/// The CSV table of `agreement`, columns `a` and `b` (and the three-column ICC path with
/// `c` when present): statistics are computed and must hold no NaN or infinity.
pub fn agreement_csv(data: &[u8]) {
    let dir = scratch();
    let p = put(&dir, "table.csv", data);
    for names in [vec!["a", "b"], vec!["a", "b", "c"]] {
        let names: Vec<String> = names.into_iter().map(String::from).collect();
        let Ok(values) = crate::io::table::read_columns(&p, &names) else {
            continue;
        };
        assert!(values.iter().flatten().all(|v| v.is_finite()));
        let columns: Vec<(String, Vec<f64>)> = names.into_iter().zip(values).collect();
        let margin = crate::agreement_table::Margin {
            label: "ef_pct".into(),
            value: 5.0,
        };
        let margin = (columns.len() == 2).then_some(margin);
        if let Ok(r) = crate::agreement_table::analyse(&columns, margin, false) {
            let text = r.to_text();
            assert!(
                !text.contains("NaN") && !text.contains("inf"),
                "a non-finite statistic reached the text: {text}"
            );
        }
    }
}

/// A reader-study key file, then up to three score sheets (split at [`NEXT_FILE`]) read
/// against it and analysed.
pub fn reader_sheets(data: &[u8]) {
    let parts = split(data, NEXT_FILE);
    let dir = scratch();
    let key = put(&dir, "key.csv", parts[0]);
    let Ok(key) = crate::blind::unblind::read_key(&key) else {
        return;
    };
    let mut scores = Vec::new();
    let mut readers = Vec::new();
    for (i, sheet) in parts.iter().enumerate().skip(1).take(3) {
        let p = put(&dir, &format!("reader-{i}.csv"), sheet);
        match crate::blind::unblind::read_sheet(&p, i, &key) {
            Ok(s) => {
                scores.extend(s);
                readers.push(i);
            }
            Err(_) => return,
        }
    }
    let study = crate::blind::unblind::analyse(&key, &scores, &readers, &|_| Some(55.0));
    for (title, lines) in crate::blind::unblind::sections(&study) {
        for l in &lines {
            assert!(!l.contains("NaN"), "NaN in section {title}: {l}");
        }
    }
}

/// A `results.json` as `report` reads it.
pub fn results_json(data: &[u8]) {
    let dir = scratch();
    let p = put(&dir, "results.json", data);
    let _ = crate::results::ResultsFile::read(&p);
}
