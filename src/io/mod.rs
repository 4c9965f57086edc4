//! Reading and writing study data; every write is atomic (temporary file, then rename).

pub mod npy;

use std::io::Write;
use std::path::{Path, PathBuf};

use sha2::{Digest, Sha256};

/// An I/O failure with the file it concerns.
#[derive(Debug, thiserror::Error)]
pub enum IoError {
    /// Reading or writing a file failed.
    #[error("{path}: {what}: {source}")]
    File {
        /// File.
        path: String,
        /// What was being done.
        what: &'static str,
        /// Cause.
        source: std::io::Error,
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
            source,
        }
    }

    pub(crate) fn content(path: &Path, message: impl Into<String>) -> Self {
        IoError::Content {
            path: path.display().to_string(),
            message: message.into(),
        }
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
    let dir = path
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let tmp: PathBuf = dir.join(format!(".{name}.partial-{}", std::process::id()));
    let result = (|| {
        let mut f = std::fs::File::create(&tmp)?;
        fill(&mut f)?;
        f.sync_all()?;
        std::fs::rename(&tmp, path)
    })();
    if let Err(e) = result {
        let _ = std::fs::remove_file(&tmp);
        return Err(IoError::file(path, "cannot write", e));
    }
    Ok(())
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
