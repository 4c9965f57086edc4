//! Reader-study packages: nothing identifying and nothing unblinding in any file but the key.
//!
//! Planted identifiers: `tests/fixtures/deid/plant_identifiers.py` writes invented values into
//! the attributes of the DICOM Basic Application Level Confidentiality Profile (PS3.15 Annex E)
//! and a private block of a DICOM series the tool wrote itself; that series is a subject of the
//! plan, and after `blind` a byte search of every output file finds none of them. pydicom
//! (PyPI) reads every exported file. Where Python with pydicom is missing the pydicom parts are
//! skipped, unless `CINEGAUGE_REQUIRE_PYDICOM` is set (as `.ci/run` does), which makes them fail.

use std::path::{Path, PathBuf};
use std::process::Command;

mod common;
use common::{cinegauge, text};

fn pydicom() -> bool {
    let ok = Command::new("python3")
        .args(["-c", "import pydicom, numpy"])
        .status()
        .is_ok_and(|s| s.success());
    assert!(
        ok || std::env::var_os("CINEGAUGE_REQUIRE_PYDICOM").is_none(),
        "CINEGAUGE_REQUIRE_PYDICOM is set but python3 cannot import pydicom and numpy"
    );
    ok
}

fn python(script: &str, arg: &Path) -> serde_json::Value {
    let path = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures/deid")
        .join(script);
    let o = Command::new("python3").arg(path).arg(arg).output().unwrap();
    assert!(o.status.success(), "{}", text(&o));
    serde_json::from_slice(&o.stdout).unwrap()
}

fn files_under(dir: &Path) -> Vec<PathBuf> {
    let mut out = Vec::new();
    for e in std::fs::read_dir(dir).unwrap().flatten() {
        let p = e.path();
        if p.is_dir() {
            out.extend(files_under(&p));
        } else {
            out.push(p);
        }
    }
    out.sort();
    out
}

fn contains(hay: &[u8], needle: &str) -> bool {
    hay.windows(needle.len()).any(|w| w == needle.as_bytes())
}

const PLAN: &str = r#"
[study]
code = "reader-check"

[synthetic]
slices = 12
slice_thickness_mm = 8.0
slice_gap_mm = 2.0
pixel_mm = 2.5
rows = 64
cols = 64
frames = 12
coils = 4

[[subject]]
code = "GIVEN-SERIES-01"
seeds = "sim/seeds.toml"
[[subject.series]]
method = "reference"
path = "planted/dicom"
[[subject.series]]
method = "external:learned-net"
pattern = "variable-density"
accel = 6
path = "sim/reference"

[[subject]]
code = "PHANTOM-SUBJ-01"
phantom = { edv_ml = 140.0, ef_pct = 52.0, heart_rate_bpm = 70.0, snr = 30.0 }

[sampling]
patterns = ["variable-density"]
accelerations = [3]
acs_lines = 10

[methods]
zero-filled = {}
cg-sense = { iterations = 10 }

[outputs]
pdf = false
panels = false
"#;

#[test]
fn blinded_packages_carry_no_identifiers_and_no_design() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    let sim = d.join("sim");
    let o = cinegauge(&["simulate", "--out", sim.to_str().unwrap(), "--quiet"]);
    assert!(o.status.success(), "{}", text(&o));
    let planted_dir = d.join("planted");
    let o = cinegauge(&[
        "reconstruct",
        "--kspace",
        sim.join("kspace").to_str().unwrap(),
        "--pattern",
        "full",
        "--method",
        "reference",
        "--dicom",
        "--subject",
        "GIVEN-SERIES-01",
        "--out",
        planted_dir.to_str().unwrap(),
        "--quiet",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let with_python = pydicom();
    let mut planted: Vec<String> = Vec::new();
    if with_python {
        let v = python("plant_identifiers.py", &planted_dir.join("dicom"));
        assert!(v["files"].as_u64().unwrap() > 0);
        planted = v["planted"]
            .as_array()
            .unwrap()
            .iter()
            .map(|s| s.as_str().unwrap().to_string())
            .collect();
        // The planted values are really in the input.
        let first = files_under(&planted_dir.join("dicom")).remove(0);
        let bytes = std::fs::read(first).unwrap();
        assert!(
            planted.iter().all(|p| contains(&bytes, p)),
            "planting worked"
        );
    }
    let plan = d.join("plan.toml");
    std::fs::write(&plan, PLAN).unwrap();
    let run = d.join("run");
    let o = cinegauge(&[
        "run",
        plan.to_str().unwrap(),
        "--out",
        run.to_str().unwrap(),
        "--quiet",
    ]);
    assert!(o.status.success(), "{}", text(&o));

    let mut codes = Vec::new();
    for seed in ["7", "8"] {
        let out = d.join(format!("readers-{seed}"));
        let o = cinegauge(&[
            "blind",
            plan.to_str().unwrap(),
            "--from",
            run.to_str().unwrap(),
            "--readers",
            "3",
            "--rng-seed",
            seed,
            "--out",
            out.to_str().unwrap(),
        ]);
        assert!(o.status.success(), "{}", text(&o));
        let key = std::fs::read_to_string(out.join("unblinding-key.csv")).unwrap();
        assert!(key.starts_with("# "), "the key opens with its warning line");
        let rows: Vec<Vec<&str>> = key
            .lines()
            .filter(|l| !l.starts_with('#'))
            .skip(1)
            .map(|l| l.split(',').collect())
            .collect();
        assert_eq!(rows.len(), 2 + 3, "2 given series + 3 reconstructions");
        let case_codes: Vec<String> = rows.iter().map(|r| r[0].to_string()).collect();
        // Every sheet lists every case once, and the sheets' orders differ between readers.
        let mut orders = Vec::new();
        for r in 1..=3 {
            let sheet =
                std::fs::read_to_string(out.join(format!("reader-{r:02}-scores.csv"))).unwrap();
            let mut listed: Vec<&str> = sheet
                .lines()
                .skip(1)
                .map(|l| l.split(',').next().unwrap())
                .collect();
            orders.push(listed.join(" "));
            listed.sort_unstable();
            let mut expected: Vec<&str> = case_codes.iter().map(String::as_str).collect();
            expected.sort_unstable();
            assert_eq!(listed, expected, "reader {r}");
        }
        assert!(
            orders[0] != orders[1] || orders[1] != orders[2],
            "orders vary"
        );
        // Nothing but the key names a method, a pattern, an R, a subject or a planted value.
        let mut forbidden: Vec<String> = [
            "reference",
            "zero-filled",
            "cg-sense",
            "learned-net",
            "external:",
            "variable-density",
            "GIVEN-SERIES-01",
            "PHANTOM-SUBJ-01",
            "reader-check",
        ]
        .iter()
        .map(|s| s.to_string())
        .collect();
        forbidden.extend(planted.iter().cloned());
        // In text files also the shapes an acceleration is written in (in binary files such
        // short strings turn up by chance in pixel data).
        let text_only = ["R=", "R =", "accel", "2.2857", ",6,", ",3,"];
        for f in files_under(&out) {
            if f.ends_with("unblinding-key.csv") {
                continue;
            }
            let name = f.strip_prefix(&out).unwrap().to_string_lossy().into_owned();
            let bytes = std::fs::read(&f).unwrap();
            for w in &forbidden {
                assert!(!contains(&bytes, w), "{name} contains `{w}`");
                assert!(
                    !name.contains(w.as_str()),
                    "file name {name} contains `{w}`"
                );
            }
            if name.ends_with(".csv") {
                for w in text_only {
                    assert!(!contains(&bytes, w), "{name} contains `{w}`");
                }
            }
            // File times carry no trace of the writing order.
            let m = std::fs::metadata(&f).unwrap().modified().unwrap();
            if name.starts_with("cases") || name.ends_with("-scores.csv") {
                assert_eq!(
                    m.duration_since(std::time::UNIX_EPOCH).unwrap().as_secs(),
                    946_684_800,
                    "{name}"
                );
            }
        }
        if with_python {
            let v = python("read_all.py", &out.join("cases"));
            assert!(v["files"].as_u64().unwrap() > 0);
            let mut names: Vec<String> = v["patient_names"]
                .as_array()
                .unwrap()
                .iter()
                .map(|s| s.as_str().unwrap().to_string())
                .collect();
            names.sort();
            let mut expected = case_codes.clone();
            expected.sort();
            assert_eq!(names, expected, "each case's patient name is its code");
        }
        codes.push(case_codes);
    }
    // Different seeds, unrelated codes.
    assert!(codes[0].iter().all(|c| !codes[1].contains(c)));
    // The output folder must be new: a second blind into a used folder is refused.
    let o = cinegauge(&[
        "blind",
        plan.to_str().unwrap(),
        "--from",
        run.to_str().unwrap(),
        "--readers",
        "3",
        "--out",
        d.join("readers-7").to_str().unwrap(),
    ]);
    assert!(!o.status.success());
    assert!(text(&o).contains("not empty"), "{}", text(&o));
}
