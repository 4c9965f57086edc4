//! Raw multi-coil k-space from any supported source, behind one interface: a folder of
//! `slice_NN.npy` with `geometry.json`, or an ISMRMRD file.

use std::path::{Path, PathBuf};

use ndarray::{Array2, Array4};
use num_complex::Complex32;

use super::{ismrmrd, npy, IoError};
use crate::geometry::Geometry;

enum Source {
    Folder(npy::KspaceFolder),
    Ismrmrd(ismrmrd::RawData),
}

/// Opened raw k-space: dimensions, geometry and noise known; slices read on demand.
pub struct RawKspace {
    /// What was opened (a folder or a file).
    pub path: PathBuf,
    /// Human-readable kind of source.
    pub kind: &'static str,
    /// `(slices, coils, frames, ky, kx)`.
    pub dims: (usize, usize, usize, usize, usize),
    /// Validated geometry.
    pub geometry: Geometry,
    /// Slice positions along the normal (mm), where the source records them.
    pub positions_mm: Option<Vec<f64>>,
    /// Coil noise covariance, if the source has noise data.
    pub noise_cov: Option<Array2<Complex32>>,
    /// What the reader assumed, skipped or ignored.
    pub warnings: Vec<String>,
    /// The files the data comes from (for input hashes).
    pub files: Vec<PathBuf>,
    source: Source,
}

/// Whether `path` looks like raw k-space: an ISMRMRD (HDF5) file, or a folder holding
/// `slice_NN.npy` files.
pub fn is_raw_kspace(path: &Path) -> bool {
    if path.is_dir() {
        return std::fs::read_dir(path).is_ok_and(|entries| {
            entries.filter_map(|e| e.ok()).any(|e| {
                let name = e.file_name().to_string_lossy().into_owned();
                name.starts_with("slice_") && name.ends_with(".npy")
            })
        });
    }
    ismrmrd::is_hdf5(path)
}

/// Opens raw k-space: an ISMRMRD file, or a `slice_NN.npy` folder with `geometry.json`.
///
/// # Errors
/// [`IoError`] naming the file and what is wrong.
pub fn open_kspace(path: &Path) -> Result<RawKspace, IoError> {
    if path.is_file() || ismrmrd::is_hdf5(path) {
        let raw = ismrmrd::read_ismrmrd(path)?;
        return Ok(RawKspace {
            path: path.to_path_buf(),
            kind: "raw k-space (ISMRMRD)",
            dims: raw.dims,
            geometry: raw.geometry.clone(),
            positions_mm: Some(raw.positions_mm.clone()),
            noise_cov: raw.noise_cov.clone(),
            warnings: raw.warnings.clone(),
            files: vec![path.to_path_buf()],
            source: Source::Ismrmrd(raw),
        });
    }
    let folder = npy::open_kspace_folder(path)?;
    Ok(RawKspace {
        path: path.to_path_buf(),
        kind: "raw k-space (.npy per slice)",
        dims: folder.dims,
        geometry: folder.geometry.clone(),
        positions_mm: None,
        noise_cov: folder.noise_cov.clone(),
        warnings: folder
            .unknown_keys
            .iter()
            .map(|k| format!("geometry.json: unknown key `{k}` ignored"))
            .collect(),
        files: folder.slices.clone(),
        source: Source::Folder(folder),
    })
}

impl RawKspace {
    /// Slice `k` as `[coil, frame, ky, kx]`.
    ///
    /// # Errors
    /// [`IoError`] naming the file: unreadable, wrong shape, non-finite values.
    pub fn read(&self, k: usize) -> Result<Array4<Complex32>, IoError> {
        match &self.source {
            Source::Folder(f) => f.read(k),
            Source::Ismrmrd(r) => r.read(k),
        }
    }
}

/// Coil noise covariance `Ψ = N⁻¹ Σ n nᴴ` of noise samples `[coil, sample]` (no signal, zero
/// mean), summed in f64: `Ψ[i, j] = N⁻¹ Σ_t n_i(t) conj(n_j(t))`.
pub fn noise_covariance(samples: ndarray::ArrayView2<Complex32>) -> ndarray::Array2<Complex32> {
    let (nc, n) = samples.dim();
    let wide = samples.mapv(|z| num_complex::Complex64::new(z.re.into(), z.im.into()));
    ndarray::Array2::from_shape_fn((nc, nc), |(i, j)| {
        let sum: num_complex::Complex64 = wide
            .row(i)
            .iter()
            .zip(wide.row(j))
            .map(|(a, b)| a * b.conj())
            .sum();
        let v = sum / n.max(1) as f64;
        Complex32::new(v.re as f32, v.im as f32)
    })
}
