//! Study plans: every refusal names the file, line and key; a run killed with SIGKILL and
//! started again gives the same `results.json` bytes as an uninterrupted run; a finished plan
//! reruns nothing; a changed parameter reruns only its method's units.

use std::path::{Path, PathBuf};
use std::process::Command;

use cinegauge::plan;

use crate::common;
use common::{cinegauge, text};

fn bin() -> PathBuf {
    PathBuf::from(env!("CARGO_BIN_EXE_cinegauge"))
}

/// A small synthetic plan (two methods at one R, three subjects: a few seconds per run).
const TINY: &str = r#"
[study]
code = "tiny"
rng_seed = 3

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
code = "T-1"
phantom = { edv_ml = 120.0, ef_pct = 58.0, heart_rate_bpm = 70.0, snr = 30.0 }

[[subject]]
code = "T-2"
phantom = { edv_ml = 150.0, ef_pct = 40.0, heart_rate_bpm = 80.0, snr = 30.0 }

[[subject]]
code = "T-3"
phantom = { edv_ml = 200.0, ef_pct = 30.0, heart_rate_bpm = 85.0, snr = 30.0 }

[sampling]
patterns = ["variable-density"]
accelerations = [3]
acs_lines = 10

[methods]
zero-filled = {}
cg-sense = { iterations = 10 }
"#;

fn write_plan(dir: &Path, text: &str) -> PathBuf {
    let p = dir.join("plan.toml");
    std::fs::write(&p, text).unwrap();
    p
}

fn run_log(out: &Path) -> serde_json::Value {
    serde_json::from_slice(&std::fs::read(out.join("run-log.json")).unwrap()).unwrap()
}

/// Parses `text` as a plan in `dir`, expecting a refusal; returns it.
fn refused(dir: &Path, text: &str) -> plan::PlanError {
    match plan::parse(text, "plan.toml", dir) {
        Ok(_) => panic!("plan accepted:\n{text}"),
        Err(e) => e,
    }
}

#[test]
fn bad_plans_are_refused_naming_line_and_key() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    // Unknown key: the parser names it and its line (line 4 of the text below).
    let e = refused(d, &TINY.replace("rows = 64", "rows = 64\nmatrix_size = 64"));
    assert!(e.message.contains("matrix_size"), "{e}");
    assert_eq!(
        e.line,
        Some(TINY.lines().position(|l| l == "rows = 64").unwrap() + 2)
    );
    // Missing file, named with its key and line.
    let missing = TINY.replace(
        "phantom = { edv_ml = 120.0, ef_pct = 58.0, heart_rate_bpm = 70.0, snr = 30.0 }",
        "kspace = \"nowhere/kspace\"\nseeds = \"nowhere/seeds.toml\"",
    );
    let e = refused(d, &missing);
    assert_eq!(e.key, "subject[1].seeds", "{e}");
    assert!(
        e.message.contains("does not exist") && e.line.is_some(),
        "{e}"
    );
    // Duplicate subject code.
    let e = refused(d, &TINY.replace("code = \"T-2\"", "code = \"T-1\""));
    assert_eq!(e.key, "subject[2].code", "{e}");
    assert!(e.message.contains("duplicate"), "{e}");
    let dup_line = TINY.lines().position(|l| l == "code = \"T-2\"").unwrap() + 1;
    assert_eq!(e.line, Some(dup_line));
    // A method that does not exist.
    let e = refused(d, &TINY.replace("zero-filled = {}", "zero-filed = {}"));
    assert_eq!(e.key, "methods.zero-filed", "{e}");
    // A method parameter that does not exist.
    let e = refused(d, &TINY.replace("iterations = 10", "iteration = 10"));
    assert_eq!(e.key, "methods.cg-sense", "{e}");
    assert!(e.message.contains("iteration"), "{e}");
    // A criterion on a quantity that is not computed.
    let crit = format!(
        "{TINY}\n[[criterion]]\nquantity = \"lvmass_g\"\nunit = \"pct\"\nmeasure = \"abs_bias\"\nlimit = 5.0\n"
    );
    let e = refused(d, &crit);
    assert_eq!(e.key, "criterion[1].quantity", "{e}");
    assert!(e.message.contains("lvmass_g"), "{e}");
    // An acceleration the pattern cannot take.
    let e = refused(
        d,
        &TINY.replace("accelerations = [3]", "accelerations = [30]"),
    );
    assert_eq!(e.key, "sampling.accelerations", "{e}");
    // The binary refuses before any work: non-zero exit, the file and key in the message,
    // no output folder made.
    let p = write_plan(d, &TINY.replace("zero-filled = {}", "zero-filed = {}"));
    let out = d.join("out");
    let o = cinegauge(&["run", p.to_str().unwrap(), "--out", out.to_str().unwrap()]);
    assert!(!o.status.success());
    let t = text(&o);
    assert!(
        t.contains("plan.toml:") && t.contains("methods.zero-filed"),
        "{t}"
    );
    assert!(!t.contains("panicked"), "{t}");
    assert!(!out.exists(), "nothing is written for a refused plan");
}

/// The templates are valid plans: the annotated one once its data exist (written by
/// `simulate`), the minimal one run end to end.
#[test]
fn templates_are_valid_plans() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let minimal = std::fs::read_to_string(root.join("templates/plan-minimal.toml")).unwrap();
    let annotated = std::fs::read_to_string(root.join("templates/plan-annotated.toml")).unwrap();
    let sim = d.join("S01");
    let o = cinegauge(&["simulate", "--out", sim.to_str().unwrap(), "--quiet"]);
    assert!(o.status.success(), "{}", text(&o));
    // The annotated plan names more data; lay out what it names from the simulated subject.
    let data = d.join("data");
    for s in ["S01", "S02"] {
        std::fs::create_dir_all(data.join(s)).unwrap();
        std::fs::copy(sim.join("seeds.toml"), data.join(s).join("seeds.toml")).unwrap();
    }
    std::fs::rename(sim.join("kspace"), data.join("S01/kspace")).unwrap();
    for series in ["reference", "net-r8"] {
        let to = data.join("S02").join(series);
        std::fs::create_dir_all(&to).unwrap();
        for f in std::fs::read_dir(sim.join("reference")).unwrap().flatten() {
            std::fs::copy(f.path(), to.join(f.file_name())).unwrap();
        }
    }
    let p = plan::parse(&annotated, "plan-annotated.toml", d).expect("annotated template");
    assert_eq!(p.subjects.len(), 3);
    assert_eq!(p.methods.len(), 5);
    assert_eq!(p.sampling.specs.len(), 6, "2 patterns × 3 R");
    assert_eq!(p.criteria.len(), 3);
    // The minimal plan against the simulated subject, run for real.
    std::fs::rename(data.join("S01/kspace"), sim.join("kspace")).unwrap();
    let p = write_plan(d, &minimal);
    let out = d.join("my-study");
    let o = cinegauge(&["run", p.to_str().unwrap(), "--out", out.to_str().unwrap()]);
    assert!(o.status.success(), "{}", text(&o));
    let v: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("results.json")).unwrap()).unwrap();
    assert_eq!(
        v["runs"].as_array().unwrap().len(),
        3,
        "reference + cg-sense at R 4, 8"
    );
    assert!(out.join("report.pdf").is_file());

    // Image series given per method: an external series identical to the reference measures
    // the same, and a slice-spacing override scales every volume by its ratio (method of
    // discs, V = Σ area × spacing: doubling the spacing doubles EDV and ESV, EF unchanged).
    let series_plan = r#"
[study]
code = "given-series"

[[subject]]
code = "G-1"
seeds = "S01/seeds.toml"
[[subject.series]]
method = "reference"
path = "S01/reference"
[[subject.series]]
method = "external:copy"
pattern = "variable-density"
accel = 6
accel_effective = 5.2
path = "S01/reference"

[[subject]]
code = "G-2"
seeds = "S01/seeds.toml"
geometry = { slice_spacing_mm = 20.0 }
[[subject.series]]
method = "reference"
path = "S01/reference"

[outputs]
pdf = false
panels = false
"#;
    let p = d.join("series.toml");
    std::fs::write(&p, series_plan).unwrap();
    let out = d.join("given");
    let o = cinegauge(&["run", p.to_str().unwrap(), "--out", out.to_str().unwrap()]);
    assert!(o.status.success(), "{}", text(&o));
    assert!(!out.join("report.pdf").exists(), "outputs.pdf = false");
    let v: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("results.json")).unwrap()).unwrap();
    let runs = v["runs"].as_array().unwrap();
    assert_eq!(runs.len(), 3);
    let (r, ext, spaced) = (&runs[0], &runs[1], &runs[2]);
    assert_eq!(ext["method"], "external:copy");
    assert_eq!(ext["accel_effective"], 5.2);
    assert_eq!(r["ef_pct"], ext["ef_pct"], "same images, same EF");
    let sidecar: serde_json::Value =
        serde_json::from_slice(&std::fs::read(sim.join("reference/geometry.json")).unwrap())
            .unwrap();
    let ratio = 20.0 / sidecar["slice_spacing_mm"].as_f64().unwrap();
    for q in ["edv_ml", "esv_ml"] {
        let (a, b) = (r[q].as_f64().unwrap(), spaced[q].as_f64().unwrap());
        // Only the rounding of the two sums of products differs.
        assert!((b / a - ratio).abs() < 1e-9, "{q}: {b} / {a} vs {ratio}");
    }
    let (ea, eb) = (
        r["ef_pct"].as_f64().unwrap(),
        spaced["ef_pct"].as_f64().unwrap(),
    );
    assert!((ea - eb).abs() < 1e-9, "EF {ea} vs {eb}");
}

/// Polls until `dir` holds at least `n` finished unit folders.
fn wait_for_units(dir: &Path, n: usize, child: &mut std::process::Child) -> bool {
    for _ in 0..6000 {
        let done = std::fs::read_dir(dir)
            .map(|l| {
                l.flatten()
                    .filter(|e| !e.file_name().to_string_lossy().starts_with('.'))
                    .count()
            })
            .unwrap_or(0);
        if done >= n {
            return true;
        }
        if child.try_wait().unwrap().is_some() {
            return false;
        }
        std::thread::sleep(std::time::Duration::from_millis(5));
    }
    false
}

#[test]
fn killed_run_resumes_to_identical_results_and_cache_reruns_only_what_changed() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    let p = write_plan(d, TINY);
    let plan = p.to_str().unwrap();
    // An uninterrupted run.
    let clean = d.join("clean");
    let o = cinegauge(&["run", plan, "--out", clean.to_str().unwrap(), "--quiet"]);
    assert!(o.status.success(), "{}", text(&o));
    assert!(o.stderr.is_empty(), "--quiet prints nothing: {}", text(&o));
    let expected = std::fs::read(clean.join("results.json")).unwrap();
    assert_eq!(run_log(&clean)["computed"], 9);
    // A run killed (SIGKILL) once the first subject's units are stored, then run again.
    let resumed = d.join("resumed");
    let mut child = Command::new(bin())
        .args(["run", plan, "--out", resumed.to_str().unwrap(), "--quiet"])
        .spawn()
        .unwrap();
    let mid = wait_for_units(&resumed.join("units"), 3, &mut child);
    child.kill().unwrap();
    child.wait().unwrap();
    assert!(mid, "the run ended before it could be killed mid-way");
    assert!(
        !resumed.join("results.json").exists(),
        "killed before gathering"
    );
    let o = cinegauge(&["status", plan, "--out", resumed.to_str().unwrap()]);
    let t = text(&o);
    assert!(t.contains("pending") && t.contains("done"), "{t}");
    let o = cinegauge(&["run", plan, "--out", resumed.to_str().unwrap()]);
    assert!(o.status.success(), "{}", text(&o));
    let log = run_log(&resumed);
    assert!(log["reused"].as_u64().unwrap() >= 3, "{log}");
    assert_eq!(
        std::fs::read(resumed.join("results.json")).unwrap(),
        expected,
        "resumed results differ from an uninterrupted run"
    );
    // A finished plan: nothing recomputed, same bytes.
    let o = cinegauge(&["run", plan, "--out", clean.to_str().unwrap(), "--quiet"]);
    assert!(o.status.success(), "{}", text(&o));
    assert_eq!(run_log(&clean)["computed"], 0);
    assert_eq!(std::fs::read(clean.join("results.json")).unwrap(), expected);
    // One method's parameter changed: only its three units (one per subject) rerun.
    write_plan(d, &TINY.replace("iterations = 10", "iterations = 12"));
    let o = cinegauge(&["run", plan, "--out", clean.to_str().unwrap(), "--quiet"]);
    assert!(o.status.success(), "{}", text(&o));
    let log = run_log(&clean);
    assert_eq!(log["computed"], 3, "{log}");
    let rerun: Vec<&str> = log["units"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|u| u["outcome"] == "computed")
        .map(|u| u["unit"].as_str().unwrap())
        .collect();
    assert!(rerun.iter().all(|u| u.contains("cg-sense")), "{rerun:?}");
    // A method added: only its units computed.
    write_plan(
        d,
        &TINY.replace(
            "iterations = 10 }",
            "iterations = 12 }\nxf-sparse = { iterations = 5 }",
        ),
    );
    let o = cinegauge(&["run", plan, "--out", clean.to_str().unwrap(), "--quiet"]);
    assert!(o.status.success(), "{}", text(&o));
    assert_eq!(run_log(&clean)["computed"], 3);
    // Status as JSON: every unit done.
    let o = cinegauge(&["status", plan, "--out", clean.to_str().unwrap(), "--json"]);
    let list: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let list = list.as_array().unwrap();
    assert_eq!(list.len(), 12);
    assert!(list.iter().all(|u| u["state"] == "done"), "{list:?}");
}

fn unit_ids(dir: &Path) -> Vec<String> {
    std::fs::read_to_string(dir.join("units.jsonl"))
        .unwrap()
        .lines()
        .map(|l| {
            serde_json::from_str::<serde_json::Value>(l).unwrap()["id"]
                .as_str()
                .unwrap()
                .to_string()
        })
        .collect()
}

/// The cluster path without a scheduler: `split`, every `run-unit` (one of them twice at
/// once), `gather` give the same results.json bytes as a local `run`; a missing unit is named
/// by `gather` and `--partial` marks the results; unit ids survive adding a method.
#[test]
fn split_run_unit_gather_equals_run() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    let p = write_plan(d, TINY);
    let plan = p.to_str().unwrap();
    let local = d.join("local");
    let o = cinegauge(&["run", plan, "--out", local.to_str().unwrap(), "--quiet"]);
    assert!(o.status.success(), "{}", text(&o));
    let expected = std::fs::read(local.join("results.json")).unwrap();

    let cluster = d.join("cluster");
    let c = cluster.to_str().unwrap();
    let o = cinegauge(&["split", plan, "--out", c]);
    assert!(o.status.success(), "{}", text(&o));
    let ids = unit_ids(&cluster);
    assert_eq!(ids.len(), 9);
    let log_keys: Vec<String> = run_log(&local)["units"]
        .as_array()
        .unwrap()
        .iter()
        .map(|u| u["key"].as_str().unwrap().to_string())
        .collect();
    assert_eq!(ids, log_keys, "the cluster's units are the local run's");
    let sbatch = std::fs::read_to_string(cluster.join("array.sbatch")).unwrap();
    assert!(sbatch.contains("#SBATCH --array=0-8"), "{sbatch}");
    assert!(sbatch.contains("run-unit") && sbatch.contains("$SLURM_ARRAY_TASK_ID"));
    assert!(std::fs::read_to_string(cluster.join("submit.sh"))
        .unwrap()
        .contains("--dependency=afterany:"));

    for i in (0..9).filter(|&i| i != 4) {
        let o = cinegauge(&[
            "run-unit",
            plan,
            "--index",
            &i.to_string(),
            "--out",
            c,
            "--quiet",
        ]);
        assert!(o.status.success(), "unit {i}: {}", text(&o));
    }
    // Unit 4 is missing: gather names it by id; --partial gathers the rest and says so.
    let o = cinegauge(&["gather", plan, "--out", c, "--quiet"]);
    assert!(!o.status.success());
    assert!(text(&o).contains(&ids[4]), "{}", text(&o));
    let o = cinegauge(&["gather", plan, "--out", c, "--partial", "--quiet"]);
    assert!(o.status.success(), "{}", text(&o));
    let v: serde_json::Value =
        serde_json::from_slice(&std::fs::read(cluster.join("results.json")).unwrap()).unwrap();
    assert_eq!(v["missing_units"].as_array().unwrap().len(), 1);
    // Unit 4 by two processes at once: both succeed, one whole copy is stored.
    let spawn = || {
        Command::new(env!("CARGO_BIN_EXE_cinegauge"))
            .args(["run-unit", plan, "--index", "4", "--out", c, "--quiet"])
            .spawn()
            .unwrap()
    };
    let (mut a, mut b) = (spawn(), spawn());
    assert!(a.wait().unwrap().success() && b.wait().unwrap().success());
    let o = cinegauge(&["gather", plan, "--out", c, "--quiet"]);
    assert!(o.status.success(), "{}", text(&o));
    assert_eq!(
        std::fs::read(cluster.join("results.json")).unwrap(),
        expected,
        "cluster path and local run differ"
    );
    let stored = std::fs::read_dir(cluster.join("units")).unwrap().count();
    assert_eq!(stored, 9, "no partial copies left behind");

    // A method added: every earlier id is still there, in the same order.
    write_plan(
        d,
        &TINY.replace(
            "iterations = 10 }",
            "iterations = 10 }\nxf-sparse = { iterations = 5 }",
        ),
    );
    let again = d.join("again");
    let o = cinegauge(&["split", plan, "--out", again.to_str().unwrap(), "--quiet"]);
    assert!(o.status.success(), "{}", text(&o));
    let new_ids = unit_ids(&again);
    assert_eq!(new_ids.len(), 12);
    let kept: Vec<&String> = new_ids.iter().filter(|i| ids.contains(i)).collect();
    assert_eq!(kept, ids.iter().collect::<Vec<_>>());
    // A changed parameter: the old list's cg-sense unit (line 2) is no longer in the plan,
    // and run-unit says so instead of running something else.
    write_plan(d, &TINY.replace("iterations = 10", "iterations = 12"));
    let o = cinegauge(&["run-unit", plan, "--index", "2", "--out", c]);
    assert!(!o.status.success());
    assert!(text(&o).contains("split again"), "{}", text(&o));
}

/// Waits until none of `jobs` is queued or running (Slurm's `squeue`), at most `secs`.
fn wait_for_jobs(jobs: &[&str], secs: u64) {
    for _ in 0..secs * 2 {
        let o = Command::new("squeue")
            .args(["-h", "-o", "%i", "-j", &jobs.join(",")])
            .output()
            .expect("squeue runs");
        if String::from_utf8_lossy(&o.stdout).trim().is_empty() {
            return;
        }
        std::thread::sleep(std::time::Duration::from_millis(500));
    }
    panic!("Slurm jobs {jobs:?} still queued or running after {secs} s");
}

/// The cluster path on a real single-node Slurm (started by `.ci/slurm-up`, which `.ci/run`
/// calls; run with `--ignored` and SLURM_CONF set): the array job and the dependent gather
/// job give results.json byte-identical to a local `run`. A task that ended without storing
/// its unit (its folder removed, as after a task killed before its rename): `gather` names
/// the unit, and re-submitting just that array index completes the study. Fails loudly when
/// Slurm is not there.
#[test]
#[ignore = "needs a running Slurm (.ci/slurm-up); .ci/run runs it"]
fn slurm_array_job_equals_local_run() {
    assert!(
        std::env::var_os("SLURM_CONF").is_some(),
        "SLURM_CONF is not set: start Slurm with .ci/slurm-up"
    );
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    let p = write_plan(d, TINY);
    let plan = p.to_str().unwrap();
    let local = d.join("local");
    let o = cinegauge(&["run", plan, "--out", local.to_str().unwrap(), "--quiet"]);
    assert!(o.status.success(), "{}", text(&o));
    let expected = std::fs::read(local.join("results.json")).unwrap();
    let cluster = d.join("cluster");
    let c = cluster.to_str().unwrap();
    let o = cinegauge(&["split", plan, "--out", c, "--cpus", "1", "--quiet"]);
    assert!(o.status.success(), "{}", text(&o));
    let o = Command::new("bash")
        .arg(cluster.join("submit.sh"))
        .output()
        .expect("bash runs");
    assert!(o.status.success(), "sbatch failed: {}", text(&o));
    let ids = String::from_utf8_lossy(&o.stdout).trim().to_string();
    let jobs: Vec<&str> = ids.split_whitespace().collect();
    assert_eq!(jobs.len(), 2, "array and gather job ids: {ids}");
    wait_for_jobs(&jobs, 240);
    let gathered = std::fs::read(cluster.join("results.json")).unwrap_or_else(|_| {
        let log = std::fs::read_to_string(cluster.join("slurm/gather.log")).unwrap_or_default();
        panic!("the gather job wrote no results: {log}")
    });
    assert!(
        gathered == expected,
        "Slurm results differ from the local run"
    );

    // A task whose unit never got stored: gather names it; re-submitting index 4 completes.
    let ids4 = unit_ids(&cluster)[4].clone();
    std::fs::remove_dir_all(cluster.join("units").join(&ids4)).unwrap();
    let o = cinegauge(&["gather", plan, "--out", c, "--quiet"]);
    assert!(
        !o.status.success() && text(&o).contains(&ids4),
        "{}",
        text(&o)
    );
    let o = Command::new("sbatch")
        .args(["--parsable", "--array=4"])
        .arg(cluster.join("array.sbatch"))
        .output()
        .expect("sbatch runs");
    assert!(o.status.success(), "{}", text(&o));
    let job = String::from_utf8_lossy(&o.stdout).trim().to_string();
    wait_for_jobs(&[job.split(';').next().unwrap()], 120);
    let o = cinegauge(&["gather", plan, "--out", c, "--quiet"]);
    assert!(o.status.success(), "{}", text(&o));
    assert!(
        std::fs::read(cluster.join("results.json")).unwrap() == expected,
        "re-submitted task: results differ from the local run"
    );
}
