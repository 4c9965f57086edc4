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

/// Arguments of `unblind`.
#[derive(Debug, Args)]
#[command(
    after_help = "Example:\n  cinegauge unblind reader-study --key reader-study/unblinding-key.csv \
--sheets returned/reader-01-scores.csv returned/reader-02-scores.csv --results study-run/results.json\n\n\
Joins the returned sheets with the key and writes DIR/reader-study.json and \
DIR/reader-study.pdf: score distributions per method and R, inter-reader agreement \
(quadratic-weighted kappa per pair of readers, ICC(A,1) of the readers' EF), and the readers' \
EF against the automated EF and against their own EF on the reference case. Sheets with \
unknown or repeated case codes or scores outside 1–5 are refused, naming the row and column. \
Research use only; not for diagnostic use."
)]
pub struct UnblindArgs {
    /// Folder for the analysis (usually the reader-study folder made by `blind`).
    #[arg(value_name = "DIR")]
    pub dir: PathBuf,
    /// The key file written by `blind`.
    #[arg(long, value_name = "FILE")]
    pub key: PathBuf,
    /// The returned score sheets (reader number from `reader-NN-scores.csv`).
    #[arg(long, value_name = "FILE", num_args = 1.., required = true)]
    pub sheets: Vec<PathBuf>,
    /// The study's results.json, for the automated EF of each case.
    #[arg(long, value_name = "FILE")]
    pub results: Option<PathBuf>,
    /// Print the analysis as JSON on stdout.
    #[arg(long)]
    pub json: bool,
}

pub fn unblind(a: UnblindArgs, quiet: bool) -> anyhow::Result<()> {
    use blind::unblind as u;
    let key = u::read_key(&a.key)?;
    let mut scores = Vec::new();
    let mut readers = Vec::new();
    for (n, path) in u::numbered(&a.sheets)? {
        scores.extend(u::read_sheet(&path, n, &key)?);
        readers.push(n);
    }
    let results = match &a.results {
        Some(p) => Some(
            cinegauge::results::ResultsFile::read(p)
                .with_context(|| format!("reading {}", p.display()))?,
        ),
        None => None,
    };
    let automated = |k: &u::KeyRow| {
        results.as_ref().and_then(|r| {
            r.runs
                .iter()
                .find(|x| {
                    x.subject == k.subject
                        && x.method == k.method
                        && x.pattern == k.pattern
                        && x.accel_nominal == k.accel_nominal
                })
                .and_then(|x| x.numbers.as_ref().map(|n| n.ef_pct))
        })
    };
    let study = u::analyse(&key, &scores, &readers, &automated);
    cinegauge::io::ensure_dir(&a.dir)?;
    let json = serde_json::to_string_pretty(&study)?;
    cinegauge::io::write_atomic(
        &a.dir.join("reader-study.json"),
        format!("{json}\n").as_bytes(),
    )?;
    cinegauge::io::write_atomic(&a.dir.join("reader-study.pdf"), &u::pdf(&study))?;
    if a.json {
        println!("{json}");
    }
    say(
        quiet,
        &format!(
            "{} sheets, {} scored cases: wrote {} and {}\nResearch use only; not for diagnostic use.",
            readers.len(),
            scores.len(),
            a.dir.join("reader-study.json").display(),
            a.dir.join("reader-study.pdf").display()
        ),
    );
    Ok(())
}
