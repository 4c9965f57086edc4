//! Reading and writing study data; every write is atomic (temporary file, then rename).

pub mod dicom;
pub mod ismrmrd;
pub mod kspace;
pub mod nifti;
pub mod npy;
pub mod png;
pub mod table;

use std::io::Write;
use std::path::{Path, PathBuf};

use sha2::{Digest, Sha256};

/// An I/O failure with the file it concerns.
#[derive(Debug, thiserror::Error)]
pub enum IoError {
    /// Reading or writing a file failed.
    #[error("{path}: {what}: {cause}")]
    File {
        /// File.
        path: String,
        /// What was being done.
        what: &'static str,
        /// Cause (in the message itself, so that error chains do not repeat it).
        cause: std::io::Error,
    },
    /// The file's content is not what was expected.
    #[error("{path}: {message}")]
    Content {
        /// File.
        path: String,
        /// What is wrong, naming the field or value.
        message: String,
    },
}

impl IoError {
    pub(crate) fn file(path: &Path, what: &'static str, source: std::io::Error) -> Self {
        IoError::File {
            path: path.display().to_string(),
            what,
            cause: source,
        }
    }

    pub(crate) fn content(path: &Path, message: impl Into<String>) -> Self {
        let path = path.display().to_string();
        let message = message.into();
        // Errors of the stage below often start with the same file; say it once.
        let message = match message
            .strip_prefix(&path)
            .and_then(|m| m.strip_prefix(": "))
        {
            Some(rest) => rest.to_string(),
            None => message,
        };
        IoError::Content { path, message }
    }
}

/// Writes `bytes` to `path` atomically: a temporary file in the same folder, flushed and
/// synced, then renamed over the target, so a reader never sees a half-written file.
///
/// # Errors
/// [`IoError::File`] naming the path.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<(), IoError> {
    write_atomic_with(path, |f| f.write_all(bytes))
}

/// Like [`write_atomic`], with the content produced by `fill` into the temporary file.
///
/// # Errors
/// [`IoError::File`] naming the path.
pub fn write_atomic_with(
    path: &Path,
    fill: impl FnOnce(&mut std::fs::File) -> std::io::Result<()>,
) -> Result<(), IoError> {
    write_atomic_path(path, |tmp| {
        let mut f = std::fs::File::create(tmp)?;
        fill(&mut f)
    })
}

/// Like [`write_atomic`], for writers that insist on opening the file by path themselves:
/// `fill` writes to a temporary path in the same folder (keeping the file's extensions, which
/// such writers read), then it is renamed over `path`.
///
/// # Errors
/// [`IoError::File`] naming the path.
pub fn write_atomic_path(
    path: &Path,
    fill: impl FnOnce(&Path) -> std::io::Result<()>,
) -> Result<(), IoError> {
    let dir = path
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let tmp = dir.join(format!(".partial-{}-{name}", std::process::id()));
    let result = fill(&tmp)
        .and_then(|()| std::fs::File::open(&tmp)?.sync_all())
        .and_then(|()| std::fs::rename(&tmp, path));
    if let Err(e) = result {
        let _ = std::fs::remove_file(&tmp);
        return Err(IoError::file(path, "cannot write", e));
    }
    Ok(())
}

/// Reads an image series in any supported format: a NIfTI-1 file (`.nii`, `.nii.gz`), a
/// folder holding one, a NumPy image folder / `.npy` file with `geometry.json`, or a folder
/// of DICOM images (`series` picks one by SeriesInstanceUID or SeriesDescription when the
/// folder holds several).
///
/// # Errors
/// [`IoError`] naming the file and what is wrong.
pub fn read_images(path: &Path, series: Option<&str>) -> Result<npy::ImageSeries, IoError> {
    if nifti::is_nifti(path) {
        return nifti::read_nifti_series(path);
    }
    if path.is_dir() {
        let mut listed: Vec<PathBuf> = std::fs::read_dir(path)
            .map_err(|e| IoError::file(path, "cannot list folder", e))?
            .filter_map(|e| e.ok().map(|e| e.path()))
            .collect();
        listed.sort();
        let has_npy = listed.iter().any(|p| npy::is_numpy(p));
        let niftis: Vec<PathBuf> = listed.into_iter().filter(|p| nifti::is_nifti(p)).collect();
        match (niftis.len(), has_npy) {
            (1, false) => return nifti::read_nifti_series(&niftis[0]),
            (n, _) if n > 1 => {
                return Err(IoError::content(
                    path,
                    format!(
                        "several NIfTI files ({}); give the one to read",
                        file_names(&niftis)
                    ),
                ));
            }
            (0, false) => {
                if self::dicom::dicom_files(path)?.is_empty() {
                    return Err(IoError::content(
                        path,
                        "no image series here: no DICOM files, no .nii/.nii.gz, no .npy/.npz",
                    ));
                }
                return self::dicom::read_dicom_series(path, series);
            }
            _ => {}
        }
    }
    npy::read_image_series(path)
}

/// SHA-256 over the SHA-256 of each file in order (the provenance of a multi-file series).
///
/// # Errors
/// [`IoError::File`] naming a file that cannot be read.
pub fn sha256_files(files: &[PathBuf]) -> Result<String, IoError> {
    if let [one] = files {
        return sha256_file(one);
    }
    let mut h = Sha256::new();
    for f in files {
        h.update(sha256_file(f)?.as_bytes());
    }
    Ok(format!("{:x}", h.finalize()))
}

/// The file names of `paths`, comma-separated (for "which one?" messages).
pub(crate) fn file_names(paths: &[PathBuf]) -> String {
    paths
        .iter()
        .filter_map(|p| p.file_name())
        .map(|n| n.to_string_lossy().into_owned())
        .collect::<Vec<_>>()
        .join(", ")
}

/// Creates the output folder (and parents).
///
/// # Errors
/// [`IoError::File`] naming the folder.
pub fn ensure_dir(dir: &Path) -> Result<(), IoError> {
    std::fs::create_dir_all(dir).map_err(|e| IoError::file(dir, "cannot create folder", e))
}

/// SHA-256 of a file's bytes, hex-encoded (input provenance in results).
///
/// # Errors
/// [`IoError::File`] naming the file.
pub fn sha256_file(path: &Path) -> Result<String, IoError> {
    let mut f = std::fs::File::open(path).map_err(|e| IoError::file(path, "cannot open", e))?;
    let mut h = Sha256::new();
    std::io::copy(&mut f, &mut h).map_err(|e| IoError::file(path, "cannot read", e))?;
    Ok(h.finalize().iter().map(|b| format!("{b:02x}")).collect())
}
