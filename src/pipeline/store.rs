//! Finished work units on disk, under `OUT/units/<key>/`: the result row, and for measured
//! series the images and LV masks (for image metrics and panels at the gathering step).
//!
//! A unit's folder is filled under a temporary name and renamed into place in one step, so a
//! unit folder either holds everything or does not exist: a run killed at any moment leaves
//! no half-written unit, and two processes finishing the same unit leave one whole copy.

use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicUsize, Ordering};

use ndarray::{Array4, ArrayView4};
use ndarray_npy::WriteNpyExt;

use crate::geometry::{read_sidecar, Geometry};
use crate::io::IoError;
use crate::results::RunRow;

const ROW: &str = "row.json";
const IMAGES: &str = "images.npy";
const MASKS: &str = "masks.npy";
const GEOMETRY: &str = "geometry.json";

/// The unit store of one output folder.
#[derive(Debug, Clone)]
pub struct Store {
    root: PathBuf,
}

/// Images and masks of a measured unit, `[slice, frame, row, col]`.
pub struct Stacks {
    /// Magnitude images.
    pub images: Array4<f32>,
    /// LV masks.
    pub masks: Array4<bool>,
    /// Geometry the series was measured with.
    pub geometry: Geometry,
}

/// What a measured unit stores beside its row.
pub type StackViews<'a> = (ArrayView4<'a, f32>, ArrayView4<'a, bool>, &'a Geometry);

static TMP_COUNTER: AtomicUsize = AtomicUsize::new(0);

impl Store {
    /// The store under `out/units`.
    pub fn new(out: &Path) -> Self {
        Store {
            root: out.join("units"),
        }
    }

    fn dir(&self, key: &str) -> PathBuf {
        self.root.join(key)
    }

    /// Whether unit `key` is finished.
    pub fn has(&self, key: &str) -> bool {
        self.dir(key).join(ROW).is_file()
    }

    /// The result row of a finished unit.
    ///
    /// # Errors
    /// [`IoError`] when the unit's row cannot be read or parsed.
    pub fn row(&self, key: &str) -> Result<RunRow, IoError> {
        let path = self.dir(key).join(ROW);
        let bytes = std::fs::read(&path).map_err(|e| IoError::file(&path, "cannot read", e))?;
        serde_json::from_slice(&bytes).map_err(|e| IoError::content(&path, e.to_string()))
    }

    /// Images and masks of a finished, measured unit (`None` when it has none: failed).
    ///
    /// # Errors
    /// [`IoError`] when the arrays are present but unreadable.
    pub fn stacks(&self, key: &str) -> Result<Option<Stacks>, IoError> {
        let dir = self.dir(key);
        let (ip, mp) = (dir.join(IMAGES), dir.join(MASKS));
        if !ip.is_file() {
            return Ok(None);
        }
        let axes = &crate::io::npy::IMAGE_AXES;
        let images = crate::io::npy::read_checked::<f32, ndarray::Ix4>(&ip, axes)?;
        let masks = crate::io::npy::read_checked::<bool, ndarray::Ix4>(&mp, axes)?;
        let gp = dir.join(GEOMETRY);
        let sidecar = read_sidecar(&gp).map_err(|e| IoError::content(&gp, e.to_string()))?;
        let geometry = Geometry::from_sidecar(&sidecar, images.dim().1, &gp.display().to_string())
            .map_err(|e| IoError::content(&gp, e.to_string()))?;
        Ok(Some(Stacks {
            images,
            masks,
            geometry,
        }))
    }

    /// Stores a finished unit in one step (see the module note). A unit already stored by
    /// another process is left as it is: its content is the same.
    ///
    /// # Errors
    /// [`IoError`] naming the file that could not be written.
    pub fn put(&self, key: &str, row: &RunRow, stacks: Option<StackViews>) -> Result<(), IoError> {
        crate::io::ensure_dir(&self.root)?;
        let tmp = self.root.join(format!(
            ".partial-{key}-{}-{}",
            std::process::id(),
            TMP_COUNTER.fetch_add(1, Ordering::Relaxed)
        ));
        let written = (|| -> Result<(), IoError> {
            crate::io::ensure_dir(&tmp)?;
            if let Some((images, masks, geometry)) = stacks {
                write_npy(&tmp.join(IMAGES), &images)?;
                write_npy(&tmp.join(MASKS), &masks)?;
                crate::io::npy::write_sidecar(&tmp, geometry)?;
            }
            let json = serde_json::to_vec_pretty(row).expect("rows serialise");
            crate::io::write_atomic(&tmp.join(ROW), &json)
        })();
        if let Err(e) = written {
            let _ = std::fs::remove_dir_all(&tmp);
            return Err(e);
        }
        let target = self.dir(key);
        if let Err(e) = std::fs::rename(&tmp, &target) {
            let _ = std::fs::remove_dir_all(&tmp);
            if !self.has(key) {
                return Err(IoError::file(&target, "cannot store the unit", e));
            }
        }
        Ok(())
    }

    /// Removes folders left by runs that were killed while storing a unit.
    pub fn sweep_partial(&self) {
        if let Ok(list) = std::fs::read_dir(&self.root) {
            for e in list.flatten() {
                if e.file_name().to_string_lossy().starts_with(".partial-") {
                    let _ = std::fs::remove_dir_all(e.path());
                }
            }
        }
    }
}

fn write_npy<T: WriteNpyExt>(path: &Path, data: &T) -> Result<(), IoError> {
    crate::io::write_atomic_with(path, |f| {
        let mut w = BufWriter::new(f);
        data.write_npy(&mut w).map_err(std::io::Error::other)?;
        w.flush()
    })
}
