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

/// The stage on display: its name, its display, and the last count and message shown.
type Stage = (String, Progress, (u64, String));

/// Progress over named stages: a new stage name ends the previous stage's display. Plain
/// log lines are printed only when the count or the message changes.
pub struct Stages {
    quiet: bool,
    current: std::sync::Mutex<Option<Stage>>,
}

impl Stages {
    /// Progress for a run, silent with `quiet`.
    pub fn new(quiet: bool) -> Self {
        Stages {
            quiet,
            current: std::sync::Mutex::new(None),
        }
    }

    /// Stage `stage` is at `done` of `total`, working on `msg`.
    pub fn update(&self, stage: &str, done: usize, total: usize, msg: &str) {
        let Ok(mut cur) = self.current.lock() else {
            return;
        };
        if cur.as_ref().is_none_or(|(s, _, _)| s != stage) {
            if let Some((_, p, _)) = cur.take() {
                p.finish();
            }
            *cur = Some((
                stage.to_string(),
                Progress::new(stage, total as u64, self.quiet),
                (u64::MAX, String::new()),
            ));
        }
        if let Some((_, p, last)) = cur.as_mut() {
            let now = (done as u64, msg.to_string());
            if *last != now && !msg.is_empty() {
                p.step(done as u64, total as u64, msg);
                *last = now;
            }
        }
    }

    /// Ends the last stage's display.
    pub fn finish(&self) {
        if let Ok(mut cur) = self.current.lock() {
            if let Some((_, p, _)) = cur.take() {
                p.finish();
            }
        }
    }
}
