//! The gathering step: every unit's row, image metrics and panels against the subject's
//! reference, then the comparison across subjects. Reads one subject's reference and one
//! other unit at a time, so memory does not grow with the study.

use std::collections::BTreeMap;
use std::path::Path;

use super::store::{Stacks, Store};
use super::units::{Unit, Work};
use crate::agreement::REFERENCE;
use crate::io::IoError;
use crate::plan::{Plan, Source};
use crate::results::{InputHash, ResultsFile, RunRow, RunStatus};

/// A row for a unit that has no stored result, saying why.
fn missing_row(plan: &Plan, unit: &Unit, why: &str) -> RunRow {
    let subject = &plan.subjects[unit.subject];
    let (method, pattern, accel, eff) = match (&unit.work, &subject.source) {
        (Work::Reconstruct(r), _) => (
            r.method.id().to_string(),
            r.sampling.pattern.id().to_string(),
            r.sampling.accel,
            r.sampling.accel,
        ),
        (Work::Series(i), Source::Series(list)) => {
            let g = &list[*i];
            (
                g.method.clone(),
                g.pattern.clone(),
                g.accel,
                g.accel_effective,
            )
        }
        (Work::Series(_), _) => (String::new(), String::new(), 1.0, 1.0),
    };
    let rp = crate::recon::ReconPlan {
        method,
        pattern,
        accel_nominal: accel,
        accel_effective: eff,
    };
    super::result_row(
        &subject.code,
        &rp,
        Err(format!("not computed: {why}")),
        &plan.segmentation,
        None,
    )
}

/// Gathers the stored units into a results file (comparison included); units without a
/// stored result become failed rows carrying `reasons[unit index]` (or "not run yet").
/// Panels are written to `panels` when given.
///
/// # Errors
/// [`IoError`] when a stored unit cannot be read or a panel cannot be written.
pub fn gather(
    plan: &Plan,
    inputs: Vec<InputHash>,
    units: &[Unit],
    store: &Store,
    reasons: &BTreeMap<usize, String>,
    panels: Option<&Path>,
) -> Result<ResultsFile, IoError> {
    let mut rows = Vec::with_capacity(units.len());
    for s in 0..plan.subjects.len() {
        let mine: Vec<&Unit> = units.iter().filter(|u| u.subject == s).collect();
        let mut reference: Option<(RunRow, Stacks, Option<PanelFrame>)> = None;
        for u in mine {
            let mut row = if store.has(&u.key) {
                store.row(&u.key)?
            } else {
                let why = reasons.get(&u.index).map_or("not run yet", String::as_str);
                rows.push(missing_row(plan, u, why));
                continue;
            };
            let stacks = if row.status == RunStatus::Ok {
                store.stacks(&u.key)?
            } else {
                None
            };
            match (stacks, &reference) {
                (Some(st), None) if row.method == REFERENCE => {
                    let frame = panels.and_then(|_| PanelFrame::new(&row, &st));
                    if let (Some(dir), Some(f)) = (panels, &frame) {
                        write_panels(dir, &row, &st, f)?;
                    }
                    rows.push(row.clone());
                    reference = Some((row, st, frame));
                    continue;
                }
                (Some(st), Some((ref_row, ref_st, frame))) => {
                    if let Some(n) = &ref_row.numbers {
                        row.fidelity = Some(crate::fidelity::fidelity(
                            st.images.view(),
                            ref_st.images.view(),
                            st.masks.view(),
                            ref_st.masks.view(),
                            &ref_st.geometry,
                            (n.ed_frame, n.es_frame),
                        ));
                    }
                    if let (Some(dir), Some(f)) = (panels, frame) {
                        write_panels(dir, &row, &st, f)?;
                    }
                }
                _ => {}
            }
            rows.push(row);
        }
    }
    let mut file = ResultsFile::new(&plan.code, inputs, rows);
    file.compare(&plan.criteria);
    Ok(file)
}

/// How a subject's panels are cut and windowed: the seed's slice at the reference's ED and
/// ES frames, cropped and windowed from the reference (computed once per subject).
struct PanelFrame {
    slice: usize,
    phases: (usize, usize),
    crop: (std::ops::Range<usize>, std::ops::Range<usize>),
    window: (f32, f32),
}

impl PanelFrame {
    /// From the subject's measured reference (`None`: no seed or no numbers).
    fn new(row: &RunRow, reference: &Stacks) -> Option<Self> {
        let slice = row.seeds.first()?.slice;
        let n = row.numbers.as_ref()?;
        Some(PanelFrame {
            slice,
            phases: (n.ed_frame, n.es_frame),
            crop: crate::panels::crop_box(reference.masks.view(), slice, n.ed_frame),
            window: crate::panels::window(reference.images.view(), slice),
        })
    }
}

/// The ED/ES panel pair of `row`, cut and windowed as the subject's reference.
fn write_panels(dir: &Path, row: &RunRow, st: &Stacks, f: &PanelFrame) -> Result<(), IoError> {
    crate::io::ensure_dir(dir)?;
    let path = crate::panels::file(
        dir,
        &row.subject,
        &row.method,
        &row.pattern,
        row.accel_nominal,
    );
    crate::panels::write_pair(
        &path,
        st.images.view(),
        st.masks.view(),
        f.slice,
        f.phases,
        &f.crop,
        f.window,
    )
}
