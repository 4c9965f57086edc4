//! The built-in demo study: the plan `demo-studies/tidewater.toml` (embedded at build time),
//! an invented scenario with three synthetic subjects of normal, mildly reduced and severely
//! reduced EF, each reconstructed fully sampled and by several methods at R = 4, 8 and 12.
//! It runs through the same study pipeline as `cinegauge run`.

use std::path::Path;

use crate::phantom::PhantomSpec;
use crate::pipeline::study::{self, ProgressFn, RunOutcome};
use crate::pipeline::RunRequest;
use crate::plan::{self, Plan, Source};

/// The demo study plan, embedded in the binary.
pub const DEMO_TOML: &str = include_str!("../demo-studies/tidewater.toml");

/// The demo plan with `rng_seed` for every random choice.
///
/// # Panics
/// Never: the embedded plan is checked by the tests.
pub fn plan(rng_seed: u64) -> Plan {
    plan::parse(DEMO_TOML, "demo-studies/tidewater.toml", Path::new("."))
        .expect("the embedded demo plan is valid (checked by tests)")
        .with_rng_seed(rng_seed)
}

/// Study code of the demo.
pub fn study() -> String {
    plan(1).code
}

/// One synthetic demo subject.
#[derive(Debug, Clone)]
pub struct DemoSubject {
    /// Subject code.
    pub code: String,
    /// What the subject represents.
    pub description: String,
    /// Phantom parameters.
    pub spec: PhantomSpec,
}

/// The demo subjects; `rng_seed` sets their noise (each subject its own stream).
pub fn subjects(rng_seed: u64) -> Vec<DemoSubject> {
    plan(rng_seed)
        .subjects
        .into_iter()
        .filter_map(|s| match s.source {
            Source::Phantom(spec) => Some(DemoSubject {
                code: s.code,
                description: s.description,
                spec,
            }),
            _ => None,
        })
        .collect()
}

/// The runs of the demo: the fully sampled reference, then every method at every R, all
/// methods at one R on the same lines; `rng_seed` sets the pseudo-random lines.
pub fn runs(rng_seed: u64) -> Vec<RunRequest> {
    crate::pipeline::units::requests(&plan(rng_seed))
}

/// Runs the demo study into `out` (results, report, panels and stored units).
///
/// # Errors
/// An output that cannot be written.
pub fn run(
    rng_seed: u64,
    out: &Path,
    progress: ProgressFn,
) -> Result<RunOutcome, crate::io::IoError> {
    study::run(&plan(rng_seed), out, progress)
}
