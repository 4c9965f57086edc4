//! `cinegauge demo`: the built-in synthetic study, end to end.

use std::path::PathBuf;

use anyhow::Context;
use clap::Args;

use super::progress::say;
use cinegauge::{demo, report};

/// Arguments of `demo`.
#[derive(Debug, Args)]
#[command(after_help = "Example:\n  cinegauge demo --out cinegauge-demo\n\n\
Writes DIR/results.json, DIR/results.csv and DIR/report.pdf. The numbers are for research and \
protocol evaluation only, not for diagnostic use.")]
pub struct DemoArgs {
    /// Output folder (created if needed).
    #[arg(long, value_name = "DIR", default_value = "cinegauge-demo")]
    pub out: PathBuf,
    /// Report file (default DIR/report.pdf).
    #[arg(long, value_name = "FILE")]
    pub pdf: Option<PathBuf>,
    /// Seed of every random choice (phantom noise).
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub rng_seed: u64,
}

pub fn run(a: DemoArgs, quiet: bool) -> anyhow::Result<()> {
    let started = std::time::Instant::now();
    let outcome = super::study::run_plan(&demo::plan(a.rng_seed), &a.out, quiet)
        .context("running the demo study")?;
    let results = outcome.results;
    let pdf = match a.pdf {
        Some(pdf) => {
            let panels = a.out.join("panels");
            report::write(&results, &pdf, Some(&panels)).context("writing the report")?;
            pdf
        }
        None => a.out.join("report.pdf"),
    };
    if !quiet {
        for r in &results.runs {
            let line = match &r.numbers {
                Some(n) => format!(
                    "{:6} {:12} {:10} R={:<2} EDV {:6.1} ml  ESV {:6.1} ml  EF {:5.1} %",
                    r.subject, r.method, r.pattern, r.accel_nominal, n.edv_ml, n.esv_ml, n.ef_pct
                ),
                None => format!(
                    "{:6} {:12} {:10} R={:<2} failed: {}",
                    r.subject,
                    r.method,
                    r.pattern,
                    r.accel_nominal,
                    r.messages.join("; ")
                ),
            };
            eprintln!("{line}");
        }
        if let Some(acc) = &results.acceptance {
            eprintln!(
                "\nagainst the default criteria: {}",
                acc.criteria_text.join("; ")
            );
            for v in &acc.verdicts {
                let missed: Vec<&str> = v
                    .checks
                    .iter()
                    .filter(|c| !c.pass)
                    .map(|c| c.criterion.as_str())
                    .collect();
                let why = match (v.failed_subjects.is_empty(), missed.is_empty()) {
                    (true, true) => String::new(),
                    (false, _) => format!(" (failed on {})", v.failed_subjects.join(", ")),
                    (true, false) => format!(" (missed: {})", missed.join("; ")),
                };
                eprintln!(
                    "{:16} {:16} R={:<2} {}{why}",
                    v.method,
                    v.pattern,
                    v.accel_nominal,
                    v.outcome.describe()
                );
            }
            for h in &acc.highest_passing {
                eprintln!(
                    "{} ({}): {}",
                    h.method,
                    h.pattern,
                    h.accel_nominal
                        .map(|r| format!("passes up to R = {r}"))
                        .unwrap_or_else(|| "the lowest R tested does not pass".into())
                );
            }
        }
    }
    say(
        quiet,
        &format!(
            "wrote {}, {} and {} (wall time {:.1} s)\nResearch use only; not for diagnostic use.",
            a.out.join("results.json").display(),
            a.out.join("results.csv").display(),
            pdf.display(),
            started.elapsed().as_secs_f64()
        ),
    );
    Ok(())
}
