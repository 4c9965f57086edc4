//! `cinegauge agreement`: agreement statistics on any table of paired measurements.

use std::path::PathBuf;

use anyhow::Context;
use clap::Args;

use cinegauge::agreement_table::{analyse, Margin};
use cinegauge::io::table::read_columns;

/// Arguments of `agreement`.
#[derive(Debug, Args)]
#[command(
    after_help = "Examples:\n  cinegauge agreement readers.csv --columns reader1_ef,reader2_ef --margin ef_pct=5\n  \
cinegauge agreement readers.csv --columns r1,r2,r3 --json\n\n\
The table is CSV with a header row; lines starting with # are ignored. With two columns: \
Bland–Altman (bias, SD of differences, 95 % limits of agreement with approximate 95 % CIs, \
regression of difference on mean), Lin's concordance correlation, Pearson r, paired t-test and \
Wilcoxon signed-rank test, the difference taken as first column minus second; with --margin, \
equivalence by two one-sided tests, whether the limits lie within the margin, and the subjects \
a confirmatory study needs. With two or more columns: the six intraclass correlation forms \
with F-based 95 % CIs. Research use for protocol evaluation only; not for diagnostic use."
)]
pub struct AgreementArgs {
    /// CSV table with a header row.
    #[arg(value_name = "TABLE.csv")]
    pub table: PathBuf,
    /// Columns to compare, by header name, comma-separated (two or more).
    #[arg(
        long,
        value_name = "A,B[,C...]",
        value_delimiter = ',',
        required = true
    )]
    pub columns: Vec<String>,
    /// Declared margin for the difference of the first two columns, e.g. `ef_pct=5`.
    #[arg(long, value_name = "QUANTITY=VALUE")]
    pub margin: Option<String>,
    /// Bland–Altman on percentage differences (100·(A − B) / mean of the pair), for
    /// quantities whose spread grows with their size.
    #[arg(long)]
    pub percentage: bool,
    /// Machine-readable JSON on stdout instead of the text table.
    #[arg(long)]
    pub json: bool,
}

/// Parses `QUANTITY=VALUE`.
fn parse_margin(text: &str) -> anyhow::Result<Margin> {
    let (label, value) = text
        .split_once('=')
        .with_context(|| format!("--margin {text}: expected QUANTITY=VALUE, e.g. ef_pct=5"))?;
    let value: f64 = value
        .trim()
        .parse()
        .ok()
        .filter(|v: &f64| v.is_finite() && *v > 0.0)
        .with_context(|| format!("--margin {text}: `{value}` is not a positive number"))?;
    Ok(Margin {
        label: label.trim().to_string(),
        value,
    })
}

pub fn run(a: AgreementArgs) -> anyhow::Result<()> {
    anyhow::ensure!(
        a.columns.len() >= 2,
        "--columns: give at least two column names, comma-separated (found {})",
        a.columns.len()
    );
    if let Some(dup) = a
        .columns
        .iter()
        .enumerate()
        .find(|(i, c)| a.columns[..*i].contains(c))
    {
        anyhow::bail!("--columns: `{}` is named twice", dup.1);
    }
    let margin = a.margin.as_deref().map(parse_margin).transpose()?;
    anyhow::ensure!(
        margin.is_none() || a.columns.len() == 2,
        "--margin applies to the difference of two columns; {} were given",
        a.columns.len()
    );
    let values = read_columns(&a.table, &a.columns)?;
    let columns: Vec<(String, Vec<f64>)> = a.columns.iter().cloned().zip(values).collect();
    let result = analyse(&columns, margin, a.percentage)
        .with_context(|| format!("{}: columns {}", a.table.display(), a.columns.join(", ")))?;
    if a.json {
        println!("{}", serde_json::to_string_pretty(&result)?);
    } else {
        print!("{}", result.to_text());
    }
    Ok(())
}
