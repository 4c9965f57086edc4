//! The batch-scheduler path: `split` (unit list and Slurm scripts), `run-unit` (one array
//! task) and `gather` (the last job). The units are the ones `run` computes locally, so both
//! paths give byte-identical results.

use std::path::{Path, PathBuf};

use anyhow::Context;
use clap::Args;

use super::progress::{say, Stages};
use cinegauge::io::{self, write_atomic};
use cinegauge::pipeline::study::{self, UnitLine};
use cinegauge::plan;

const ARRAY: &str = include_str!("../../templates/array.sbatch");
const GATHER: &str = include_str!("../../templates/gather.sbatch");
const SUBMIT: &str = include_str!("../../templates/submit.sh");

/// Name of the unit list.
const UNITS: &str = "units.jsonl";

/// Arguments of `split`.
#[derive(Debug, Args)]
#[command(
    after_help = "Example:\n  cinegauge split study.toml --out /shared/study-run\n  \
bash /shared/study-run/submit.sh\n\n\
Writes DIR/units.jsonl (one line per work unit: index, stable id, what it is), \
DIR/array.sbatch (a Slurm array job, one task per unit, each running `cinegauge run-unit`), \
DIR/gather.sbatch (the gathering job) and DIR/submit.sh (submits both, the second after the \
first). DIR must be on a filesystem every node sees. Research use only; not for diagnostic use."
)]
pub struct SplitArgs {
    /// The study plan (TOML).
    #[arg(value_name = "PLAN.toml")]
    pub plan: PathBuf,
    /// Output folder of the study (shared by every node).
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    /// CPUs per task.
    #[arg(long, value_name = "N", default_value_t = 2)]
    pub cpus: usize,
}

/// Arguments of `run-unit`.
#[derive(Debug, Args)]
#[command(
    after_help = "Example:\n  cinegauge run-unit study.toml --index 7 --out /shared/study-run\n\n\
Runs unit number N of DIR/units.jsonl. A unit already stored is left as it is, and two \
processes running the same unit at once leave one whole copy. Research use only; not for \
diagnostic use."
)]
pub struct RunUnitArgs {
    /// The study plan (TOML).
    #[arg(value_name = "PLAN.toml")]
    pub plan: PathBuf,
    /// Line of DIR/units.jsonl, from 0 (the array task id).
    #[arg(long, value_name = "N")]
    pub index: usize,
    /// Output folder of the study (where `split` wrote units.jsonl).
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
}

/// Arguments of `gather`.
#[derive(Debug, Args)]
#[command(
    after_help = "Example:\n  cinegauge gather study.toml --out /shared/study-run\n\n\
Compares the stored units and writes DIR/results.json, DIR/results.csv and DIR/report.pdf, \
as `run` does. Missing units are named by id; with --partial the study is gathered from \
what exists, the missing units count as failed and the report says the study is partial. \
Research use only; not for diagnostic use."
)]
pub struct GatherArgs {
    /// The study plan (TOML).
    #[arg(value_name = "PLAN.toml")]
    pub plan: PathBuf,
    /// Output folder of the study.
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    /// Gather even when units are missing (the report is marked partial).
    #[arg(long)]
    pub partial: bool,
}

fn absolute(p: &Path) -> anyhow::Result<PathBuf> {
    std::path::absolute(p)
        .with_context(|| format!("{}: cannot make the path absolute", p.display()))
}

pub fn split(a: SplitArgs, quiet: bool) -> anyhow::Result<()> {
    anyhow::ensure!(a.cpus >= 1, "--cpus: at least 1");
    let p = plan::load(&a.plan).context("the study plan was refused")?;
    let lines = study::unit_lines(&p).context("hashing the inputs")?;
    io::ensure_dir(&a.out)?;
    let mut text = String::new();
    for l in &lines {
        text.push_str(&serde_json::to_string(l)?);
        text.push('\n');
    }
    write_atomic(&a.out.join(UNITS), text.as_bytes())?;
    let mem = study::unit_memory_mib(&p)?;
    let bin = absolute(&std::env::current_exe().context("locating the cinegauge binary")?)?;
    let fill = |t: &str| -> anyhow::Result<String> {
        Ok(t.replace("@STUDY@", &p.code)
            .replace("@LAST@", &lines.len().saturating_sub(1).to_string())
            .replace("@CPUS@", &a.cpus.to_string())
            .replace("@MEM_MB@", &mem.to_string())
            .replace("@OUT@", &absolute(&a.out)?.display().to_string())
            .replace("@PLAN@", &absolute(&a.plan)?.display().to_string())
            .replace("@BIN@", &bin.display().to_string()))
    };
    write_atomic(&a.out.join("array.sbatch"), fill(ARRAY)?.as_bytes())?;
    write_atomic(&a.out.join("gather.sbatch"), fill(GATHER)?.as_bytes())?;
    write_atomic(&a.out.join("submit.sh"), fill(SUBMIT)?.as_bytes())?;
    say(
        quiet,
        &format!(
            "{} units; wrote {}, array.sbatch ({} CPUs, {mem} MiB per task), gather.sbatch and submit.sh",
            lines.len(),
            a.out.join(UNITS).display(),
            a.cpus
        ),
    );
    Ok(())
}

/// Line `index` of DIR/units.jsonl.
fn unit_line(out: &Path, index: usize) -> anyhow::Result<UnitLine> {
    let path = out.join(UNITS);
    let text = std::fs::read_to_string(&path).with_context(|| {
        format!(
            "{}: cannot read the unit list (run `split` first)",
            path.display()
        )
    })?;
    let line = text.lines().nth(index).with_context(|| {
        format!(
            "{}: --index {index} is beyond the last unit ({} units)",
            path.display(),
            text.lines().count()
        )
    })?;
    serde_json::from_str(line).with_context(|| format!("{}: line {}", path.display(), index + 1))
}

pub fn run_unit(a: RunUnitArgs, quiet: bool) -> anyhow::Result<()> {
    let p = plan::load(&a.plan).context("the study plan was refused")?;
    let line = unit_line(&a.out, a.index)?;
    let (label, computed) = study::run_unit(&p, &a.out, &line.id)?;
    say(
        quiet,
        &format!(
            "unit {} ({label}): {}",
            a.index,
            if computed {
                "computed"
            } else {
                "already stored"
            }
        ),
    );
    Ok(())
}

pub fn gather(a: GatherArgs, quiet: bool) -> anyhow::Result<()> {
    let p = plan::load(&a.plan).context("the study plan was refused")?;
    let stages = Stages::new(quiet);
    let results = study::gather_stored(&p, &a.out, a.partial, &|s, d, t, m| {
        stages.update(s, d, t, m)
    })?;
    stages.finish();
    if !results.missing_units.is_empty() {
        say(
            quiet,
            &format!(
                "partial: {} units missing: {}",
                results.missing_units.len(),
                results.missing_units.join("; ")
            ),
        );
    }
    say(
        quiet,
        &format!(
            "gathered {} runs into {}\nResearch use only; not for diagnostic use.",
            results.runs.len(),
            a.out.display()
        ),
    );
    Ok(())
}
