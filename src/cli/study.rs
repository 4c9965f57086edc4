//! `cinegauge run` and `cinegauge status`: a study plan run as stored work units, and where
//! each unit stands.

use std::path::{Path, PathBuf};

use anyhow::Context;
use clap::Args;

use super::progress::{say, Stages};
use cinegauge::pipeline::study::{self, RunOutcome};
use cinegauge::plan::{self, Plan};

/// Arguments of `run`.
#[derive(Debug, Args)]
#[command(
    after_help = "Example:\n  cinegauge run demo-studies/tidewater.toml --out tidewater\n\n\
Runs every unit of the plan that is not stored yet in DIR/units (a unit is one subject × \
pattern × R × method, or one given image series), then compares and writes DIR/results.json, \
DIR/results.csv, DIR/report.pdf, DIR/panels/ and DIR/run-log.json (what was computed or reused, \
with timings). Stop it at any moment and run it again: finished units are kept, and a changed \
method parameter re-runs only that method's units. templates/plan-minimal.toml and \
templates/plan-annotated.toml show the plan format. Research use only; not for diagnostic use."
)]
pub struct RunArgs {
    /// The study plan (TOML).
    #[arg(value_name = "PLAN.toml")]
    pub plan: PathBuf,
    /// Output folder (created if needed); default: a folder named after the study code
    /// beside the plan.
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Seed of every random choice (phantom noise, pseudo-random lines), replacing the
    /// plan's `study.rng_seed`.
    #[arg(long, value_name = "N")]
    pub rng_seed: Option<u64>,
}

/// Arguments of `status`.
#[derive(Debug, Args)]
#[command(
    after_help = "Example:\n  cinegauge status demo-studies/tidewater.toml --out tidewater\n\n\
Lists every unit of the plan as done, failed (with the reason, e.g. a seed that could not \
grow) or pending, without running anything. Research use only; not for diagnostic use."
)]
pub struct StatusArgs {
    /// The study plan (TOML).
    #[arg(value_name = "PLAN.toml")]
    pub plan: PathBuf,
    /// Output folder of the run (default as for `run`).
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Seed of every random choice, as given to `run`.
    #[arg(long, value_name = "N")]
    pub rng_seed: Option<u64>,
    /// Print the list as JSON on stdout.
    #[arg(long)]
    pub json: bool,
}

fn load(path: &Path, rng_seed: Option<u64>) -> anyhow::Result<Plan> {
    let plan = plan::load(path).context("the study plan was refused; nothing was run")?;
    Ok(match rng_seed {
        Some(s) => plan.with_rng_seed(s),
        None => plan,
    })
}

fn out_dir(plan_path: &Path, plan: &Plan, out: Option<PathBuf>) -> PathBuf {
    out.unwrap_or_else(|| {
        plan_path
            .parent()
            .unwrap_or(Path::new("."))
            .join(&plan.code)
    })
}

/// Runs a plan with progress display and prints what happened.
pub fn run_plan(plan: &Plan, out: &Path, quiet: bool) -> anyhow::Result<RunOutcome> {
    let started = std::time::Instant::now();
    let stages = Stages::new(quiet);
    let outcome = study::run(plan, out, &|s, d, t, m| stages.update(s, d, t, m))
        .with_context(|| format!("running study {}", plan.code))?;
    stages.finish();
    let log = &outcome.log;
    for u in log.units.iter().filter(|u| u.message.is_some()) {
        say(
            quiet,
            &format!(
                "not computed: {}: {}",
                u.unit,
                u.message.as_deref().unwrap_or("")
            ),
        );
    }
    for r in outcome
        .results
        .runs
        .iter()
        .filter(|r| r.status == cinegauge::results::RunStatus::Failed)
    {
        say(
            quiet,
            &format!(
                "failed: {} {} {} R={}: {}",
                r.subject,
                r.method,
                r.pattern,
                r.accel_nominal,
                r.messages.join("; ")
            ),
        );
    }
    say(
        quiet,
        &format!(
            "{} units: {} computed, {} reused from earlier runs; wrote {} (wall time {:.1} s)\n\
             Research use only; not for diagnostic use.",
            log.units.len(),
            log.computed,
            log.reused,
            out.display(),
            started.elapsed().as_secs_f64()
        ),
    );
    Ok(outcome)
}

pub fn run(a: RunArgs, quiet: bool) -> anyhow::Result<()> {
    let plan = load(&a.plan, a.rng_seed)?;
    let out = out_dir(&a.plan, &plan, a.out);
    run_plan(&plan, &out, quiet).map(|_| ())
}

pub fn status(a: StatusArgs) -> anyhow::Result<()> {
    let plan = load(&a.plan, a.rng_seed)?;
    let out = out_dir(&a.plan, &plan, a.out);
    let list = study::status(&plan, &out).context("reading the stored units")?;
    if a.json {
        println!("{}", serde_json::to_string_pretty(&list)?);
        return Ok(());
    }
    for u in &list {
        match &u.message {
            Some(m) => println!("{:8} {}  ({m})", u.state, u.unit),
            None => println!("{:8} {}", u.state, u.unit),
        }
    }
    let count = |s: &str| list.iter().filter(|u| u.state == s).count();
    println!(
        "{} units: {} done, {} failed, {} pending",
        list.len(),
        count("done"),
        count("failed"),
        count("pending")
    );
    Ok(())
}
