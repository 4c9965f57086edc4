//! Progress: a bar on a terminal, plain log lines otherwise, nothing with `--quiet`.

use std::io::IsTerminal;

use indicatif::{ProgressBar, ProgressStyle};

/// Progress of one stage over `total` steps.
pub struct Progress {
    bar: Option<ProgressBar>,
    plain: bool,
    what: String,
}

impl Progress {
    /// A progress display for `what`.
    pub fn new(what: &str, total: u64, quiet: bool) -> Self {
        let tty = std::io::stderr().is_terminal();
        let bar = (!quiet && tty).then(|| {
            let b = ProgressBar::new(total);
            b.set_style(
                ProgressStyle::with_template("{prefix} [{bar:30}] {pos}/{len} {msg} (eta {eta})")
                    .expect("valid template")
                    .progress_chars("=> "),
            );
            b.set_prefix(what.to_string());
            b
        });
        Progress {
            bar,
            plain: !quiet && !tty,
            what: what.into(),
        }
    }

    /// Step `done` of the total, working on `msg`.
    pub fn step(&self, done: u64, total: u64, msg: &str) {
        if let Some(b) = &self.bar {
            b.set_position(done);
            b.set_message(msg.to_string());
        } else if self.plain && done < total {
            eprintln!("{}: {}/{} {}", self.what, done + 1, total, msg);
        }
    }

    /// Ends the display.
    pub fn finish(&self) {
        if let Some(b) = &self.bar {
            b.finish_and_clear();
        }
    }
}

/// Prints an informational line unless quiet.
pub fn say(quiet: bool, msg: &str) {
    if !quiet {
        eprintln!("{msg}");
    }
}
