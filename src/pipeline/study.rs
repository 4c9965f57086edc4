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
    let ctx = Gathering {
        plan,
        out,
        units: &units,
        store: &store,
        reasons: &reasons,
    };
    let results = write_outputs(&ctx, inputs, Vec::new(), progress)?;
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

/// What the gathering step works on.
struct Gathering<'a> {
    plan: &'a Plan,
    out: &'a Path,
    units: &'a [Unit],
    store: &'a Store,
    /// Why units without a stored result have none (by unit index).
    reasons: &'a BTreeMap<usize, String>,
}

/// The gathering step and its outputs: results.json/.csv, panels and the report; `missing`
/// lists units left out of a partial gathering.
fn write_outputs(
    g: &Gathering,
    inputs: Vec<crate::results::InputHash>,
    missing: Vec<String>,
    progress: ProgressFn,
) -> Result<ResultsFile, IoError> {
    let (plan, out) = (g.plan, g.out);
    progress("gather", 0, 1, "comparing");
    let panels = out.join("panels");
    let mut results = gather(
        plan,
        inputs,
        g.units,
        g.store,
        g.reasons,
        plan.panels.then_some(panels.as_path()),
    )?;
    results.missing_units = missing;
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
    Ok(results)
}

/// Why one unit or the gathering step of the cluster path could not run.
#[derive(Debug, thiserror::Error)]
pub enum ClusterError {
    /// The unit list does not match the plan any more.
    #[error("{0}")]
    Units(String),
    /// Units are missing and `--partial` was not given.
    #[error("{} units are not stored (run them, or gather with --partial): {}", .0.len(), .0.join("; "))]
    Missing(Vec<String>),
    /// The unit could not be computed.
    #[error("unit {unit}: {message}")]
    Unit {
        /// Unit label.
        unit: String,
        /// Why.
        message: String,
    },
    /// Reading or writing failed.
    #[error(transparent)]
    Io(#[from] IoError),
}

/// One line of `units.jsonl`: a unit's stable id (its content key) and what it is.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct UnitLine {
    /// Array index (line number, from 0).
    pub index: usize,
    /// Content key: stable while the unit's inputs and settings are unchanged.
    pub id: String,
    /// Subject, method, pattern, R.
    pub unit: String,
}

/// The units of `plan` as `units.jsonl` text (one JSON object per line, plan order).
///
/// # Errors
/// An input that cannot be read for hashing.
pub fn unit_lines(plan: &Plan) -> Result<Vec<UnitLine>, IoError> {
    let inputs = input_hashes(plan)?;
    Ok(expand(plan, &inputs)
        .into_iter()
        .map(|u| UnitLine {
            index: u.index,
            id: u.key,
            unit: u.label,
        })
        .collect())
}

/// Runs the unit with id `id` of `plan` into `out` (the cluster path's task); a unit already
/// stored is left as it is. Returns the unit's label and whether it was computed now.
///
/// # Errors
/// [`ClusterError::Units`] when the plan has no unit with that id (the plan changed since the
/// unit list was written), [`ClusterError::Unit`] when it could not be computed.
pub fn run_unit(plan: &Plan, out: &Path, id: &str) -> Result<(String, bool), ClusterError> {
    let inputs = input_hashes(plan)?;
    let units = expand(plan, &inputs);
    let unit = units.iter().find(|u| u.key == id).ok_or_else(|| {
        ClusterError::Units(format!(
            "the plan has no unit {id}: it changed since `split` wrote the unit list; run split again"
        ))
    })?;
    let store = Store::new(out);
    if store.has(&unit.key) {
        return Ok((unit.label.clone(), false));
    }
    let subject = &plan.subjects[unit.subject];
    match run_units(plan, subject, &[unit], &store, &|_, _| {}).remove(0) {
        Ok(()) => Ok((unit.label.clone(), true)),
        Err(message) => Err(ClusterError::Unit {
            unit: unit.label.clone(),
            message,
        }),
    }
}

/// The gathering step alone (the cluster path's last job): with `partial`, units not stored
/// become failed rows and are listed in the results and on the report's first page.
///
/// # Errors
/// [`ClusterError::Missing`] naming the units not stored, unless `partial`.
pub fn gather_stored(
    plan: &Plan,
    out: &Path,
    partial: bool,
    progress: ProgressFn,
) -> Result<ResultsFile, ClusterError> {
    let inputs = input_hashes(plan)?;
    let units = expand(plan, &inputs);
    let store = Store::new(out);
    let missing: Vec<&Unit> = units.iter().filter(|u| !store.has(&u.key)).collect();
    if !missing.is_empty() && !partial {
        return Err(ClusterError::Missing(
            missing
                .iter()
                .map(|u| format!("{} ({})", u.label, u.key))
                .collect(),
        ));
    }
    let reasons: BTreeMap<usize, String> = missing
        .iter()
        .map(|u| {
            (
                u.index,
                "missing from the unit store (gathered with --partial)".into(),
            )
        })
        .collect();
    let labels: Vec<String> = missing.iter().map(|u| u.label.clone()).collect();
    let ctx = Gathering {
        plan,
        out,
        units: &units,
        store: &store,
        reasons: &reasons,
    };
    Ok(write_outputs(&ctx, inputs, labels, progress)?)
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

/// Peak memory one unit of `plan` needs, in MiB (for batch-job requests): twice an estimate
/// of the largest unit (a subject's image stack four times over — images, masks, reference
/// and working copies — and one k-space slice six times over), plus 200 MiB for the program,
/// rounded up to 256 MiB, at least 1024.
///
/// # Errors
/// A k-space file whose header cannot be read.
pub fn unit_memory_mib(plan: &Plan) -> Result<u64, IoError> {
    let mut largest: u64 = 0;
    for s in &plan.subjects {
        let bytes = match &s.source {
            crate::plan::Source::Phantom(p) => {
                let image = (p.slices * p.frames * p.rows * p.cols * 4) as u64;
                let slice = (p.coils * p.frames * p.rows * p.cols * 8) as u64;
                4 * image + 6 * slice
            }
            crate::plan::Source::Kspace(path) => {
                let k = crate::io::kspace::open_kspace(path)?;
                let (ns, nc, nf, ny, nx) = k.dims;
                4 * (ns * nf * ny * nx * 4) as u64 + 6 * (nc * nf * ny * nx * 8) as u64
            }
            // Image series: their size is known only once read; 512 MiB covers cine stacks
            // of clinical size several times over.
            crate::plan::Source::Series(_) => 512 << 20,
        };
        largest = largest.max(bytes);
    }
    let mib = 2 * largest.div_ceil(1 << 20) + 200;
    Ok((mib.div_ceil(256) * 256).max(1024))
}
