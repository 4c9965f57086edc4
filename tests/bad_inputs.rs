//! The bad-input catalogue: the real binary on broken inputs across every reader and command.
//!
//! For each case: the exit code is non-zero, nothing panicked, and the error names the file
//! and the field, row or key at fault. The inputs start from a valid synthetic study written
//! by `cinegauge simulate` and the committed fixtures, then one thing is broken. The formats
//! are broken against their published layouts: NumPy's `.npy` format (NEP 1, "A simple file
//! format for NumPy arrays"), the NIfTI-1 header (nifti1.h, byte offsets of `dim`,
//! `datatype`, `vox_offset`, `magic`), DICOM PS3.5 §7.1 element encoding and PS3.3 C.7.6.3
//! image pixel attributes. The list is in DEVELOPERS.md; add a case there and here.
//!
//! The second test replays the fuzz targets' seed inputs and every input the fuzzers found
//! (`fuzz/regressions/`) through the same entry points the fuzzers use.

use crate::common;

use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::OnceLock;

/// A valid small synthetic study (11 slices of 48 × 48, 8 frames, 2 coils) shared by the
/// cases, written once per test process.
fn base() -> &'static Path {
    static BASE: OnceLock<tempfile::TempDir> = OnceLock::new();
    BASE.get_or_init(|| {
        let dir = tempfile::tempdir().expect("temp dir");
        let out = dir.path().join("sim");
        let o = common::cinegauge(&[
            "simulate",
            "--quiet",
            "--out",
            out.to_str().unwrap(),
            "--slices",
            "11",
            "--rows",
            "48",
            "--cols",
            "48",
            "--frames",
            "8",
            "--coils",
            "2",
            "--pixel-mm",
            "3.5",
        ]);
        assert!(o.status.success(), "{}", common::text(&o));
        dir
    })
    .path()
}

fn copy_dir(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for e in std::fs::read_dir(from).unwrap() {
        let e = e.unwrap();
        if e.path().is_dir() {
            copy_dir(&e.path(), &to.join(e.file_name()));
        } else {
            std::fs::copy(e.path(), to.join(e.file_name())).unwrap();
        }
    }
}

fn fixture(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures")
        .join(rel)
}

/// An `.npy` file (format version 1.0) with the given dtype, shape and raw data.
fn npy(descr: &str, shape: &[u64], data: &[u8]) -> Vec<u8> {
    let dims: Vec<String> = shape.iter().map(u64::to_string).collect();
    let tuple = if dims.len() == 1 {
        format!("({},)", dims[0])
    } else {
        format!("({})", dims.join(", "))
    };
    let mut dict = format!("{{'descr': '{descr}', 'fortran_order': False, 'shape': {tuple}, }}");
    while (10 + dict.len() + 1) % 64 != 0 {
        dict.push(' ');
    }
    dict.push('\n');
    let mut b = b"\x93NUMPY\x01\x00".to_vec();
    b.extend_from_slice(&(dict.len() as u16).to_le_bytes());
    b.extend_from_slice(dict.as_bytes());
    b.extend_from_slice(data);
    b
}

fn f32s(values: &[f32]) -> Vec<u8> {
    values.iter().flat_map(|v| v.to_le_bytes()).collect()
}

/// The reference image folder of the base study, copied into `d/img`.
fn images(d: &Path) -> PathBuf {
    let to = d.join("img");
    copy_dir(&base().join("sim/reference"), &to);
    to
}

/// The raw k-space folder of the base study, copied into `d/kspace`.
fn kspace(d: &Path) -> PathBuf {
    let to = d.join("kspace");
    copy_dir(&base().join("sim/kspace"), &to);
    to
}

fn seeds() -> String {
    base().join("sim/seeds.toml").display().to_string()
}

fn write(p: &Path, bytes: impl AsRef<[u8]>) -> String {
    std::fs::write(p, bytes).unwrap();
    p.display().to_string()
}

/// `measure` of `images` with the base seeds.
fn measure(d: &Path, images: &Path) -> Vec<String> {
    vec![
        "measure".into(),
        "--images".into(),
        images.display().to_string(),
        "--seeds".into(),
        seeds(),
        "--out".into(),
        d.join("out").display().to_string(),
    ]
}

/// `measure` of the base images with a seeds file holding `text`.
fn measure_seeds(d: &Path, text: &str) -> Vec<String> {
    let img = images(d);
    let s = write(&d.join("seeds.toml"), text);
    let mut a = measure(d, &img);
    a[4] = s;
    a
}

/// `reconstruct` of a k-space folder with zero-filled at R = 2.
fn reconstruct(d: &Path, k: &Path, extra: &[&str]) -> Vec<String> {
    let mut a: Vec<String> = [
        "reconstruct",
        "--kspace",
        k.to_str().unwrap(),
        "--pattern",
        "equispaced",
        "--accel",
        "2",
        "--acs-lines",
        "8",
        "--method",
        "zero-filled",
        "--out",
    ]
    .map(String::from)
    .to_vec();
    a.push(d.join("out").display().to_string());
    a.extend(extra.iter().map(|s| s.to_string()));
    a
}

/// A NIfTI-1 file: the committed `scaled.nii` fixture with `patch` applied to its bytes.
fn nifti(d: &Path, patch: impl FnOnce(&mut Vec<u8>)) -> PathBuf {
    let mut b = std::fs::read(fixture("nifti/scaled.nii")).unwrap();
    patch(&mut b);
    let p = d.join("cine.nii");
    write(&p, b);
    p
}

fn set_i16(b: &mut [u8], at: usize, v: i16) {
    b[at..at + 2].copy_from_slice(&v.to_le_bytes());
}

/// The study plan around one subject of the base study, with `extra` appended.
fn plan(d: &Path, body: &str) -> Vec<String> {
    let p = write(&d.join("plan.toml"), body);
    vec![
        "run".into(),
        p,
        "--out".into(),
        d.join("out").display().to_string(),
    ]
}

fn good_plan(changes: &[(&str, &str)]) -> String {
    let mut t = format!(
        "[study]\ncode = \"BAD-01\"\n\n[[subject]]\ncode = \"S01\"\nkspace = \"{}\"\nseeds = \"{}\"\n\n[sampling]\npatterns = [\"equispaced\"]\naccelerations = [2]\nacs_lines = 8\n\n[methods]\nzero-filled = {{}}\n",
        base().join("sim/kspace").display(),
        seeds()
    );
    for (from, to) in changes {
        assert!(t.contains(from), "plan has no `{from}`");
        t = t.replace(from, to);
    }
    t
}

fn agreement(d: &Path, csv: &str) -> Vec<String> {
    let p = write(&d.join("table.csv"), csv);
    vec!["agreement".into(), p, "--columns".into(), "a,b".into()]
}

const KEY: &str = "case,subject,method,pattern,accel_nominal\nC01,S1,reference,full,1\nC02,S1,cg-sense,equispaced,4\nC03,S2,reference,full,1\nC04,S2,cg-sense,equispaced,4\n";
const SHEET_HEAD: &str = "case,overall_quality,artefact_burden,edge_sharpness,motion_faithfulness,reader_edv_ml,reader_esv_ml,reader_ef_pct,comment\n";

fn unblind(d: &Path, key: &str, sheet_rows: &str) -> Vec<String> {
    let k = write(&d.join("unblinding-key.csv"), key);
    let s = write(
        &d.join("reader-01-scores.csv"),
        format!("{SHEET_HEAD}{sheet_rows}"),
    );
    vec![
        "unblind".into(),
        d.display().to_string(),
        "--key".into(),
        k,
        "--sheets".into(),
        s,
    ]
}

/// One catalogue entry: what is broken, the command, extra environment, and the words the
/// error must contain (the file and the field, row or key).
struct Case {
    name: &'static str,
    args: Vec<String>,
    env: Vec<(&'static str, &'static str)>,
    expect: Vec<&'static str>,
}

#[allow(clippy::too_many_lines)]
fn catalogue(root: &Path) -> Vec<Case> {
    let mut cases = Vec::new();
    let mut n = 0;
    let mut add =
        |name: &'static str, expect: &[&'static str], build: &dyn Fn(&Path) -> Vec<String>| {
            n += 1;
            let d = root.join(format!("{n:02}-{name}"));
            std::fs::create_dir_all(&d).unwrap();
            cases.push(Case {
                name,
                args: build(&d),
                env: Vec::new(),
                expect: expect.to_vec(),
            });
        };

    // Image arrays (.npy/.npz) and their geometry.json sidecar, through `measure`.
    add(
        "npy truncated",
        &["images.npy", "promises", "bytes"],
        &|d| {
            let img = images(d);
            let b = std::fs::read(img.join("images.npy")).unwrap();
            write(&img.join("images.npy"), &b[..b.len() / 2]);
            measure(d, &img)
        },
    );
    add(
        "npy header claims 10^9 x 10^9",
        &["images.npy", "slice = 1000000000"],
        &|d| {
            let img = images(d);
            write(
                &img.join("images.npy"),
                npy("<f4", &[1_000_000_000, 1_000_000_000, 1, 1], &[]),
            );
            measure(d, &img)
        },
    );
    add(
        "npy frame count 2^31",
        &["images.npy", "frame = 2147483648"],
        &|d| {
            let img = images(d);
            write(
                &img.join("images.npy"),
                npy("<f4", &[11, 1 << 31, 48, 48], &f32s(&[1.0; 64])),
            );
            measure(d, &img)
        },
    );
    add("npy three axes", &["images.npy", "4 axes"], &|d| {
        let img = images(d);
        write(
            &img.join("images.npy"),
            npy("<f4", &[2, 2, 2], &f32s(&[1.0; 8])),
        );
        measure(d, &img)
    });
    add("npy int16 dtype", &["images.npy", "float32"], &|d| {
        let img = images(d);
        write(&img.join("images.npy"), npy("<i2", &[1, 1, 2, 2], &[0; 8]));
        measure(d, &img)
    });
    add(
        "npy NaN value",
        &["images.npy", "non-finite", "slice 0, frame 0, row 1, col 0"],
        &|d| {
            let img = images(d);
            let mut v = [1.0f32; 4];
            v[2] = f32::NAN;
            write(
                &img.join("images.npy"),
                npy("<f4", &[1, 1, 2, 2], &f32s(&v)),
            );
            measure(d, &img)
        },
    );
    add("npy not an array file", &["images.npy", "header"], &|d| {
        let img = images(d);
        write(
            &img.join("images.npy"),
            b"this is a text file, not a NumPy array\n",
        );
        measure(d, &img)
    });
    add(
        "npz two arrays, none named images",
        &["images.npz", "`images`"],
        &|d| {
            let img = images(d);
            std::fs::remove_file(img.join("images.npy")).unwrap();
            let f = std::fs::File::create(img.join("images.npz")).unwrap();
            let mut z = ndarray_npy::NpzWriter::new(f);
            z.add_array("a", &ndarray::Array4::<f32>::zeros((1, 1, 2, 2)))
                .unwrap();
            z.add_array("b", &ndarray::Array4::<f32>::zeros((1, 1, 2, 2)))
                .unwrap();
            z.finish().unwrap();
            measure(d, &img)
        },
    );
    add("npz not a zip archive", &["images.npz", "archive"], &|d| {
        let img = images(d);
        std::fs::remove_file(img.join("images.npy")).unwrap();
        write(&img.join("images.npz"), b"PK\x03\x04 broken");
        measure(d, &img)
    });
    add(
        "two arrays in one image folder",
        &["img", "several", "images.npy"],
        &|d| {
            let img = images(d);
            std::fs::copy(img.join("images.npy"), img.join("other.npy")).unwrap();
            measure(d, &img)
        },
    );
    add("geometry.json missing", &["geometry.json"], &|d| {
        let img = images(d);
        std::fs::remove_file(img.join("geometry.json")).unwrap();
        measure(d, &img)
    });
    add(
        "geometry.json not JSON",
        &["geometry.json", "line 2"],
        &|d| {
            let img = images(d);
            write(
                &img.join("geometry.json"),
                "{\n  pixel_spacing_mm: [1.5, 1.5]\n}",
            );
            measure(d, &img)
        },
    );
    add(
        "geometry.json negative spacing",
        &["geometry.json", "pixel_spacing_mm"],
        &|d| {
            let img = images(d);
            write(
                &img.join("geometry.json"),
                r#"{"pixel_spacing_mm": [-3.5, 3.5], "slice_thickness_mm": 8, "slice_spacing_mm": 10, "frame_interval_ms": 40}"#,
            );
            measure(d, &img)
        },
    );
    add(
        "geometry.json trigger times for 3 of 8 frames",
        &["geometry.json", "trigger_times_ms"],
        &|d| {
            let img = images(d);
            write(
                &img.join("geometry.json"),
                r#"{"pixel_spacing_mm": [3.5, 3.5], "slice_thickness_mm": 8, "slice_spacing_mm": 10, "trigger_times_ms": [0, 40, 80]}"#,
            );
            measure(d, &img)
        },
    );
    add(
        "geometry.json text where a number belongs",
        &["geometry.json", "slice_thickness_mm"],
        &|d| {
            let img = images(d);
            write(
                &img.join("geometry.json"),
                r#"{"pixel_spacing_mm": [3.5, 3.5], "slice_thickness_mm": "eight", "slice_spacing_mm": 10, "frame_interval_ms": 40}"#,
            );
            measure(d, &img)
        },
    );

    // Seeds files, through `measure`.
    add("seeds TOML syntax", &["seeds.toml", "line 2"], &|d| {
        measure_seeds(d, "[[seed]]\nslice = = 5\n")
    });
    add("seeds unknown key", &["seeds.toml", "colour"], &|d| {
        measure_seeds(
            d,
            "[[seed]]\nslice = 5\nframe = 0\nrow = 25\ncol = 26\ncolour = 3\n",
        )
    });
    add("seeds negative row", &["seeds.toml", "row"], &|d| {
        measure_seeds(d, "[[seed]]\nslice = 5\nframe = 0\nrow = -3\ncol = 26\n")
    });
    add("seed outside the image", &["seed", "row 500"], &|d| {
        measure_seeds(d, "[[seed]]\nslice = 5\nframe = 0\nrow = 500\ncol = 26\n")
    });
    add(
        "seed on a slice that does not exist",
        &["seed", "slice 40"],
        &|d| measure_seeds(d, "[[seed]]\nslice = 40\nframe = 0\nrow = 25\ncol = 26\n"),
    );
    add("seeds file without a seed", &["seeds.toml", "seed"], &|d| {
        measure_seeds(d, "# nothing\n")
    });
    add("seeds file missing", &["nowhere.toml"], &|d| {
        let img = images(d);
        let mut a = measure(d, &img);
        a[4] = d.join("nowhere.toml").display().to_string();
        a
    });

    // NIfTI-1 (header offsets from nifti1.h), through `measure`.
    add("nifti wrong magic", &["cine.nii", "magic"], &|d| {
        let p = nifti(d, |b| b[344..348].copy_from_slice(b"xyz\0"));
        measure(d, &p)
    });
    add("nifti truncated", &["cine.nii", "promises"], &|d| {
        let p = nifti(d, |b| b.truncate(b.len() - 100));
        measure(d, &p)
    });
    add(
        "nifti vox_offset beyond the file",
        &["cine.nii", "vox_offset"],
        &|d| {
            let p = nifti(d, |b| b[108..112].copy_from_slice(&1.0e9f32.to_le_bytes()));
            measure(d, &p)
        },
    );
    add(
        "nifti dim[0] out of range (either byte order)",
        &["cine.nii", "dim[0] = 2304 (9 in the other byte order)"],
        &|d| {
            let p = nifti(d, |b| set_i16(b, 40, 9));
            measure(d, &p)
        },
    );
    add(
        "nifti 32767 columns",
        &["cine.nii", "dim[1] (columns) = 32767"],
        &|d| {
            let p = nifti(d, |b| set_i16(b, 42, 32767));
            measure(d, &p)
        },
    );
    add(
        "nifti dimension of zero",
        &["cine.nii", "dim[2] (rows) = 0"],
        &|d| {
            let p = nifti(d, |b| set_i16(b, 44, 0));
            measure(d, &p)
        },
    );
    add(
        "nifti unknown datatype",
        &["cine.nii", "datatype = 999"],
        &|d| {
            let p = nifti(d, |b| set_i16(b, 70, 999));
            measure(d, &p)
        },
    );
    add(
        "nifti bitpix disagreeing with the datatype",
        &["cine.nii", "bitpix = 0"],
        &|d| {
            // bitpix at byte 72 (nifti1.h); the reader library sizes the data from it.
            let p = nifti(d, |b| set_i16(b, 72, 0));
            measure(d, &p)
        },
    );
    add(
        "nifti zero voxel size",
        &["zero_pixdim.nii", "pixdim"],
        &|d| measure(d, &fixture("nifti/zero_pixdim.nii")),
    );
    add("nifti.gz not gzip", &["cine.nii.gz"], &|d| {
        let p = d.join("cine.nii.gz");
        write(&p, b"not gzip at all");
        measure(d, &p)
    });

    // DICOM folders, through `measure` (committed fixtures made by pydicom, and patches).
    for (name, dir, word) in [
        ("dicom truncated file", "bad_truncated", "IM0"),
        (
            "dicom missing PixelSpacing",
            "bad_missing_spacing",
            "PixelSpacing (0028,0030)",
        ),
        (
            "dicom mixed orientations",
            "bad_mixed_orientation",
            "ImageOrientationPatient (0020,0037)",
        ),
        (
            "dicom duplicate position",
            "bad_duplicate_position",
            "TriggerTime (0018,1060)",
        ),
        (
            "dicom unequal frames per slice",
            "bad_unequal_frames",
            "unequal frame counts",
        ),
        (
            "dicom JPEG 2000 pixel data",
            "bad_jpeg2000",
            "transfer syntax",
        ),
        ("dicom two series, none chosen", "two_series", "--series"),
    ] {
        let expect: &'static [&'static str] = Box::leak(Box::new([dir, word]));
        add(name, expect, &|d| {
            measure(d, &fixture(&format!("dicom/{dir}")))
        });
    }
    add(
        "dicom element longer than the file",
        &["unknown-vr-4gib-length.dcm", "(0008,0060)"],
        &|d| {
            let dir = d.join("dcm");
            std::fs::create_dir_all(&dir).unwrap();
            let from = Path::new(env!("CARGO_MANIFEST_DIR"))
                .join("fuzz/regressions/dicom_file/unknown-vr-4gib-length.dcm");
            std::fs::copy(from, dir.join("unknown-vr-4gib-length.dcm")).unwrap();
            measure(d, &dir)
        },
    );
    add(
        "dicom BitsStored 0",
        &["IM0000.dcm", "BitsStored (0028,0101)"],
        &|d| {
            let dir = d.join("dcm");
            copy_dir(&fixture("dicom/sorted"), &dir);
            let p = dir.join("IM0000.dcm");
            let mut b = std::fs::read(&p).unwrap();
            // (0028,0101) US, length 2 (explicit VR little endian): the value follows.
            let tag = [0x28, 0x00, 0x01, 0x01, b'U', b'S', 2, 0];
            let at = b
                .windows(8)
                .position(|w| w == tag)
                .expect("BitsStored present")
                + 8;
            b[at..at + 2].copy_from_slice(&0u16.to_le_bytes());
            write(&p, b);
            measure(d, &dir)
        },
    );
    add(
        "folder without images",
        &["empty", "no image series"],
        &|d| {
            let dir = d.join("empty");
            std::fs::create_dir_all(&dir).unwrap();
            write(&dir.join("notes.txt"), "nothing here");
            measure(d, &dir)
        },
    );

    // Raw k-space folders, through `reconstruct`.
    add("kspace real dtype", &["slice_00.npy", "complex64"], &|d| {
        let k = kspace(d);
        write(
            &k.join("slice_00.npy"),
            npy("<f4", &[2, 8, 48, 48], &f32s(&vec![0.0; 2 * 8 * 48 * 48])),
        );
        reconstruct(d, &k, &[])
    });
    add("kspace slice missing", &["slice_03.npy", "missing"], &|d| {
        let k = kspace(d);
        std::fs::remove_file(k.join("slice_03.npy")).unwrap();
        reconstruct(d, &k, &[])
    });
    add(
        "kspace header claims 2^31 frames",
        &["slice_00.npy", "frame = 2147483648"],
        &|d| {
            let k = kspace(d);
            write(
                &k.join("slice_00.npy"),
                npy("<c8", &[2, 1 << 31, 48, 48], &[0; 64]),
            );
            reconstruct(d, &k, &[])
        },
    );
    add(
        "kspace non-finite sample",
        &["slice_02.npy", "non-finite"],
        &|d| {
            let k = kspace(d);
            let mut v = vec![0.5f32; 2 * 2 * 8 * 48 * 48];
            v[1001] = f32::INFINITY;
            write(
                &k.join("slice_02.npy"),
                npy("<c8", &[2, 8, 48, 48], &f32s(&v)),
            );
            reconstruct(d, &k, &[])
        },
    );
    add(
        "kspace slice of another shape",
        &["slice_04.npy", "shape"],
        &|d| {
            let k = kspace(d);
            write(
                &k.join("slice_04.npy"),
                npy(
                    "<c8",
                    &[2, 8, 40, 48],
                    &f32s(&vec![0.5; 2 * 2 * 8 * 40 * 48]),
                ),
            );
            reconstruct(d, &k, &[])
        },
    );
    add(
        "noise covariance of the wrong size",
        &["noise_cov.npy", "coil covariance"],
        &|d| {
            let k = kspace(d);
            write(
                &k.join("noise_cov.npy"),
                npy("<c8", &[3, 3], &f32s(&[1.0; 18])),
            );
            reconstruct(d, &k, &[])
        },
    );
    add(
        "acceleration beyond the phase encodes",
        &["acceleration R = 100"],
        &|d| {
            let k = kspace(d);
            let mut a = reconstruct(d, &k, &[]);
            a[6] = "100".into();
            a
        },
    );
    add(
        "calibration wider than the matrix",
        &["400 calibration (ACS) lines"],
        &|d| {
            let k = kspace(d);
            let mut a = reconstruct(d, &k, &[]);
            a[8] = "400".into();
            a
        },
    );
    add("unknown method parameter", &["parameter `colour`"], &|d| {
        let k = kspace(d);
        reconstruct(d, &k, &["--set", "colour=3"])
    });

    // Study plans, through `run`.
    add("plan TOML syntax", &["plan.toml:2"], &|d| {
        plan(d, "[study]\ncode = = 1\n")
    });
    add("plan unknown key", &["plan.toml", "colour"], &|d| {
        plan(
            d,
            &good_plan(&[("[sampling]\n", "[sampling]\ncolour = \"red\"\n")]),
        )
    });
    add(
        "plan acceleration 0",
        &["plan.toml", "accelerations"],
        &|d| {
            plan(
                d,
                &good_plan(&[("accelerations = [2]", "accelerations = [0]")]),
            )
        },
    );
    add(
        "plan unknown method",
        &["plan.toml", "methods", "magic"],
        &|d| plan(d, &good_plan(&[("zero-filled = {}", "magic = {}")])),
    );
    add(
        "plan k-space path that does not exist",
        &["plan.toml", "kspace", "nowhere"],
        &|d| {
            let k = base().join("sim/kspace").display().to_string();
            plan(d, &good_plan(&[(k.as_str(), "nowhere")]))
        },
    );
    add(
        "plan phantom with 2^31 frames",
        &["plan.toml", "frames"],
        &|d| {
            plan(
            d,
            "[study]\ncode = \"BAD-02\"\n\n[synthetic]\nframes = 2147483648\n\n[[subject]]\ncode = \"P1\"\nphantom = { edv_ml = 140, ef_pct = 55 }\n\n[sampling]\npatterns = [\"equispaced\"]\naccelerations = [2]\n\n[methods]\nzero-filled = {}\n",
        )
        },
    );

    // `agreement` tables.
    add("csv column missing", &["table.csv", "`b`"], &|d| {
        agreement(d, "a,c\n1,2\n3,4\n5,6\n")
    });
    add(
        "csv text in a number cell",
        &["table.csv", "line 3", "`a`"],
        &|d| agreement(d, "a,b\n50,51\nfifty,52\n53,54\n"),
    );
    add("csv ragged row", &["table.csv", "line 3"], &|d| {
        agreement(d, "a,b\n50,51\n52\n53,54\n")
    });
    add("csv empty", &["table.csv"], &|d| agreement(d, ""));
    add(
        "csv value beyond 1e15",
        &["table.csv", "line 3", "`b`", "1e15"],
        &|d| agreement(d, "a,b\n50,51\n52,6e78\n53,54\n"),
    );
    add("csv NaN cell", &["table.csv", "line 2"], &|d| {
        agreement(d, "a,b\nNaN,51\n52,53\n53,54\n")
    });

    // `report` on a results file.
    add("results.json not JSON", &["results.json", "line 1"], &|d| {
        let p = write(&d.join("results.json"), "{\"study\": ");
        vec!["report".into(), p]
    });
    add(
        "results.json of another shape",
        &["results.json", "missing field"],
        &|d| {
            let p = write(&d.join("results.json"), "{\"runs\": []}");
            vec!["report".into(), p]
        },
    );

    // `unblind` key and sheets.
    add(
        "key without accel_nominal",
        &["unblinding-key.csv", "accel_nominal"],
        &|d| {
            unblind(
                d,
                "case,subject,method,pattern\nC01,S1,reference,full\n",
                "C01,4,4,4,4,,,,\n",
            )
        },
    );
    add(
        "sheet with an unknown case",
        &["reader-01-scores.csv", "row 3", "C99"],
        &|d| unblind(d, KEY, "C01,4,4,4,4,,,,\nC99,4,4,4,4,,,,\n"),
    );
    add(
        "sheet score out of range",
        &["reader-01-scores.csv", "row 2", "overall_quality"],
        &|d| unblind(d, KEY, "C01,9,4,4,4,,,,\n"),
    );
    add(
        "sheet measurement not a number",
        &["reader-01-scores.csv", "row 2", "reader_ef_pct"],
        &|d| unblind(d, KEY, "C01,4,4,4,4,140,60,about half,\n"),
    );

    // Resource limits, set on the command line and in the environment.
    add(
        "array beyond --max-values",
        &["images.npy", "--max-values"],
        &|d| {
            let img = images(d);
            let mut a = measure(d, &img);
            a.extend(["--max-values".into(), "1000".into()]);
            a
        },
    );
    let d = root.join("limit-env");
    std::fs::create_dir_all(&d).unwrap();
    let img = images(&d);
    cases.push(Case {
        name: "axis beyond CINEGAUGE_MAX_EXTENT",
        args: measure(&d, &img),
        env: vec![("CINEGAUGE_MAX_EXTENT", "16")],
        expect: vec!["images.npy", "--max-extent"],
    });
    cases
}

#[test]
fn every_broken_input_is_refused_by_name_without_a_panic() {
    let root = tempfile::tempdir().unwrap();
    let cases = catalogue(root.path());
    assert!(
        cases.len() >= 40,
        "the catalogue holds {} cases",
        cases.len()
    );
    let mut failures = Vec::new();
    for c in &cases {
        let o = Command::new(env!("CARGO_BIN_EXE_cinegauge"))
            .args(&c.args)
            .envs(c.env.iter().copied())
            .env("RUST_BACKTRACE", "0")
            .output()
            .expect("binary runs");
        let err = String::from_utf8_lossy(&o.stderr);
        let mut wrong = Vec::new();
        if o.status.success() {
            wrong.push("exit code 0".to_string());
        }
        if o.status.code().is_none() {
            wrong.push("killed by a signal".to_string());
        }
        if err.contains("panicked") || err.contains("RUST_BACKTRACE") {
            wrong.push("panicked".to_string());
        }
        for w in &c.expect {
            if !err.contains(w) {
                wrong.push(format!("error does not name `{w}`"));
            }
        }
        if !wrong.is_empty() {
            failures.push(format!(
                "{}: {}\n    {}",
                c.name,
                wrong.join("; "),
                err.trim()
            ));
        }
    }
    assert!(
        failures.is_empty(),
        "{} of {} cases failed:\n{}",
        failures.len(),
        cases.len(),
        failures.join("\n")
    );
}

/// The fuzz targets' entry points on every seed-corpus file the fixtures give and on every
/// input the fuzzers found (each once crashed, hung or broke a contract; now each must pass).
#[test]
fn fuzz_findings_and_fixtures_pass_the_reader_contracts() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut replayed = 0;
    for (name, run) in cinegauge::fuzz::TARGETS {
        let dir = root.join("fuzz/regressions").join(name);
        if let Ok(list) = std::fs::read_dir(&dir) {
            for e in list {
                let p = e.unwrap().path();
                run(&std::fs::read(&p).unwrap());
                replayed += 1;
            }
        }
    }
    assert!(replayed >= 4, "only {replayed} regression inputs found");
    let manifest = std::fs::read_to_string(root.join("fuzz/Cargo.toml")).unwrap();
    for (name, _) in cinegauge::fuzz::TARGETS {
        assert!(
            manifest.contains(&format!("name = \"{name}\"")),
            "fuzz/Cargo.toml has no binary for target {name}"
        );
    }
    // A few fixtures through the same entry points: valid inputs must pass the contracts too.
    let f = |rel: &str| std::fs::read(fixture(rel)).unwrap();
    cinegauge::fuzz::dicom_file(&f("dicom/enhanced/IM0000.dcm"));
    cinegauge::fuzz::nifti(&f("nifti/scaled.nii"));
    cinegauge::fuzz::npz_images(&f("npy/archive/images.npz"));
    cinegauge::fuzz::kspace_npy(&f("ismrmrd/cine_kspace.npy"));
    cinegauge::fuzz::plan(&std::fs::read(root.join("demo-studies/tidewater.toml")).unwrap());
    cinegauge::fuzz::seeds(&std::fs::read(root.join("templates/seeds.toml")).unwrap());
}

/// Every file under `dir` with its bytes.
fn snapshot(dir: &Path) -> Vec<(PathBuf, Vec<u8>)> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            } else {
                let bytes = std::fs::read(&p).unwrap();
                out.push((p, bytes));
            }
        }
    }
    out.sort();
    out
}

fn sh(cmd: &str, args: &[&str]) -> bool {
    Command::new(cmd)
        .args(args)
        .status()
        .is_ok_and(|s| s.success())
}

/// A full disk and a read-only folder: a second `measure` into the folder of a first one
/// fails with an error naming the file and the cause, and leaves the first one's outputs
/// byte for byte as they were, with no partial file beside them. Needs root (a small
/// tmpfs is mounted); CI runs as root and sets CINEGAUGE_REQUIRE_MOUNT=1 so it cannot skip.
#[test]
fn a_full_disk_or_read_only_folder_leaves_earlier_outputs_intact() {
    let root = tempfile::tempdir().unwrap();
    let mnt = root.path().join("small");
    std::fs::create_dir_all(&mnt).unwrap();
    let m = mnt.to_str().unwrap();
    if !sh("mount", &["-t", "tmpfs", "-o", "size=1m", "tmpfs", m]) {
        assert!(
            std::env::var_os("CINEGAUGE_REQUIRE_MOUNT").is_none(),
            "cannot mount a tmpfs (root needed)"
        );
        eprintln!("skipped: mounting a tmpfs needs root");
        return;
    }
    struct Unmount(String);
    impl Drop for Unmount {
        fn drop(&mut self) {
            sh("umount", &[&self.0]);
        }
    }
    let _guard = Unmount(m.to_string());
    let img = images(root.path());
    let out = mnt.join("out");
    let run = |subject: &str| {
        Command::new(env!("CARGO_BIN_EXE_cinegauge"))
            .args([
                "measure",
                "--quiet",
                "--images",
                img.to_str().unwrap(),
                "--seeds",
                &seeds(),
            ])
            .args(["--out", out.to_str().unwrap(), "--subject", subject])
            .output()
            .unwrap()
    };
    let first = run("FIRST");
    assert!(first.status.success(), "{}", common::text(&first));
    let before = snapshot(&out);
    assert!(before.len() >= 3, "first run wrote {} files", before.len());

    // Fill the disk, leaving a few kilobytes: less than any output needs.
    let filler = mnt.join("filler");
    let mut f = std::fs::File::create(&filler).unwrap();
    let block = vec![7u8; 4096];
    while std::io::Write::write_all(&mut f, &block).is_ok() {}
    drop(f);
    let len = std::fs::metadata(&filler).unwrap().len();
    std::fs::OpenOptions::new()
        .write(true)
        .open(&filler)
        .unwrap()
        .set_len(len.saturating_sub(8192))
        .unwrap();
    let full = run("SECOND");
    let err = String::from_utf8_lossy(&full.stderr);
    assert_eq!(full.status.code(), Some(1), "{err}");
    assert!(
        err.contains(out.to_str().unwrap()) && err.contains("No space left on device"),
        "the error names the file and the cause: {err}"
    );
    assert!(!err.contains("panicked"), "{err}");
    assert_eq!(snapshot(&out), before, "the first run's outputs changed");
    std::fs::remove_file(&filler).unwrap();

    // Read-only: the same.
    assert!(sh("mount", &["-o", "remount,ro", m]));
    let ro = run("THIRD");
    let err = String::from_utf8_lossy(&ro.stderr);
    assert_eq!(ro.status.code(), Some(1), "{err}");
    assert!(
        err.contains(out.to_str().unwrap()) && err.contains("Read-only file system"),
        "the error names the file and the cause: {err}"
    );
    assert_eq!(snapshot(&out), before, "the first run's outputs changed");
}
