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

use crate::common;
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

/// `unblind` on sheets filled in by a rule whose statistics are known by construction:
/// every reader gives the reference 5, cg-sense 4 and zero-filled 3 on every item (medians
/// exactly those, quadratic-weighted kappa 1 for every pair), and reports EF as the tool's EF
/// plus 0, +1 or −1 pp, reader 3 leaning by subject (bias against the automated EF exactly 0;
/// against the reference, offsets and lean cancel, so the bias equals the mean of the tool's
/// own EF changes). Broken sheets
/// are refused naming the row and column.
#[test]
fn unblind_joins_sheets_and_refuses_bad_cells() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    let plan_text = PLAN.split("[[subject]]").next().unwrap().to_string()
        + r#"
[[subject]]
code = "U-1"
phantom = { edv_ml = 140.0, ef_pct = 52.0, heart_rate_bpm = 70.0, snr = 30.0 }
[[subject]]
code = "U-2"
phantom = { edv_ml = 170.0, ef_pct = 40.0, heart_rate_bpm = 75.0, snr = 30.0 }
[[subject]]
code = "U-3"
phantom = { edv_ml = 120.0, ef_pct = 60.0, heart_rate_bpm = 65.0, snr = 30.0 }

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
    let plan = d.join("plan.toml");
    std::fs::write(&plan, plan_text).unwrap();
    let run = d.join("run");
    let o = cinegauge(&[
        "run",
        plan.to_str().unwrap(),
        "--out",
        run.to_str().unwrap(),
        "--quiet",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let rs = d.join("rs");
    let o = cinegauge(&[
        "blind",
        plan.to_str().unwrap(),
        "--from",
        run.to_str().unwrap(),
        "--readers",
        "3",
        "--out",
        rs.to_str().unwrap(),
        "--quiet",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let key = std::fs::read_to_string(rs.join("unblinding-key.csv")).unwrap();
    let key: Vec<Vec<String>> = key
        .lines()
        .filter(|l| !l.starts_with('#'))
        .skip(1)
        .map(|l| l.split(',').map(String::from).collect())
        .collect();
    let results: serde_json::Value =
        serde_json::from_slice(&std::fs::read(run.join("results.json")).unwrap()).unwrap();
    let auto_ef = |k: &[String]| -> f64 {
        results["runs"]
            .as_array()
            .unwrap()
            .iter()
            .find(|r| r["subject"] == k[1].as_str() && r["method"] == k[2].as_str())
            .unwrap()["ef_pct"]
            .as_f64()
            .unwrap()
    };
    let returned = d.join("returned");
    std::fs::create_dir_all(&returned).unwrap();
    let mut sheets = Vec::new();
    for (r, offset) in [(1, 0.0), (2, 1.0), (3, -1.0)] {
        let name = format!("reader-{r:02}-scores.csv");
        let blank = std::fs::read_to_string(rs.join(&name)).unwrap();
        let mut lines = blank.lines();
        let mut filled = format!("{}\n", lines.next().unwrap());
        for l in lines {
            let code = l.split(',').next().unwrap();
            let k = key.iter().find(|k| k[0] == code).unwrap();
            let score = match k[2].as_str() {
                "reference" => 5,
                "cg-sense" => 4,
                _ => 3,
            };
            // Reader 3 also leans by subject (−0.5, 0, +0.5 pp), so the readers' EF is not
            // purely additive (the ICC needs residual spread); within one method the lean
            // sums to zero over the subjects, and it cancels against the same subject's
            // reference case.
            let lean = if r == 3 {
                match k[1].as_str() {
                    "U-1" => -0.5,
                    "U-2" => 0.0,
                    _ => 0.5,
                }
            } else {
                0.0
            };
            filled.push_str(&format!(
                "{code},{score},{score},{score},{score},,,{:.6},looked fine, mostly\n",
                auto_ef(k) + offset + lean
            ));
        }
        let p = returned.join(&name);
        std::fs::write(&p, filled).unwrap();
        sheets.push(p);
    }
    let mut args = vec![
        "unblind".to_string(),
        rs.to_str().unwrap().into(),
        "--key".into(),
        rs.join("unblinding-key.csv").to_str().unwrap().into(),
        "--results".into(),
        run.join("results.json").to_str().unwrap().into(),
        "--sheets".into(),
    ];
    args.extend(sheets.iter().map(|p| p.to_str().unwrap().to_string()));
    let argv: Vec<&str> = args.iter().map(String::as_str).collect();
    let o = cinegauge(&argv);
    assert!(o.status.success(), "{}", text(&o));
    let v: serde_json::Value =
        serde_json::from_slice(&std::fs::read(rs.join("reader-study.json")).unwrap()).unwrap();
    assert!(rs.join("reader-study.pdf").is_file());
    assert_eq!(v["readers"], 3);
    for c in v["conditions"].as_array().unwrap() {
        let expected = match c["method"].as_str().unwrap() {
            "reference" => 5.0,
            "cg-sense" => 4.0,
            _ => 3.0,
        };
        assert_eq!(c["cases"], 3);
        for item in c["items"].as_array().unwrap() {
            assert_eq!(item["median"].as_f64(), Some(expected));
            assert_eq!(item["n"], 9, "3 cases × 3 readers");
        }
        let bias = c["ef_vs_automated"]["bias_pp"].as_f64().unwrap();
        assert!(bias.abs() < 1e-6, "offsets 0, +1, −1 average to 0: {bias}");
        if c["method"] != "reference" {
            let method = c["method"].as_str().unwrap();
            let mean_change = ["U-1", "U-2", "U-3"]
                .iter()
                .map(|s| {
                    let find = |m: &str| {
                        key.iter()
                            .find(|k| k[1] == *s && k[2] == m)
                            .map(|k| auto_ef(k))
                            .unwrap()
                    };
                    find(method) - find("reference")
                })
                .sum::<f64>()
                / 3.0;
            let b = c["ef_vs_reference"]["bias_pp"].as_f64().unwrap();
            assert!((b - mean_change).abs() < 1e-5, "{b} vs {mean_change}");
        }
    }
    for k in v["kappa"].as_array().unwrap() {
        assert_eq!(k["kappa"].as_f64(), Some(1.0), "{k}");
    }
    let icc = v["ef_icc_a1"]
        .as_f64()
        .unwrap_or_else(|| panic!("{}", v["ef_icc_note"]));
    assert!(
        icc > 0.9 && icc < 1.0,
        "±1 pp reader offsets against a wide EF range: {icc}"
    );

    // The sign-off report takes the reader study as a section of its own.
    let pdf = d.join("signoff.pdf");
    let o = cinegauge(&[
        "report",
        run.join("results.json").to_str().unwrap(),
        "--reader-study",
        rs.join("reader-study.json").to_str().unwrap(),
        "--pdf",
        pdf.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", text(&o));
    if let Ok(o) = Command::new("pdftotext").arg(&pdf).arg("-").output() {
        let t = String::from_utf8_lossy(&o.stdout);
        let flat = t.split_whitespace().collect::<Vec<_>>().join(" ");
        assert!(
            flat.contains("Reader study") && flat.contains("quadratic-weighted kappa"),
            "reader-study pages in the report"
        );
    }

    // Broken sheets: each refused, naming the row and the column.
    let good = std::fs::read_to_string(&sheets[0]).unwrap();
    let second_row = good.lines().nth(1).unwrap().to_string();
    let code = second_row.split(',').next().unwrap().to_string();
    let cases: [(String, &str, &str); 4] = [
        (
            good.replacen(&code, "KZZZZZZ", 1),
            "row 2, column `case`",
            "not a case",
        ),
        (format!("{good}{second_row}\n"), "column `case`", "twice"),
        (
            good.replacen(&format!("{code},4,"), &format!("{code},7,"), 1)
                .replacen(&format!("{code},5,"), &format!("{code},7,"), 1)
                .replacen(&format!("{code},3,"), &format!("{code},7,"), 1),
            "row 2, column `overall_quality`",
            "1 to 5",
        ),
        (
            {
                let mut f: Vec<String> = second_row.split(',').map(String::from).collect();
                f[7] = "sixty".into();
                good.replacen(&second_row, &f.join(","), 1)
            },
            "row 2, column `reader_ef_pct`",
            "number",
        ),
    ];
    for (i, (content, place, why)) in cases.iter().enumerate() {
        let p = returned.join(format!("reader-0{}-scores.csv", i + 5));
        std::fs::write(&p, content).unwrap();
        let o = cinegauge(&[
            "unblind",
            rs.to_str().unwrap(),
            "--key",
            rs.join("unblinding-key.csv").to_str().unwrap(),
            "--sheets",
            p.to_str().unwrap(),
        ]);
        assert!(!o.status.success(), "case {i} accepted");
        let t = text(&o);
        assert!(t.contains(place) && t.contains(why), "case {i}: {t}");
        assert!(!t.contains("panicked"), "{t}");
    }
}
