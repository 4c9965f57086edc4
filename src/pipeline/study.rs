//! A whole study from its plan: hash the inputs, expand the units, run those not yet stored
//! (subject by subject, so memory stays that of one subject), gather, write results and
//! report. `status` tells the same units apart without running anything.

use std::collections::BTreeMap;
use std::path::Path;

use serde::{Deserialize, Serialize};

use super::execute::run_units;
use super::gather::gather;
use super::store::Store;
use super::units::{expand, input_hashes, Unit};
use crate::io::{write_atomic, IoError};
use crate::plan::Plan;
use crate::results::{ResultsFile, RunStatus};

/// Name of the run log (timings and what was reused; kept out of `results.json`, which is
/// byte-identical from run to run).
pub const RUN_LOG: &str = "run-log.json";

/// What became of one unit in a run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct UnitLog {
    /// Subject, method, pattern, R.
    pub unit: String,
    /// Content key (the unit's folder under `units/`).
    pub key: String,
    /// `reused` (stored by an earlier run), `computed`, or `not-computed`.
    pub outcome: String,
    /// Why it could not be computed.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub message: Option<String>,
    /// Wall time of the subject batch this unit was computed in, seconds.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub seconds: Option<f64>,
}

/// The run log.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RunLog {
    /// Study code.
    pub study: String,
    /// One entry per unit, in plan order.
    pub units: Vec<UnitLog>,
    /// Units reconstructed or measured in this run.
    pub computed: usize,
    /// Units reused from earlier runs.
    pub reused: usize,
    /// Wall time of the whole run, seconds.
    pub seconds: f64,
}

/// Progress callback: stage, steps done, steps in all, what is being worked on.
pub type ProgressFn<'a> = &'a (dyn Fn(&str, usize, usize, &str) + Sync);

/// A finished run.
pub struct RunOutcome {
    /// The gathered results (already written).
    pub results: ResultsFile,
    /// What was computed and reused.
    pub log: RunLog,
}

/// Runs `plan` into `out`: `results.json`/`.csv`, `report.pdf` (unless the plan turns it
/// off), `panels/`, `units/` (the stored units) and the run log.
///
/// # Errors
/// An input that cannot be read for hashing, or an output that cannot be written. A unit
/// that cannot be computed does not stop the run: it is reported as failed.
pub fn run(plan: &Plan, out: &Path, progress: ProgressFn) -> Result<RunOutcome, IoError> {
    let started = std::time::Instant::now();
    crate::io::ensure_dir(out)?;
    progress("inputs", 0, 1, "hashing");
    let inputs = input_hashes(plan)?;
    progress("inputs", 1, 1, "");
    let units = expand(plan, &inputs);
    let store = Store::new(out);
    store.sweep_partial();
    let pending: Vec<&Unit> = units.iter().filter(|u| !store.has(&u.key)).collect();
    let mut logs: Vec<UnitLog> = units
        .iter()
        .map(|u| UnitLog {
            unit: u.label.clone(),
            key: u.key.clone(),
            outcome: "reused".into(),
            message: None,
            seconds: None,
        })
        .collect();
    let mut reasons = BTreeMap::new();
    let total = pending.len();
    let mut done = 0;
    for (si, subject) in plan.subjects.iter().enumerate() {
        let mine: Vec<&Unit> = pending
            .iter()
            .copied()
            .filter(|u| u.subject == si)
            .collect();
        if mine.is_empty() {
            continue;
        }
        let t0 = std::time::Instant::now();
        let msg = format!("{} ({} units)", subject.code, mine.len());
        progress("units", done, total, &msg);
        let outcomes = run_units(plan, subject, &mine, &store, &|k, n| {
            // Slices of this subject's batch, as a fraction of its units.
            let part = (mine.len() * k).checked_div(n).unwrap_or(0);
            progress("units", done + part.min(mine.len()), total, &msg);
        });
        let secs = t0.elapsed().as_secs_f64();
        for (u, o) in mine.iter().zip(outcomes) {
            let log = &mut logs[u.index];
            log.seconds = Some(secs);
            match o {
                Ok(()) => log.outcome = "computed".into(),
                Err(e) => {
                    log.outcome = "not-computed".into();
                    log.message = Some(e.clone());
                    reasons.insert(u.index, e);
                }
            }
        }
        done += mine.len();
    }
    progress("units", total, total, "");
    progress("gather", 0, 1, "comparing");
    let panels = out.join("panels");
    let results = gather(
        plan,
        inputs,
        &units,
        &store,
        &reasons,
        plan.panels.then_some(panels.as_path()),
    )?;
    results.write(out, "results")?;
    if plan.pdf {
        progress("gather", 0, 1, "report");
        crate::report::write(
            &results,
            &out.join("report.pdf"),
            plan.panels.then_some(panels.as_path()),
        )?;
    }
    progress("gather", 1, 1, "");
    let count = |o: &str| logs.iter().filter(|l| l.outcome == o).count();
    let log = RunLog {
        study: plan.code.clone(),
        computed: count("computed"),
        reused: count("reused"),
        units: logs,
        seconds: started.elapsed().as_secs_f64(),
    };
    let text = serde_json::to_string_pretty(&log).expect("log serialises");
    write_atomic(&out.join(RUN_LOG), format!("{text}\n").as_bytes())?;
    Ok(RunOutcome { results, log })
}

/// Where one unit stands.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct UnitStatus {
    /// Position in plan order.
    pub index: usize,
    /// Subject, method, pattern, R.
    pub unit: String,
    /// Content key.
    pub key: String,
    /// `done`, `failed` (stored, with the data's reason) or `pending`.
    pub state: String,
    /// Why it failed, or why the last run could not compute it.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub message: Option<String>,
}

/// The state of every unit of `plan` in `out`, without running anything.
///
/// # Errors
/// An input that cannot be read for hashing, or a stored unit that cannot be read.
pub fn status(plan: &Plan, out: &Path) -> Result<Vec<UnitStatus>, IoError> {
    let inputs = input_hashes(plan)?;
    let units = expand(plan, &inputs);
    let store = Store::new(out);
    let last: Option<RunLog> = std::fs::read(out.join(RUN_LOG))
        .ok()
        .and_then(|b| serde_json::from_slice(&b).ok());
    units
        .iter()
        .map(|u| {
            let (state, message) = if store.has(&u.key) {
                let row = store.row(&u.key)?;
                match row.status {
                    RunStatus::Ok => ("done", None),
                    RunStatus::Failed => ("failed", row.messages.first().cloned()),
                }
            } else {
                let why = last.as_ref().and_then(|l| {
                    l.units
                        .iter()
                        .find(|x| x.key == u.key)
                        .and_then(|x| x.message.clone())
                });
                ("pending", why)
            };
            Ok(UnitStatus {
                index: u.index,
                unit: u.label.clone(),
                key: u.key.clone(),
                state: state.into(),
                message,
            })
        })
        .collect()
}
