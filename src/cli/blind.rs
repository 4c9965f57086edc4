//! `cinegauge blind`: reader-study packages from a study that has been run.

use std::path::PathBuf;

use anyhow::Context;
use clap::Args;

use super::progress::say;
use cinegauge::{blind, plan};

/// Arguments of `blind`.
#[derive(Debug, Args)]
#[command(
    after_help = "Example:\n  cinegauge run study.toml --out study-run\n  \
cinegauge blind study.toml --from study-run --readers 4 --rng-seed 20271 --out reader-study\n\n\
Writes DIR/cases/<code>/ (a de-identified DICOM series and preview.png per case), \
DIR/reader-NN-scores.csv (one per reader, cases in a balanced order), DIR/instructions.pdf \
and DIR/unblinding-key.csv, the only file that links codes to subjects and methods: keep it \
away from readers. Research use only; not for diagnostic use."
)]
pub struct BlindArgs {
    /// The study plan (TOML), already run.
    #[arg(value_name = "PLAN.toml")]
    pub plan: PathBuf,
    /// Output folder of the run (default as for `run`: the study code beside the plan).
    #[arg(long, value_name = "DIR")]
    pub from: Option<PathBuf>,
    /// Number of readers (one score sheet each).
    #[arg(long, value_name = "N")]
    pub readers: usize,
    /// Seed of the case codes and reading orders (record it with the study).
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub rng_seed: u64,
    /// New, empty folder for the packages.
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
}

pub fn run(a: BlindArgs, quiet: bool) -> anyhow::Result<()> {
    let p = plan::load(&a.plan).context("the study plan was refused")?;
    let from = a.from.unwrap_or_else(|| {
        a.plan
            .parent()
            .unwrap_or(std::path::Path::new("."))
            .join(&p.code)
    });
    let prepared = blind::prepare(&p, &from, a.readers, a.rng_seed, &a.out)
        .context("preparing the reader study")?;
    for l in &prepared.left_out {
        say(quiet, &format!("left out (its run failed): {l}"));
    }
    say(
        quiet,
        &format!(
            "{} cases for {} readers in {}; keep {} away from readers.\n\
             Research use only; not for diagnostic use.",
            prepared.cases.len(),
            prepared.sheets.len(),
            a.out.display(),
            a.out.join(blind::KEY_FILE).display()
        ),
    );
    Ok(())
}
