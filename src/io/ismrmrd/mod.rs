//! ISMRMRD raw data (the open standard for MR raw data, stored in HDF5): a 2-D Cartesian
//! multi-slice cine read into per-slice `[coil, frame, ky, kx]` k-space.
//!
//! The XML header and the assembly rules ([`assemble`]) are always built; reading the HDF5
//! container needs the `ismrmrd` cargo feature (and the system HDF5 library), so the default
//! build stays free of system libraries.

pub mod assemble;
#[cfg(feature = "ismrmrd")]
mod file;
pub mod header;

use std::path::{Path, PathBuf};

pub use assemble::{Overrides, RawData};

use super::IoError;

/// The HDF5 signature at the start of a file (without a user block).
const HDF5_SIGNATURE: &[u8; 8] = b"\x89HDF\r\n\x1a\n";

/// Whether `path` is an HDF5 file (by its signature; a missing file by its extension).
pub fn is_hdf5(path: &Path) -> bool {
    let mut head = [0u8; 8];
    match std::fs::File::open(path) {
        Ok(mut f) if path.is_file() => {
            std::io::Read::read_exact(&mut f, &mut head).is_ok() && &head == HDF5_SIGNATURE
        }
        _ => path
            .extension()
            .is_some_and(|x| x == "h5" || x == "hdf5" || x == "mrd"),
    }
}

/// The optional sidecar beside an ISMRMRD file: `cine.h5` → `cine.geometry.json`.
pub fn sidecar_path(path: &Path) -> PathBuf {
    let stem = path
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default();
    path.with_file_name(format!("{stem}.geometry.json"))
}

fn read_overrides(path: &Path) -> Result<Option<Overrides>, IoError> {
    let side = sidecar_path(path);
    if !side.exists() {
        return Ok(None);
    }
    let text =
        std::fs::read_to_string(&side).map_err(|e| IoError::file(&side, "cannot read", e))?;
    crate::json::parse(&text)
        .map(Some)
        .map_err(|e| IoError::content(&side, format!("not a valid geometry sidecar: {e}")))
}

/// Reads an ISMRMRD file's header and acquisition headers (group `dataset`) and checks
/// them; k-space is then read slice by slice with [`RawData::read`].
///
/// # Errors
/// [`IoError::Content`] naming the file and the header element, acquisition or counter at
/// fault; in a build without the `ismrmrd` feature, a message saying how to rebuild.
pub fn read_ismrmrd(path: &Path) -> Result<RawData, IoError> {
    let overrides = read_overrides(path)?;
    open_file(path, overrides.as_ref())
}

#[cfg(feature = "ismrmrd")]
fn open_file(path: &Path, overrides: Option<&Overrides>) -> Result<RawData, IoError> {
    let (xml, acqs) = file::open(path, "dataset").map_err(|m| IoError::content(path, m))?;
    let h = header::parse(&xml).map_err(|m| IoError::content(path, m))?;
    RawData::new(path, &h, Box::new(acqs), overrides)
}

#[cfg(not(feature = "ismrmrd"))]
fn open_file(path: &Path, _: Option<&Overrides>) -> Result<RawData, IoError> {
    Err(IoError::content(
        path,
        "built without ISMRMRD support: rebuild with `--features ismrmrd` (needs libhdf5-dev)",
    ))
}
