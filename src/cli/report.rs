//! `cinegauge report`: the sign-off PDF rebuilt from a results file, without recomputing.

use std::path::PathBuf;

use anyhow::Context;
use clap::Args;

use super::progress::say;
use cinegauge::report;
use cinegauge::results::ResultsFile;

/// Arguments of `report`.
#[derive(Debug, Args)]
#[command(
    after_help = "Example:\n  cinegauge report cinegauge-demo/results.json --pdf signoff.pdf\n\n\
Reads a results.json written by `demo` (or a study run) and writes the PDF the same code \
writes there. Research use for protocol evaluation only; not for diagnostic use."
)]
pub struct ReportArgs {
    /// The results file.
    #[arg(value_name = "RESULTS.json")]
    pub results: PathBuf,
    /// Where to write the PDF (default: report.pdf beside the results file).
    #[arg(long, value_name = "FILE")]
    pub pdf: Option<PathBuf>,
}

pub fn run(a: ReportArgs, quiet: bool) -> anyhow::Result<()> {
    let mut results = ResultsFile::read(&a.results)?;
    if results.acceptance.is_none() && results.runs.iter().any(|r| r.method != "reference") {
        results.compare(&cinegauge::acceptance::default_criteria());
        say(
            quiet,
            "warning: the results file holds no verdicts; judged here against the default criteria",
        );
    }
    let pdf = a.pdf.unwrap_or_else(|| {
        a.results
            .parent()
            .map(|d| d.join("report.pdf"))
            .unwrap_or_else(|| PathBuf::from("report.pdf"))
    });
    let panels = a
        .results
        .parent()
        .map(|d| d.join("panels"))
        .filter(|d| d.is_dir());
    report::write(&results, &pdf, panels.as_deref()).context("writing the report")?;
    say(
        quiet,
        &format!(
            "wrote {}\nResearch use only; not for diagnostic use.",
            pdf.display()
        ),
    );
    Ok(())
}
