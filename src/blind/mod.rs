//! Reader-study packages: every stored series of a study (subject × method × R, and the
//! reference) exported as a case under a random code, de-identified, with a preview, one
//! score sheet per reader in a balanced order, instructions, and one key file that alone
//! links codes to methods.
//!
//! De-identification follows the Basic Application Level Confidentiality Profile (DICOM
//! PS3.15 Annex E) by construction: case files are new objects written from the pixel data
//! and geometry only. Patient name and ID are the case code (dummy values, action D), dates,
//! times, accession number and physician names are empty (Z), institution, device and
//! private attributes are absent (X), and every UID is new, derived from the case code (U).
//! Nothing is copied from source headers, so no identifying value can pass through.

pub mod cases;
pub mod unblind;
pub mod williams;

use std::path::{Path, PathBuf};

use crate::io::{self, write_atomic, IoError};
use crate::pipeline::store::Store;
use crate::pipeline::units::{expand, input_hashes};
use crate::plan::Plan;

/// The warning line that opens the key file.
pub const KEY_WARNING: &str =
    "# UNBLINDING KEY: keep this file away from readers until every score sheet is returned";

/// Name of the key file.
pub const KEY_FILE: &str = "unblinding-key.csv";

/// Likert items of the score sheet: column name and the question in plain words.
pub const ITEMS: [(&str, &str); 4] = [
    (
        "overall_quality",
        "Overall image quality: 1 unusable, 2 poor, 3 adequate, 4 good, 5 excellent.",
    ),
    (
        "artefact_burden",
        "Artefacts (aliasing, streaks, noise bands): 1 severe, 2 marked, 3 moderate, 4 slight, 5 none.",
    ),
    (
        "edge_sharpness",
        "Sharpness of the edge between blood pool and myocardium: 1 not visible, 2 blurred, 3 visible, 4 sharp, 5 crisp.",
    ),
    (
        "motion_faithfulness",
        "Wall motion through the cycle looks natural (no smearing between frames, no jerks): 1 not at all, 2 poorly, 3 acceptably, 4 well, 5 fully.",
    ),
];

/// Reader's own measurement columns (left empty for the reader to fill).
pub const MEASURES: [&str; 3] = ["reader_edv_ml", "reader_esv_ml", "reader_ef_pct"];

/// Why packages could not be prepared.
#[derive(Debug, thiserror::Error)]
pub enum BlindError {
    /// Units of the plan have not been run.
    #[error("{} units of the plan are not stored in {}; run `cinegauge run` first: {}", .units.len(), .folder, .units.join(", "))]
    NotRun {
        /// The run's output folder.
        folder: String,
        /// The missing units.
        units: Vec<String>,
    },
    /// A bad request.
    #[error("{0}")]
    Request(String),
    /// Reading or writing failed.
    #[error(transparent)]
    Io(#[from] IoError),
}

/// One exported case.
#[derive(Debug, Clone, PartialEq)]
pub struct Case {
    /// Random code.
    pub code: String,
    /// Subject code.
    pub subject: String,
    /// Method.
    pub method: String,
    /// Pattern.
    pub pattern: String,
    /// Nominal R.
    pub accel_nominal: f64,
    /// Effective R.
    pub accel_effective: f64,
}

/// What was prepared.
#[derive(Debug, Clone)]
pub struct Prepared {
    /// Every case, sorted by code.
    pub cases: Vec<Case>,
    /// Score sheets written, one per reader.
    pub sheets: Vec<PathBuf>,
    /// Units left out because their series could not be measured (failed runs).
    pub left_out: Vec<String>,
}

/// Fixed modification time of every exported file (2000-01-01 UTC), so file times carry no
/// trace of the order in which cases were written.
const FIXED_MTIME_S: u64 = 946_684_800;

fn fix_mtime(path: &Path) -> Result<(), IoError> {
    let t = std::time::UNIX_EPOCH + std::time::Duration::from_secs(FIXED_MTIME_S);
    std::fs::File::options()
        .write(true)
        .open(path)
        .and_then(|f| f.set_modified(t))
        .map_err(|e| IoError::file(path, "cannot set the file time", e))
}

/// Prepares the reader-study packages of `plan` (its run stored in `run_out`) in `out`.
///
/// # Errors
/// [`BlindError`] when units are not run, `out` is not empty, or a file fails.
pub fn prepare(
    plan: &Plan,
    run_out: &Path,
    readers: usize,
    rng_seed: u64,
    out: &Path,
) -> Result<Prepared, BlindError> {
    if readers == 0 {
        return Err(BlindError::Request("--readers: at least one reader".into()));
    }
    if out.exists()
        && std::fs::read_dir(out)
            .map_err(|e| IoError::file(out, "cannot list folder", e))?
            .next()
            .is_some()
    {
        return Err(BlindError::Request(format!(
            "{}: the output folder is not empty; reader packages go to a new folder",
            out.display()
        )));
    }
    let inputs = input_hashes(plan)?;
    let units = expand(plan, &inputs);
    let store = Store::new(run_out);
    let missing: Vec<String> = units
        .iter()
        .filter(|u| !store.has(&u.key))
        .map(|u| u.label.clone())
        .collect();
    if !missing.is_empty() {
        return Err(BlindError::NotRun {
            folder: run_out.display().to_string(),
            units: missing,
        });
    }
    // Conditions (method, pattern, R) in plan order, and which unit holds each case.
    let mut conditions: Vec<(String, String, f64)> = Vec::new();
    let mut grid: Vec<Vec<Option<usize>>> = vec![Vec::new(); plan.subjects.len()];
    let mut rows = Vec::new();
    let mut left_out = Vec::new();
    for u in &units {
        let row = store.row(&u.key)?;
        let cond = (row.method.clone(), row.pattern.clone(), row.accel_nominal);
        let c = match conditions.iter().position(|x| *x == cond) {
            Some(c) => c,
            None => {
                conditions.push(cond);
                conditions.len() - 1
            }
        };
        for g in grid.iter_mut() {
            g.resize(conditions.len(), None);
        }
        if row.status == crate::results::RunStatus::Ok {
            grid[u.subject][c] = Some(rows.len());
            rows.push((u, row));
        } else {
            left_out.push(u.label.clone());
        }
    }
    let codes = cases::case_codes(rows.len(), rng_seed);
    // Codes are dealt to cases in a shuffled order, so neither code nor its rank says which.
    let mut deal: Vec<usize> = (0..rows.len()).collect();
    rand::seq::SliceRandom::shuffle(
        deal.as_mut_slice(),
        &mut crate::rng::stream(rng_seed, 0xDEA1),
    );
    let code_of = |i: usize| codes[deal[i]].clone();
    let mut all: Vec<Case> = rows
        .iter()
        .enumerate()
        .map(|(i, (_, r))| Case {
            code: code_of(i),
            subject: r.subject.clone(),
            method: r.method.clone(),
            pattern: r.pattern.clone(),
            accel_nominal: r.accel_nominal,
            accel_effective: r.accel_effective,
        })
        .collect();
    io::ensure_dir(out)?;
    let cases_dir = out.join("cases");
    // Written in code order: creation order says nothing either.
    let mut by_code: Vec<usize> = (0..rows.len()).collect();
    by_code.sort_by_key(|&i| code_of(i));
    for &i in &by_code {
        let (u, row) = &rows[i];
        let code = code_of(i);
        let st = store
            .stacks(&u.key)?
            .ok_or_else(|| BlindError::Request(format!("{}: no stored images", u.label)))?;
        let dir = cases_dir.join(&code);
        io::ensure_dir(&dir)?;
        let description = format!("reader case {code}");
        let files = io::dicom::write_dicom_series(
            &dir,
            st.images.view(),
            &st.geometry,
            &io::dicom::SeriesLabel {
                subject: &code,
                description: &description,
                number: 1,
            },
        )?;
        let slice = row.seeds.first().map_or(st.images.dim().0 / 2, |s| s.slice);
        let preview = dir.join("preview.png");
        write_preview(&preview, st.images.view(), slice)?;
        for f in files.iter().chain([&preview]) {
            fix_mtime(f)?;
        }
    }
    // Score sheets: one per reader, cases in that reader's balanced order.
    let mut sheets = Vec::new();
    let header: Vec<&str> = std::iter::once("case")
        .chain(ITEMS.iter().map(|(c, _)| *c))
        .chain(MEASURES)
        .chain(["comment"])
        .collect();
    for r in 0..readers {
        let mut text = format!("{}\n", header.join(","));
        for (s, c) in cases::reading_order(r, plan.subjects.len(), conditions.len(), rng_seed) {
            if let Some(i) = grid[s][c] {
                text.push_str(&code_of(i));
                text.push_str(&",".repeat(header.len() - 1));
                text.push('\n');
            }
        }
        let path = out.join(format!("reader-{:02}-scores.csv", r + 1));
        write_atomic(&path, text.as_bytes())?;
        fix_mtime(&path)?;
        sheets.push(path);
    }
    let instructions = out.join("instructions.pdf");
    write_atomic(&instructions, &instructions_pdf(all.len()))?;
    fix_mtime(&instructions)?;
    all.sort_by(|a, b| a.code.cmp(&b.code));
    let mut key = format!(
        "{KEY_WARNING}\n# study {}, {} cases, {} readers, --rng-seed {rng_seed}\n\
         case,subject,method,pattern,accel_nominal,accel_effective\n",
        plan.code,
        all.len(),
        readers
    );
    for c in &all {
        key.push_str(&format!(
            "{},{},{},{},{},{}\n",
            c.code, c.subject, c.method, c.pattern, c.accel_nominal, c.accel_effective
        ));
    }
    write_atomic(&out.join(KEY_FILE), key.as_bytes())?;
    Ok(Prepared {
        cases: all,
        sheets,
        left_out,
    })
}

/// A montage of one slice through every frame (left to right, top to bottom, 5 per row),
/// windowed 0 to the slice's 99.5th percentile.
fn write_preview(
    path: &Path,
    stack: ndarray::ArrayView4<f32>,
    slice: usize,
) -> Result<(), IoError> {
    let (_, nf, nr, nc) = stack.dim();
    let per_row = nf.clamp(1, 5);
    let grid_rows = nf.div_ceil(per_row);
    let (lo, hi) = crate::panels::window(stack, slice);
    let mut img = image::RgbImage::new((per_row * nc) as u32, (grid_rows * nr) as u32);
    for f in 0..nf {
        let (x0, y0) = ((f % per_row) * nc, (f / per_row) * nr);
        for r in 0..nr {
            for c in 0..nc {
                let g = crate::io::png::grey(stack[[slice, f, r, c]], lo, hi);
                img.put_pixel((x0 + c) as u32, (y0 + r) as u32, image::Rgb([g, g, g]));
            }
        }
    }
    crate::io::png::write_rgb(path, &img)
}

/// The readers' instruction sheet (no study design details: nothing that could unblind).
fn instructions_pdf(cases: usize) -> Vec<u8> {
    let items: Vec<String> = ITEMS.iter().map(|(col, q)| format!("{col}: {q}")).collect();
    crate::report::text_document(
        "Reader instructions",
        &[
            (
                "What you receive".into(),
                vec![
                    format!("{cases} cases, each a folder under cases/ named by its case code. Each folder holds a short-axis cine image series (DICOM, one file per slice and frame; open the folder in any DICOM viewer) and preview.png, one slice through the cardiac cycle."),
                    "Your score sheet, reader-NN-scores.csv, lists the case codes in the order in which to read them. Please keep to that order and score each case before opening the next.".into(),
                ],
            ),
            (
                "What to score".into(),
                std::iter::once("Give each item a whole number from 1 to 5:".to_string())
                    .chain(items)
                    .collect(),
            ),
            (
                "Your own measurements".into(),
                vec![
                    "If the study asks for them, contour the left-ventricular blood pool at end-diastole and end-systole as you do in practice and enter reader_edv_ml, reader_esv_ml and reader_ef_pct (ml and percent, decimal point). Leave them empty otherwise. Use the comment column for anything that made a case hard to read.".into(),
                ],
            ),
            (
                "Blinding".into(),
                vec![
                    "Case codes are random. Please do not try to find out how a case was made, do not compare notes with other readers before all sheets are returned, and return the sheet unchanged apart from the score columns.".into(),
                ],
            ),
        ],
    )
}
