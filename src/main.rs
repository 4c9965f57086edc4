//! `cinegauge` command-line entry point: parse, run, map the outcome to an exit code.

use std::process::ExitCode;

use clap::Parser;

mod cli;

fn main() -> ExitCode {
    let args = cli::Cli::parse();
    match cli::run(args) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("error: {e:#}");
            ExitCode::from(cli::EXIT_FAILURE)
        }
    }
}
