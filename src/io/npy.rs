//! NumPy image folders (one `.npy` `[slice, frame, row, col]` + `geometry.json`) and raw
//! k-space folders (`slice_NN.npy` `[coil, frame, ky, kx]` complex64 + `geometry.json`).

use std::path::{Path, PathBuf};

use ndarray::{Array4, ArrayView4};
use ndarray_npy::{ReadNpyExt, WriteNpyExt};
use num_complex::Complex32;

use super::{write_atomic, write_atomic_with, IoError};
use crate::geometry::{read_sidecar, Geometry};

/// Name of the geometry sidecar.
pub const SIDECAR: &str = "geometry.json";
/// Name of the image array `reconstruct` and `simulate` write.
pub const IMAGES: &str = "images.npy";

/// An image series read from a folder.
#[derive(Debug, Clone)]
pub struct ImageSeries {
    /// `[slice, frame, row, col]` magnitude.
    pub images: Array4<f32>,
    /// Validated geometry.
    pub geometry: Geometry,
    /// The array file that was read.
    pub path: PathBuf,
    /// Sidecar keys that were not understood (to warn about).
    pub unknown_keys: Vec<String>,
}

/// Reads an image folder (or the `.npy` file inside one) with its `geometry.json` sidecar.
///
/// # Errors
/// [`IoError`] naming the file and what is wrong: no or several `.npy` files, wrong dtype
/// or number of axes, non-finite values, or an invalid sidecar.
pub fn read_image_series(path: &Path) -> Result<ImageSeries, IoError> {
    let (dir, file) = if path.is_dir() {
        let mut npys: Vec<PathBuf> = std::fs::read_dir(path)
            .map_err(|e| IoError::file(path, "cannot list folder", e))?
            .filter_map(|e| e.ok().map(|e| e.path()))
            .filter(|p| p.extension().is_some_and(|x| x == "npy"))
            .collect();
        npys.sort();
        match npys.len() {
            1 => (path.to_path_buf(), npys.remove(0)),
            0 => return Err(IoError::content(path, "no .npy image array in this folder")),
            _ => {
                let names: Vec<String> = npys
                    .iter()
                    .filter_map(|p| p.file_name())
                    .map(|n| n.to_string_lossy().into_owned())
                    .collect();
                return Err(IoError::content(
                    path,
                    format!(
                        "several .npy files ({}); give the one to measure",
                        names.join(", ")
                    ),
                ));
            }
        }
    } else {
        (
            path.parent().unwrap_or(Path::new(".")).to_path_buf(),
            path.to_path_buf(),
        )
    };
    let images = read_f32_4d(&file)?;
    if let Some(bad) = images.indexed_iter().find(|(_, v)| !v.is_finite()) {
        return Err(IoError::content(
            &file,
            format!("non-finite value {} at index {:?}", bad.1, bad.0),
        ));
    }
    let sidecar_path = dir.join(SIDECAR);
    let sidecar =
        read_sidecar(&sidecar_path).map_err(|e| IoError::content(&sidecar_path, e.to_string()))?;
    let geometry = Geometry::from_sidecar(
        &sidecar,
        images.dim().1,
        &sidecar_path.display().to_string(),
    )
    .map_err(|e| IoError::content(&sidecar_path, e.to_string()))?;
    Ok(ImageSeries {
        images,
        geometry,
        path: file,
        unknown_keys: sidecar.unknown.keys().cloned().collect(),
    })
}

fn read_f32_4d(file: &Path) -> Result<Array4<f32>, IoError> {
    let open = || std::fs::File::open(file).map_err(|e| IoError::file(file, "cannot open", e));
    match Array4::<f32>::read_npy(open()?) {
        Ok(a) => Ok(a),
        Err(first) => match Array4::<f64>::read_npy(open()?) {
            Ok(a) => Ok(a.mapv(|v| v as f32)),
            Err(_) => Err(IoError::content(
                file,
                format!(
                    "expected a 4-D float32 or float64 array [slice, frame, row, col]: {first}"
                ),
            )),
        },
    }
}

/// Writes an image folder: `images.npy` and `geometry.json`.
///
/// # Errors
/// [`IoError`] naming the file.
pub fn write_image_series(
    dir: &Path,
    images: ArrayView4<f32>,
    geom: &Geometry,
) -> Result<(), IoError> {
    super::ensure_dir(dir)?;
    let file = dir.join(IMAGES);
    write_atomic_with(&file, |f| write_npy_buffered(f, &images))?;
    write_sidecar(dir, geom)
}

/// Writes `geometry.json` into `dir`.
///
/// # Errors
/// [`IoError`] naming the file.
pub fn write_sidecar(dir: &Path, geom: &Geometry) -> Result<(), IoError> {
    let text = serde_json::to_string_pretty(&geom.to_sidecar()).expect("sidecar serialises");
    write_atomic(&dir.join(SIDECAR), format!("{text}\n").as_bytes())
}

/// File name of slice `k` in a raw k-space folder (zero-padded to two digits).
pub fn slice_file_name(k: usize) -> String {
    format!("slice_{k:02}.npy")
}

/// Writes one slice's k-space `[coil, frame, ky, kx]` as complex64.
///
/// # Errors
/// [`IoError`] naming the file.
pub fn write_kspace_slice(
    dir: &Path,
    k: usize,
    data: ArrayView4<Complex32>,
) -> Result<(), IoError> {
    let file = dir.join(slice_file_name(k));
    write_atomic_with(&file, |f| write_npy_buffered(f, &data))
}

fn write_npy_buffered<T: WriteNpyExt>(f: &mut std::fs::File, data: &T) -> std::io::Result<()> {
    let mut w = std::io::BufWriter::new(f);
    data.write_npy(&mut w).map_err(std::io::Error::other)?;
    std::io::Write::flush(&mut w)
}
