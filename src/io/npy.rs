//! NumPy image folders (one `.npy` `[slice, frame, row, col]` + `geometry.json`) and raw
//! k-space folders (`slice_NN.npy` `[coil, frame, ky, kx]` complex64 + `geometry.json`).

use std::path::{Path, PathBuf};

use ndarray::{Array4, ArrayView4};
use std::io::{BufReader, Seek, SeekFrom};

use ndarray_npy::npy::header::Header;
use ndarray_npy::{ReadNpyExt, ReadableElement, WriteNpyExt};
use num_complex::Complex32;
use py_literal::Value as PyValue;

use super::{file_names, write_atomic, write_atomic_with, IoError};
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
    /// What the reader assumed or noticed (to print as warnings).
    pub warnings: Vec<String>,
    /// The files the stack was read from, in stack order (for input hashes).
    pub files: Vec<PathBuf>,
    /// Slice positions along the normal (mm) where the format records them (DICOM).
    pub positions_mm: Option<Vec<f64>>,
}

/// `slice s, frame f, row r, col c` (zero-based) of an index into an image stack.
pub(crate) fn position((s, f, r, c): (usize, usize, usize, usize)) -> String {
    format!("slice {s}, frame {f}, row {r}, col {c} (zero-based)")
}

/// Whether a path names a NumPy array file (`.npy`, or an `.npz` archive).
pub fn is_numpy(path: &Path) -> bool {
    path.extension().is_some_and(|x| x == "npy" || x == "npz")
}

/// Reads an image folder (or the `.npy`/`.npz` file inside one) with its `geometry.json`
/// sidecar. An `.npz` archive must hold one array, or one named `images`.
///
/// # Errors
/// [`IoError`] naming the file and what is wrong: no or several `.npy` files, wrong dtype
/// or number of axes, non-finite values, or an invalid sidecar.
pub fn read_image_series(path: &Path) -> Result<ImageSeries, IoError> {
    let (dir, file) = if path.is_dir() {
        let mut npys: Vec<PathBuf> = std::fs::read_dir(path)
            .map_err(|e| IoError::file(path, "cannot list folder", e))?
            .filter_map(|e| e.ok().map(|e| e.path()))
            .filter(|p| is_numpy(p))
            .collect();
        npys.sort();
        match npys.len() {
            1 => (path.to_path_buf(), npys.remove(0)),
            0 => {
                return Err(IoError::content(
                    path,
                    "no .npy or .npz image array in this folder",
                ))
            }
            _ => {
                return Err(IoError::content(
                    path,
                    format!(
                        "several .npy/.npz files ({}); give the one to measure",
                        file_names(&npys)
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
            format!("non-finite value {} at {}", bad.1, position(bad.0)),
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
        path: file.clone(),
        unknown_keys: sidecar.unknown.keys().cloned().collect(),
        warnings: Vec::new(),
        files: vec![file],
        positions_mm: None,
    })
}

/// Checks an `.npy` header before its data is read: the number of axes, each axis and the
/// total against the resource limits ([`crate::limits`]), and the bytes the shape needs
/// against the `available` bytes after the header (when known).
fn check_header(
    file: &Path,
    header: &Header,
    available: Option<u64>,
    axes: &[&str],
) -> Result<(), IoError> {
    let bad = |m: String| IoError::content(file, m);
    if header.shape.len() != axes.len() {
        return Err(bad(format!(
            "expected {} axes [{}], found shape {:?}",
            axes.len(),
            axes.join(", "),
            header.shape
        )));
    }
    let named: Vec<(&str, u64)> = axes
        .iter()
        .zip(&header.shape)
        .map(|(a, n)| (*a, *n as u64))
        .collect();
    crate::limits::check_shape("array", &named).map_err(bad)?;
    if let (Some(available), PyValue::String(descr)) = (available, &header.type_descriptor) {
        let digits = descr.trim_start_matches(|c: char| !c.is_ascii_digit());
        if let Ok(size) = digits.parse::<u64>() {
            let values: u64 = named.iter().map(|(_, n)| n).product();
            crate::limits::check_bytes("array", values.saturating_mul(size), available)
                .map_err(bad)?;
        }
    }
    Ok(())
}

/// Reads an `.npy` file as `A` with the named axes, its header checked first
/// ([`check_header`]), so a header claiming more than the file holds allocates nothing.
///
/// # Errors
/// [`IoError`] naming the file: unreadable, wrong axes or dtype, beyond the limits, short.
pub fn read_checked<A: ReadableElement, D: ndarray::Dimension>(
    file: &Path,
    axes: &[&str],
) -> Result<ndarray::Array<A, D>, IoError> {
    let open = || std::fs::File::open(file).map_err(|e| IoError::file(file, "cannot open", e));
    let mut f = BufReader::new(open()?);
    let header = Header::from_reader(&mut f)
        .map_err(|e| IoError::content(file, format!("not a readable .npy header: {e}")))?;
    let len = std::fs::metadata(file)
        .map_err(|e| IoError::file(file, "cannot read", e))?
        .len();
    let at = f
        .stream_position()
        .map_err(|e| IoError::file(file, "cannot read", e))?;
    check_header(file, &header, Some(len.saturating_sub(at)), axes)?;
    f.seek(SeekFrom::Start(0))
        .map_err(|e| IoError::file(file, "cannot read", e))?;
    ndarray::Array::<A, D>::read_npy(f).map_err(|e| IoError::content(file, e.to_string()))
}

/// The image array of an `.npz` archive: the one named `images`, or the only one.
fn read_npz_images(file: &Path) -> Result<Array4<f32>, IoError> {
    let f = std::fs::File::open(file).map_err(|e| IoError::file(file, "cannot open", e))?;
    let mut zip = zip::ZipArchive::new(BufReader::new(f))
        .map_err(|e| IoError::content(file, format!("not a readable .npz archive: {e}")))?;
    let names: Vec<String> = zip.file_names().map(str::to_string).collect();
    let name = match names.iter().find(|n| *n == "images" || *n == "images.npy") {
        Some(n) => n.clone(),
        None if names.len() == 1 => names[0].clone(),
        None => {
            return Err(IoError::content(
                file,
                format!(
                    "the archive holds {} arrays ({}) and none is named `images`",
                    names.len(),
                    names.join(", ")
                ),
            ))
        }
    };
    let wrong = |e: String| {
        IoError::content(
            file,
            format!("array `{name}`: expected a 4-D float32 or float64 array [slice, frame, row, col]: {e}"),
        )
    };
    {
        let mut e = zip.by_name(&name).map_err(|e| wrong(e.to_string()))?;
        let size = e.size();
        let header = Header::from_reader(&mut e).map_err(|e| wrong(e.to_string()))?;
        check_header(file, &header, Some(size), &IMAGE_AXES)
            .map_err(|e| wrong(content_message(e)))?;
    }
    let first = match Array4::<f32>::read_npy(zip.by_name(&name).map_err(|e| wrong(e.to_string()))?)
    {
        Ok(a) => return Ok(a),
        Err(e) => e,
    };
    let entry = zip.by_name(&name).map_err(|e| wrong(e.to_string()))?;
    let wide = Array4::<f64>::read_npy(entry);
    wide.map(|a| a.mapv(|v| v as f32))
        .map_err(|_| wrong(first.to_string()))
}

/// The axes of an image array.
pub const IMAGE_AXES: [&str; 4] = ["slice", "frame", "row", "col"];
/// The axes of one slice of raw k-space.
pub const KSPACE_AXES: [&str; 4] = ["coil", "frame", "ky", "kx"];

fn read_f32_4d(file: &Path) -> Result<Array4<f32>, IoError> {
    if file.extension().is_some_and(|x| x == "npz") {
        return read_npz_images(file);
    }
    match read_checked::<f32, ndarray::Ix4>(file, &IMAGE_AXES) {
        Ok(a) => Ok(a),
        Err(first) => match read_checked::<f64, ndarray::Ix4>(file, &IMAGE_AXES) {
            Ok(a) => Ok(a.mapv(|v| v as f32)),
            Err(_) => Err(IoError::content(
                file,
                format!(
                    "expected a 4-D float32 or float64 array [slice, frame, row, col]: {}",
                    content_message(first)
                ),
            )),
        },
    }
}

/// The message of a content error without its path (to re-wrap it with more context).
fn content_message(e: IoError) -> String {
    match e {
        IoError::Content { message, .. } => message,
        other => other.to_string(),
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

/// A raw k-space folder: `slice_NN.npy` files in numeric order, geometry and noise data.
#[derive(Debug, Clone)]
pub struct KspaceFolder {
    /// The slice files, slice 0 first.
    pub slices: Vec<PathBuf>,
    /// Dimensions `(slices, coils, frames, ky, kx)`, from the first slice.
    pub dims: (usize, usize, usize, usize, usize),
    /// Validated geometry.
    pub geometry: Geometry,
    /// Coil noise covariance from `noise_cov.npy` or `noise_scan.npy`, if present.
    pub noise_cov: Option<ndarray::Array2<Complex32>>,
    /// Sidecar keys that were not understood (to warn about).
    pub unknown_keys: Vec<String>,
}

fn read_complex<D: ndarray::Dimension>(
    file: &Path,
    axes: &[&str],
) -> Result<ndarray::Array<Complex32, D>, IoError> {
    match read_checked::<Complex32, D>(file, axes) {
        Ok(a) => Ok(a),
        Err(first) => match read_checked::<num_complex::Complex64, D>(file, axes) {
            Ok(a) => Ok(a.mapv(|z| Complex32::new(z.re as f32, z.im as f32))),
            Err(_) => Err(IoError::content(
                file,
                format!(
                    "expected a complex64 or complex128 array: {}",
                    content_message(first)
                ),
            )),
        },
    }
}

/// Reads one slice of k-space `[coil, frame, ky, kx]`.
///
/// # Errors
/// [`IoError`] naming the file: wrong dtype or number of axes.
pub fn read_kspace_slice(file: &Path) -> Result<Array4<Complex32>, IoError> {
    read_complex::<ndarray::Ix4>(file, &KSPACE_AXES)
}

/// Opens a raw k-space folder: lists `slice_NN.npy` in numeric order (no gaps allowed),
/// reads the first slice for the dimensions, the sidecar, and the noise data.
///
/// # Errors
/// [`IoError`] naming the file or the missing slice.
pub fn open_kspace_folder(dir: &Path) -> Result<KspaceFolder, IoError> {
    let mut found: Vec<(usize, PathBuf)> = std::fs::read_dir(dir)
        .map_err(|e| IoError::file(dir, "cannot list folder", e))?
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter_map(|p| {
            let name = p.file_name()?.to_str()?.to_string();
            let n = name
                .strip_prefix("slice_")?
                .strip_suffix(".npy")?
                .parse::<usize>()
                .ok()?;
            Some((n, p))
        })
        .collect();
    found.sort();
    if found.is_empty() {
        return Err(IoError::content(
            dir,
            "no slice_NN.npy files in this k-space folder",
        ));
    }
    for (i, (n, _)) in found.iter().enumerate() {
        if *n != i {
            return Err(IoError::content(
                dir,
                format!(
                    "{} is missing (slices must be numbered from 00 without gaps)",
                    slice_file_name(i)
                ),
            ));
        }
    }
    let first = read_kspace_slice(&found[0].1)?;
    let (nc, nf, ny, nx) = first.dim();
    let sidecar_path = dir.join(SIDECAR);
    let sidecar =
        read_sidecar(&sidecar_path).map_err(|e| IoError::content(&sidecar_path, e.to_string()))?;
    let geometry = Geometry::from_sidecar(&sidecar, nf, &sidecar_path.display().to_string())
        .map_err(|e| IoError::content(&sidecar_path, e.to_string()))?;
    let cov_path = dir.join("noise_cov.npy");
    let scan_path = dir.join("noise_scan.npy");
    let noise_cov = if cov_path.exists() {
        let c = read_complex::<ndarray::Ix2>(&cov_path, &["coil", "coil"])?;
        if c.dim() != (nc, nc) {
            return Err(IoError::content(
                &cov_path,
                format!(
                    "expected a {nc} × {nc} coil covariance, found {:?}",
                    c.dim()
                ),
            ));
        }
        Some(c)
    } else if scan_path.exists() {
        let s = read_complex::<ndarray::Ix2>(&scan_path, &["coil", "sample"])?;
        if s.nrows() != nc || s.ncols() < 2 {
            return Err(IoError::content(
                &scan_path,
                format!("expected [{nc} coils, samples ≥ 2], found {:?}", s.dim()),
            ));
        }
        Some(super::kspace::noise_covariance(s.view()))
    } else {
        None
    };
    Ok(KspaceFolder {
        slices: found.into_iter().map(|(_, p)| p).collect(),
        dims: (0, nc, nf, ny, nx),
        geometry,
        noise_cov,
        unknown_keys: sidecar.unknown.keys().cloned().collect(),
    }
    .with_slice_count())
}

impl KspaceFolder {
    fn with_slice_count(mut self) -> Self {
        self.dims.0 = self.slices.len();
        self
    }

    /// Reads slice `k`, checking it has the same shape as slice 0.
    ///
    /// # Errors
    /// [`IoError`] naming the file.
    pub fn read(&self, k: usize) -> Result<Array4<Complex32>, IoError> {
        let a = read_kspace_slice(&self.slices[k])?;
        let (_, nc, nf, ny, nx) = self.dims;
        if a.dim() != (nc, nf, ny, nx) {
            return Err(IoError::content(
                &self.slices[k],
                format!(
                    "shape {:?} differs from slice 0's {:?}",
                    a.dim(),
                    (nc, nf, ny, nx)
                ),
            ));
        }
        if let Some((i, v)) = a
            .indexed_iter()
            .find(|(_, v)| !v.re.is_finite() || !v.im.is_finite())
        {
            return Err(IoError::content(
                &self.slices[k],
                format!("non-finite value {v} at {i:?}"),
            ));
        }
        Ok(a)
    }
}
