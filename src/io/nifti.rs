//! NIfTI-1 image series (`.nii`, `.nii.gz`), 3-D or 3-D + time.
//!
//! Axis mapping (DESIGN.md): NIfTI's first axis is `col`, the second `row`, the third `slice`
//! and the fourth `frame`. Voxel sizes come from the sform affine when `sform_code > 0` (the
//! length of each of its first three columns), otherwise from `pixdim[1..=3]`, in the units of
//! `xyzt_units`; the frame interval from `pixdim[4]`. NIfTI has no slice thickness: the
//! slice spacing stands in for it (contiguous slices), with a warning.

use std::path::Path;

use ndarray::{Array4, ArrayView4, Axis, Ix4};
use nifti::writer::WriterOptions;
use nifti::{IntoNdArray, NiftiHeader, NiftiObject, ReaderOptions};

use super::npy::ImageSeries;
use super::{write_atomic_path, IoError};
use crate::geometry::{Geometry, GeometrySidecar};

/// Whether `path` names a NIfTI file by its extension.
pub fn is_nifti(path: &Path) -> bool {
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().to_ascii_lowercase())
        .unwrap_or_default();
    name.ends_with(".nii") || name.ends_with(".nii.gz")
}

/// The reader's error in words, naming the header field where there is one.
fn describe(e: nifti::NiftiError) -> String {
    match e {
        nifti::NiftiError::InvalidFormat => {
            "magic (bytes 344–347) is neither `n+1` nor `ni1`: not a NIfTI-1 file".into()
        }
        nifti::NiftiError::Io(io) if io.kind() == std::io::ErrorKind::UnexpectedEof => {
            "the file ends before its header and voxel data are complete (truncated?)".into()
        }
        nifti::NiftiError::Io(io) => format!("cannot read: {io}"),
        other => other.to_string(),
    }
}

/// Millimetres per spatial unit and milliseconds per time unit of `xyzt_units`, with a
/// warning when a unit is unknown (then mm and ms are assumed).
fn units(h: &NiftiHeader, warnings: &mut Vec<String>) -> Result<(f64, f64), String> {
    let space = match h.xyzt_units & 0x07 {
        1 => 1000.0,
        2 => 1.0,
        3 => 0.001,
        0 => {
            warnings.push("xyzt_units gives no spatial unit; millimetres assumed".into());
            1.0
        }
        other => return Err(format!("xyzt_units: unknown spatial unit code {other}")),
    };
    let time = match h.xyzt_units & 0x38 {
        8 => 1000.0,
        16 => 1.0,
        24 => 0.001,
        0 => {
            warnings.push("xyzt_units gives no time unit; milliseconds assumed".into());
            1.0
        }
        other => return Err(format!("xyzt_units: unknown time unit code {other}")),
    };
    Ok((space, time))
}

/// Voxel sizes `(col, row, slice)` in the file's spatial unit: sform column lengths when the
/// sform is set, else pixdim.
fn voxel_sizes(h: &NiftiHeader, warnings: &mut Vec<String>) -> Result<[f64; 3], String> {
    let pix = [h.pixdim[1], h.pixdim[2], h.pixdim[3]].map(f64::from);
    for (i, v) in pix.iter().enumerate() {
        if !(v.is_finite() && *v != 0.0) {
            return Err(format!(
                "pixdim[{}] (voxel size along {}) is {v}; it must be non-zero",
                i + 1,
                ["columns", "rows", "slices"][i]
            ));
        }
    }
    let pix = pix.map(f64::abs);
    if h.sform_code <= 0 {
        return Ok(pix);
    }
    let rows = [h.srow_x, h.srow_y, h.srow_z];
    let col = |j: usize| {
        rows.iter()
            .map(|r| f64::from(r[j]).powi(2))
            .sum::<f64>()
            .sqrt()
    };
    let affine = [col(0), col(1), col(2)];
    if affine.iter().any(|v| !(v.is_finite() && *v > 0.0)) {
        return Err(format!(
            "sform (srow_x/y/z) has a zero or non-finite column: voxel sizes {affine:?}"
        ));
    }
    if affine
        .iter()
        .zip(&pix)
        .any(|(a, p)| (a - p).abs() > 1e-3 * p.max(*a))
    {
        warnings.push(format!(
            "pixdim {pix:?} and the sform's voxel sizes {affine:?} disagree; the sform is used"
        ));
    }
    Ok(affine)
}

/// Reads a NIfTI-1 series into `[slice, frame, row, col]` with its geometry.
///
/// # Errors
/// [`IoError`] naming the file and the header field at fault: wrong magic or truncated file,
/// a dimensionality other than 3 or 4, zero voxel sizes or frame interval, complex data,
/// non-finite values.
pub fn read_nifti_series(path: &Path) -> Result<ImageSeries, IoError> {
    let bad = |m: String| IoError::content(path, m);
    let header = NiftiHeader::from_file(path).map_err(|e| bad(describe(e)))?;
    check_claims(path, &header).map_err(bad)?;
    let obj = ReaderOptions::new()
        .read_file(path)
        .map_err(|e| bad(describe(e)))?;
    let h = obj.header().clone();
    let mut warnings = Vec::new();
    let rank = usize::from(h.dim[0]);
    if !(3..=4).contains(&rank) {
        return Err(bad(format!(
            "dim[0] = {rank}: expected a 3-D or 3-D + time series (3 or 4)"
        )));
    }
    let (mm, ms) = units(&h, &mut warnings).map_err(bad)?;
    let [col_mm, row_mm, slice_mm] = voxel_sizes(&h, &mut warnings).map_err(bad)?.map(|v| v * mm);
    let frames = if rank == 4 { usize::from(h.dim[4]) } else { 1 };
    let data = obj.into_volume().into_ndarray::<f32>().map_err(|e| {
        bad(format!(
            "voxel data (datatype {}): {}",
            h.datatype,
            describe(e)
        ))
    })?;
    let data = if data.ndim() == 3 {
        data.insert_axis(Axis(3))
    } else {
        data
    };
    let data = data
        .into_dimensionality::<Ix4>()
        .map_err(|e| bad(format!("voxel data does not match dim[1..=4]: {e}")))?;
    // [col, row, slice, frame] → [slice, frame, row, col]
    let images = data
        .permuted_axes([2, 3, 1, 0])
        .as_standard_layout()
        .into_owned();
    if let Some((i, v)) = images.indexed_iter().find(|(_, v)| !v.is_finite()) {
        return Err(bad(format!(
            "non-finite voxel value {v} at {}",
            super::npy::position(i)
        )));
    }
    let interval = f64::from(h.pixdim[4]) * ms;
    if frames > 1 && !(interval.is_finite() && interval > 0.0) {
        return Err(bad(format!(
            "pixdim[4] (frame interval) is {}; a cine series needs a positive frame interval",
            h.pixdim[4]
        )));
    }
    warnings.push(format!(
        "NIfTI has no slice thickness; the slice spacing {slice_mm:.2} mm is used (contiguous slices)"
    ));
    let sidecar = GeometrySidecar {
        pixel_spacing_mm: vec![row_mm, col_mm],
        slice_thickness_mm: slice_mm,
        slice_spacing_mm: slice_mm,
        trigger_times_ms: None,
        frame_interval_ms: Some(if frames > 1 { interval } else { 1.0 }),
        rr_interval_ms: None,
        unknown: Default::default(),
    };
    let geometry = Geometry::from_sidecar(&sidecar, frames, &path.display().to_string())
        .map_err(|e| bad(e.to_string()))?;
    Ok(ImageSeries {
        images,
        geometry,
        path: path.to_path_buf(),
        unknown_keys: Vec::new(),
        warnings,
        files: vec![path.to_path_buf()],
        positions_mm: None,
    })
}

/// Checks what the header claims before the voxel data is read: the dimensions against the
/// resource limits ([`crate::limits`]), the datatype, and for an uncompressed file that
/// `vox_offset` and the data it promises lie within the file.
fn check_claims(path: &Path, h: &NiftiHeader) -> Result<(), String> {
    let rank = usize::from(h.dim[0]);
    if !(1..=7).contains(&rank) {
        // The byte order is taken from dim[0] itself, so a bad value is bad in both orders.
        return Err(format!(
            "dim[0] = {} ({} in the other byte order): the number of dimensions must be 1 to 7 (3 or 4 for a series)",
            h.dim[0],
            h.dim[0].swap_bytes()
        ));
    }
    let names = [
        "dim[1] (columns)",
        "dim[2] (rows)",
        "dim[3] (slices)",
        "dim[4] (frames)",
        "dim[5]",
        "dim[6]",
        "dim[7]",
    ];
    let mut axes = Vec::with_capacity(rank);
    for (i, name) in names.iter().enumerate().take(rank) {
        let n = h.dim[i + 1];
        if n < 1 {
            return Err(format!("{name} = {n}: every dimension must be at least 1"));
        }
        axes.push((*name, n as u64));
    }
    crate::limits::check_shape("voxel data", &axes)?;
    let datatype = h
        .data_type()
        .map_err(|_| format!("datatype = {}: not a NIfTI-1 datatype code", h.datatype))?;
    // The nifti crate sizes the voxel data from bitpix, not from the datatype.
    let bits = 8 * datatype.size_of();
    if usize::try_from(h.bitpix).ok() != Some(bits) {
        return Err(format!(
            "bitpix = {}: datatype {} ({datatype:?}) has {bits} bits per value",
            h.bitpix, h.datatype
        ));
    }
    if !(h.vox_offset.is_finite() && h.vox_offset >= 0.0) {
        return Err(format!("vox_offset = {}: not a byte offset", h.vox_offset));
    }
    let values: u64 = axes.iter().map(|(_, n)| n).product();
    let needed = values * datatype.size_of() as u64;
    if h.magic == *b"n+1\0" && !is_gz(path) {
        let len = std::fs::metadata(path).map(|m| m.len()).unwrap_or(0);
        let offset = h.vox_offset as u64;
        if offset > len {
            return Err(format!(
                "vox_offset = {} lies beyond the end of the file ({len} bytes)",
                h.vox_offset
            ));
        }
        crate::limits::check_bytes("voxel data", needed, len - offset.max(352))?;
    } else if h.vox_offset > (1u64 << 26) as f32 {
        return Err(format!(
            "vox_offset = {}: more than 64 MiB of header extensions",
            h.vox_offset
        ));
    }
    Ok(())
}

fn is_gz(path: &Path) -> bool {
    path.to_string_lossy().to_ascii_lowercase().ends_with(".gz")
}

/// A header carrying the geometry: voxel sizes in mm, frame interval in ms, a diagonal sform.
fn header_for(geometry: &Geometry) -> NiftiHeader {
    let interval = match geometry.trigger_times_ms.as_slice() {
        [a, b, ..] => b - a,
        _ => 1.0,
    };
    let (c, r, s) = (
        geometry.col_spacing_mm as f32,
        geometry.row_spacing_mm as f32,
        geometry.slice_spacing_mm as f32,
    );
    NiftiHeader {
        pixdim: [1.0, c, r, s, interval as f32, 1.0, 1.0, 1.0],
        xyzt_units: 2 | 16,
        sform_code: 1,
        qform_code: 0,
        srow_x: [c, 0.0, 0.0, 0.0],
        srow_y: [0.0, r, 0.0, 0.0],
        srow_z: [0.0, 0.0, s, 0.0],
        ..NiftiHeader::default()
    }
}

/// Writes a `[slice, frame, row, col]` stack as NIfTI-1 (`.nii` or, by extension,
/// `.nii.gz`), atomically. `T` is `f32` for images and `u8` for masks.
///
/// # Errors
/// [`IoError`] naming the file.
pub fn write_nifti_series<T>(
    path: &Path,
    stack: ArrayView4<T>,
    geometry: &Geometry,
) -> Result<(), IoError>
where
    T: nifti::DataElement + bytemuck::Pod,
{
    let header = header_for(geometry);
    // [slice, frame, row, col] → [col, row, slice, frame]
    let data: Array4<T> = stack
        .permuted_axes([3, 2, 0, 1])
        .as_standard_layout()
        .into_owned();
    let gz = path.to_string_lossy().to_ascii_lowercase().ends_with(".gz");
    write_atomic_path(path, |tmp| {
        WriterOptions::new(tmp)
            .reference_header(&header)
            .compress(gz)
            .write_nifti(&data)
            .map_err(std::io::Error::other)
    })
}
