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
    /// Add the reader study's pages (reader-study.json written by `unblind`).
    #[arg(long, value_name = "FILE")]
    pub reader_study: Option<PathBuf>,
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
    let reader = match &a.reader_study {
        Some(p) => {
            let bytes = std::fs::read(p).with_context(|| format!("reading {}", p.display()))?;
            let study: cinegauge::blind::unblind::ReaderStudy = serde_json::from_slice(&bytes)
                .with_context(|| format!("{}: not a reader-study file", p.display()))?;
            Some(cinegauge::blind::unblind::sections(&study))
        }
        None => None,
    };
    let bytes = report::render_with(
        &results,
        panels.as_deref(),
        reader
            .as_deref()
            .map(|s| (cinegauge::blind::unblind::TITLE, s)),
    );
    cinegauge::io::write_atomic(&pdf, &bytes).context("writing the report")?;
    say(
        quiet,
        &format!(
            "wrote {}\nResearch use only; not for diagnostic use.",
            pdf.display()
        ),
    );
    Ok(())
}
