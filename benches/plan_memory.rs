//! Peak memory of a study run against its number of subjects: the same synthetic plan with
//! one subject and with six, each run by the release binary in a fresh output folder, peak
//! resident set size read from the kernel's accounting of the finished child (`wait4`).
//! The pipeline holds one subject at a time, so the two peaks should be within 20 %.
//!
//! Run with `cargo bench --bench plan_memory`.

use std::path::Path;
use std::process::Command;

/// The demo's acquisition (13 slices of 80 × 96, 20 frames, 8 coils), two methods at R = 4.
fn plan(subjects: usize) -> String {
    let mut t = String::from(
        r#"
[study]
code = "memory-bench"

[synthetic]
slices = 13
slice_thickness_mm = 8.0
slice_gap_mm = 2.0
pixel_mm = 2.0
rows = 80
cols = 96
frames = 20
coils = 8

[sampling]
patterns = ["variable-density"]
accelerations = [4]
acs_lines = 12

[coils]
virtual_coils = 4

[methods]
zero-filled = {}
cg-sense = {}
"#,
    );
    for k in 0..subjects {
        t.push_str(&format!(
            "\n[[subject]]\ncode = \"M-{:02}\"\nphantom = {{ edv_ml = {:.1}, ef_pct = {:.1}, heart_rate_bpm = 70.0, snr = 25.0 }}\n",
            k + 1,
            130.0 + 15.0 * k as f64,
            60.0 - 5.0 * k as f64
        ));
    }
    t
}

/// Runs the binary on `plan_text` and returns (peak RSS in MiB, wall seconds).
// The child is reaped by `wait4` below (which also gives its resource usage), not by `Child::wait`.
#[allow(clippy::zombie_processes)]
fn peak_of(dir: &Path, name: &str, plan_text: &str) -> (f64, f64) {
    let plan = dir.join(format!("{name}.toml"));
    std::fs::write(&plan, plan_text).expect("plan written");
    let started = std::time::Instant::now();
    let child = Command::new(env!("CARGO_BIN_EXE_cinegauge"))
        .args([
            "run",
            plan.to_str().expect("utf-8 path"),
            "--quiet",
            "--out",
        ])
        .arg(dir.join(name))
        .spawn()
        .expect("binary starts");
    let pid = child.id() as libc::pid_t;
    let mut status = 0;
    // SAFETY: `rusage` is plain data the kernel fills in; the pid is our own child, waited for
    // once here (the `Child` handle is not waited on again).
    let mut usage: libc::rusage = unsafe { std::mem::zeroed() };
    let r = unsafe { libc::wait4(pid, &mut status, 0, &mut usage) };
    assert_eq!(r, pid, "wait4 on the run");
    assert!(
        libc::WIFEXITED(status) && libc::WEXITSTATUS(status) == 0,
        "run of {name} failed"
    );
    // Linux reports ru_maxrss in KiB.
    (
        usage.ru_maxrss as f64 / 1024.0,
        started.elapsed().as_secs_f64(),
    )
}

fn main() {
    let tmp = std::env::temp_dir().join(format!("cinegauge-plan-memory-{}", std::process::id()));
    std::fs::create_dir_all(&tmp).expect("temporary folder");
    let (one, t1) = peak_of(&tmp, "one-subject", &plan(1));
    let (six, t6) = peak_of(&tmp, "six-subjects", &plan(6));
    let _ = std::fs::remove_dir_all(&tmp);
    let ratio = six / one;
    println!("peak RSS, 1 subject : {one:8.1} MiB  ({t1:.1} s, 3 units)");
    println!("peak RSS, 6 subjects: {six:8.1} MiB  ({t6:.1} s, 18 units)");
    println!(
        "ratio 6 / 1: {ratio:.3} (target ≤ 1.20: {})",
        if ratio <= 1.2 { "met" } else { "NOT met" }
    );
}
