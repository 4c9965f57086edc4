//! Command-line interface: argument definitions and the commands they run.

mod agreement;
mod blind;
mod cluster;
mod demo;
mod inspect;
mod listing;
mod measure;
mod progress;
mod reconstruct;
mod report;
mod simulate;
mod study;
mod suggest;

use clap::{Parser, Subcommand};

/// Exit code when the work could not be done (bad input, failed write). Usage errors exit 2.
pub const EXIT_FAILURE: u8 = 1;

const ABOUT: &str = "Checks whether LV volumes and ejection fraction survive accelerated cardiac cine reconstruction.";

const LONG_ABOUT: &str = "\
Checks whether LV volumes and ejection fraction survive accelerated cardiac cine reconstruction.

cinegauge undersamples fully sampled multi-coil cine k-space, reconstructs it, grows the left
ventricular blood pool from your seed through the cardiac cycle, measures EDV, ESV, SV and EF by
the method of discs, and reports how far each accelerated run moves from the fully sampled
reference.

CAUTION: research use for protocol evaluation only; not for diagnostic use. Defer to local
clinical practice, local regulations and the responsible physician.";

const AFTER_HELP: &str = "\
Examples:
  cinegauge demo --out cinegauge-demo
  cinegauge run demo-studies/tidewater.toml --out tidewater --jobs 2
  cinegauge simulate --out sim --ef-pct 45 --rng-seed 7
  cinegauge reconstruct --kspace sim/kspace --pattern variable-density --accel 8 --method xf-sparse --out sim/xf-r8
  cinegauge measure --images sim/reference --seeds sim/seeds.toml --out sim/measured

Exit codes: 0 success, 1 the work could not be done (the message says why), 2 usage error.";

/// Top-level arguments.
#[derive(Debug, Parser)]
#[command(name = "cinegauge", version, about = ABOUT, long_about = LONG_ABOUT, after_help = AFTER_HELP)]
pub struct Cli {
    /// Print nothing but errors.
    #[arg(long, global = true)]
    pub quiet: bool,
    /// Worker threads (default: every core).
    #[arg(long, global = true, value_name = "N")]
    pub jobs: Option<usize>,
    /// Refuse files whose header claims an axis longer than N (rows, columns, frames, slices,
    /// coils, samples).
    #[arg(long, global = true, value_name = "N", env = "CINEGAUGE_MAX_EXTENT", help_heading = "Input limits",
          default_value_t = cinegauge::limits::DEFAULT_MAX_EXTENT)]
    pub max_extent: usize,
    /// Refuse files whose header claims an array of more than N values (checked before
    /// anything is allocated).
    #[arg(long, global = true, value_name = "N", env = "CINEGAUGE_MAX_VALUES", help_heading = "Input limits",
          default_value_t = cinegauge::limits::DEFAULT_MAX_VALUES)]
    pub max_values: u64,
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// Subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Run the built-in demo study (three synthetic subjects) end to end and write the report.
    Demo(demo::DemoArgs),
    /// Write a synthetic study: raw k-space folder, reference images, truth and a seeds file.
    Simulate(simulate::SimulateArgs),
    /// Undersample a raw k-space folder and reconstruct it with one method.
    Reconstruct(reconstruct::ReconstructArgs),
    /// List the reconstruction methods with their parameters and sources.
    Methods(listing::ListArgs),
    /// List the sampling patterns.
    Patterns(listing::ListArgs),
    /// Segment and measure one image series (NIfTI-1, or .npy + geometry.json).
    Measure(measure::MeasureArgs),
    /// Print what the readers find in a file or folder: dimensions, spacing, frames, timing.
    Inspect(inspect::InspectArgs),
    /// Propose LV seeds per slice and draw a seed sheet for the user to check.
    SuggestSeeds(suggest::SuggestArgs),
    /// Agreement statistics on a CSV table of paired measurements (Bland–Altman, ICC, CCC, tests).
    Agreement(agreement::AgreementArgs),
    /// Rebuild the sign-off PDF from a results file.
    Report(report::ReportArgs),
    /// Run a study plan (TOML): every subject × pattern × R × method, stored and resumable.
    Run(study::RunArgs),
    /// Show which units of a study plan are done, failed or pending.
    Status(study::StatusArgs),
    /// Prepare blinded, de-identified reader-study packages from a study that has been run.
    Blind(blind::BlindArgs),
    /// Join returned reader score sheets with the key: scores, reader agreement, readers' EF.
    Unblind(blind::UnblindArgs),
    /// Write a study's work units and Slurm array scripts for a cluster.
    Split(cluster::SplitArgs),
    /// Run one work unit (one Slurm array task).
    RunUnit(cluster::RunUnitArgs),
    /// Gather stored units into results and report (the cluster path's last job).
    Gather(cluster::GatherArgs),
}

/// Runs the parsed command.
///
/// # Errors
/// Whatever the command reports, with context naming the stage.
pub fn run(cli: Cli) -> anyhow::Result<()> {
    let quiet = cli.quiet;
    anyhow::ensure!(
        cli.max_extent >= 1 && cli.max_values >= 1,
        "--max-extent and --max-values must be at least 1"
    );
    cinegauge::limits::set(cinegauge::limits::Limits {
        max_extent: cli.max_extent,
        max_values: cli.max_values,
    });
    if let Some(n) = cli.jobs {
        anyhow::ensure!(
            n >= 1,
            "--jobs: expected at least 1 worker thread, found {n}"
        );
        rayon::ThreadPoolBuilder::new()
            .num_threads(n)
            .build_global()
            .map_err(|e| anyhow::anyhow!("--jobs {n}: {e}"))?;
    }
    match cli.command {
        Command::Demo(a) => demo::run(a, quiet),
        Command::Simulate(a) => simulate::run(a, quiet),
        Command::Reconstruct(a) => reconstruct::run(a, quiet),
        Command::Methods(a) => listing::methods(a),
        Command::Patterns(a) => listing::patterns(a),
        Command::Measure(a) => measure::run(a, quiet),
        Command::Inspect(a) => inspect::run(a),
        Command::SuggestSeeds(a) => suggest::run(a, quiet),
        Command::Agreement(a) => agreement::run(a),
        Command::Report(a) => report::run(a, quiet),
        Command::Run(a) => study::run(a, quiet),
        Command::Status(a) => study::status(a),
        Command::Blind(a) => blind::run(a, quiet),
        Command::Unblind(a) => blind::unblind(a, quiet),
        Command::Split(a) => cluster::split(a, quiet),
        Command::RunUnit(a) => cluster::run_unit(a, quiet),
        Command::Gather(a) => cluster::gather(a, quiet),
    }
}
