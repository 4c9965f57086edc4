//! DICOM cine series: a folder (searched recursively) of classic single-frame MR images.
//!
//! Slices are ordered by ImagePositionPatient projected on the slice normal
//! `n = row direction × column direction` (ImageOrientationPatient), frames by TriggerTime
//! (InstanceNumber when there is none). Pixel spacing and the centre-to-centre slice spacing
//! come from the geometry (PixelSpacing; the distance between projected positions), never
//! from SpacingBetweenSlices. Pixel values have RescaleSlope/Intercept applied. Only the
//! attributes needed for geometry and timing are read; nothing identifying the patient is
//! kept.

use std::collections::{BTreeMap, HashMap, HashSet};
use std::io::Read;
use std::path::{Path, PathBuf};

use ::dicom::pixeldata::PixelDecoder;
use ndarray::{s, Array4};

use super::npy::ImageSeries;
use super::IoError;
use crate::geometry::{Geometry, GeometrySidecar};
use header::Header;

/// Tolerance on direction cosines when checking that all images share one orientation.
const ORIENTATION_TOL: f64 = 1e-4;
/// Positions along the normal closer than this (mm) belong to the same slice.
const SAME_SLICE_MM: f64 = 0.01;
/// Allowed relative deviation of one slice gap from the mean gap.
const GAP_TOL: f64 = 0.01;

/// A series found in a folder.
#[derive(Debug, Clone)]
pub struct SeriesSummary {
    /// SeriesInstanceUID.
    pub uid: String,
    /// SeriesDescription (may be empty).
    pub description: String,
    /// Number of image files.
    pub images: usize,
}

/// Whether a file starts with the DICOM preamble and `DICM` magic (PS3.10 §7.1).
pub fn has_dicom_magic(path: &Path) -> bool {
    let mut head = [0u8; 132];
    std::fs::File::open(path)
        .and_then(|mut f| f.read_exact(&mut head))
        .is_ok_and(|()| &head[128..] == b"DICM")
}

/// Every file under `dir` (recursively), sorted by path.
fn walk(dir: &Path, out: &mut Vec<PathBuf>) -> Result<(), IoError> {
    let mut entries: Vec<PathBuf> = std::fs::read_dir(dir)
        .map_err(|e| IoError::file(dir, "cannot list folder", e))?
        .filter_map(|e| e.ok().map(|e| e.path()))
        .collect();
    entries.sort();
    for p in entries {
        if p.is_dir() {
            walk(&p, out)?;
        } else {
            out.push(p);
        }
    }
    Ok(())
}

/// The DICOM files under `dir`.
///
/// # Errors
/// [`IoError`] when the folder cannot be listed.
pub fn dicom_files(dir: &Path) -> Result<Vec<PathBuf>, IoError> {
    let mut all = Vec::new();
    walk(dir, &mut all)?;
    Ok(all.into_iter().filter(|p| has_dicom_magic(p)).collect())
}

fn cross(a: [f64; 3], b: [f64; 3]) -> [f64; 3] {
    [
        a[1] * b[2] - a[2] * b[1],
        a[2] * b[0] - a[0] * b[2],
        a[0] * b[1] - a[1] * b[0],
    ]
}

fn dot(a: [f64; 3], b: [f64; 3]) -> f64 {
    a.iter().zip(&b).map(|(x, y)| x * y).sum()
}

fn headers(dir: &Path) -> Result<Vec<Header>, IoError> {
    let files = dicom_files(dir)?;
    if files.is_empty() {
        return Err(IoError::content(
            dir,
            "no DICOM files (with the DICM preamble) in this folder",
        ));
    }
    let mut all = Vec::new();
    for p in &files {
        all.extend(header::read_headers(p)?);
    }
    Ok(all)
}

fn summarise(all: &[Header]) -> Vec<SeriesSummary> {
    let mut by: BTreeMap<&str, SeriesSummary> = BTreeMap::new();
    for h in all {
        by.entry(&h.series_uid)
            .or_insert_with(|| SeriesSummary {
                uid: h.series_uid.clone(),
                description: h.description.clone(),
                images: 0,
            })
            .images += 1;
    }
    by.into_values().collect()
}

/// The series in a folder, by SeriesInstanceUID.
///
/// # Errors
/// [`IoError`] naming a file that cannot be read.
pub fn list_series(dir: &Path) -> Result<Vec<SeriesSummary>, IoError> {
    Ok(summarise(&headers(dir)?))
}

/// Reads one cine series from a folder. `series` picks it by SeriesInstanceUID or
/// SeriesDescription when the folder holds several.
///
/// # Errors
/// [`IoError`] naming the file and the attribute at fault: several series and none chosen,
/// mixed orientations (non-parallel slices), unequal frame counts per slice, duplicate
/// positions, missing pixel spacing, uneven slice gaps, pixel data that cannot be decoded.
pub fn read_dicom_series(dir: &Path, series: Option<&str>) -> Result<ImageSeries, IoError> {
    let all = headers(dir)?;
    let found = summarise(&all);
    let chosen = match series {
        Some(want) => found
            .iter()
            .find(|s| s.uid == want || s.description == want)
            .ok_or_else(|| {
                IoError::content(
                    dir,
                    format!(
                        "no series with UID or description `{want}`; found {}",
                        describe(&found)
                    ),
                )
            })?,
        None if found.len() == 1 => &found[0],
        None => {
            return Err(IoError::content(
                dir,
                format!(
                    "{} series here; choose one with --series UID-or-description: {}",
                    found.len(),
                    describe(&found)
                ),
            ))
        }
    };
    let images: Vec<&Header> = all.iter().filter(|h| h.series_uid == chosen.uid).collect();
    let first = images[0];
    let mut warnings = Vec::new();
    for h in &images {
        let diff = h
            .orientation
            .iter()
            .zip(&first.orientation)
            .map(|(a, b)| (a - b).abs())
            .fold(0.0, f64::max);
        if diff > ORIENTATION_TOL {
            return Err(IoError::content(
                &h.path,
                format!(
                    "ImageOrientationPatient (0020,0037) {:?} differs from {:?} in {}: mixed orientations or non-parallel slices",
                    h.orientation, first.orientation, first.path.display()
                ),
            ));
        }
        if (h.rows, h.cols) != (first.rows, first.cols) {
            return Err(IoError::content(
                &h.path,
                format!(
                    "Rows × Columns {} × {} differs from {} × {} in {}",
                    h.rows,
                    h.cols,
                    first.rows,
                    first.cols,
                    first.path.display()
                ),
            ));
        }
    }
    crate::limits::check_shape(
        "pixel data",
        &[
            ("Rows (0028,0010)", first.rows as u64),
            ("Columns (0028,0011)", first.cols as u64),
            ("images", images.len() as u64),
        ],
    )
    .map_err(|m| IoError::content(dir, m))?;
    let spacing = first
        .spacing
        .ok_or_else(|| IoError::content(&first.path, "PixelSpacing (0028,0030) is missing"))?;
    if let Some(h) = images.iter().find(|h| h.spacing != Some(spacing)) {
        return Err(IoError::content(
            &h.path,
            match h.spacing {
                None => "PixelSpacing (0028,0030) is missing".to_string(),
                Some(s) => format!(
                    "PixelSpacing (0028,0030) {s:?} differs from {spacing:?} in {}",
                    first.path.display()
                ),
            },
        ));
    }
    let o = first.orientation;
    let normal = cross([o[0], o[1], o[2]], [o[3], o[4], o[5]]);
    // Sort by position along the normal, then by trigger time or instance number.
    let mut keyed: Vec<(f64, &Header)> = images
        .iter()
        .map(|h| (dot(normal, h.position), *h))
        .collect();
    let frame_key = |h: &Header| h.trigger_ms.unwrap_or(h.instance.unwrap_or(0) as f64);
    keyed.sort_by(|a, b| {
        a.0.total_cmp(&b.0)
            .then(frame_key(a.1).total_cmp(&frame_key(b.1)))
    });
    let mut slices: Vec<(f64, Vec<&Header>)> = Vec::new();
    for (d, h) in keyed {
        match slices.last_mut() {
            Some((d0, list)) if (d - *d0).abs() <= SAME_SLICE_MM => list.push(h),
            _ => slices.push((d, vec![h])),
        }
    }
    for (d, list) in &slices {
        for pair in list.windows(2) {
            if frame_key(pair[0]) == frame_key(pair[1]) {
                return Err(IoError::content(
                    &pair[1].path,
                    format!(
                        "same position ({d:.2} mm along the normal) and TriggerTime (0018,1060) as {}: duplicate image",
                        pair[0].path.display()
                    ),
                ));
            }
        }
    }
    let frames = slices[0].1.len();
    if let Some((d, list)) = slices.iter().find(|(_, l)| l.len() != frames) {
        return Err(IoError::content(
            dir,
            format!(
                "the slice at {:.2} mm along the normal has {} images and the slice at {:.2} mm has {frames}: unequal frame counts per slice",
                d,
                list.len(),
                slices[0].0
            ),
        ));
    }
    let gaps: Vec<f64> = slices.windows(2).map(|w| w[1].0 - w[0].0).collect();
    let slice_spacing = if gaps.is_empty() {
        first.thickness.unwrap_or(1.0)
    } else {
        gaps.iter().sum::<f64>() / gaps.len() as f64
    };
    if let Some((k, g)) = gaps
        .iter()
        .enumerate()
        .find(|(_, g)| (*g - slice_spacing).abs() > GAP_TOL * slice_spacing)
    {
        return Err(IoError::content(
            dir,
            format!("slice gap {g:.2} mm between slices {k} and {} differs from the mean {slice_spacing:.2} mm: a missing or extra slice?", k + 1),
        ));
    }
    let thickness = first.thickness.unwrap_or_else(|| {
        warnings.push(format!(
            "SliceThickness (0018,0050) missing; the slice spacing {slice_spacing:.2} mm is used"
        ));
        slice_spacing
    });
    let trigger: Option<Vec<f64>> = if images.iter().all(|h| h.trigger_ms.is_some()) {
        Some(
            (0..frames)
                .map(|f| {
                    slices
                        .iter()
                        .map(|(_, l)| l[f].trigger_ms.unwrap_or(0.0))
                        .sum::<f64>()
                        / slices.len() as f64
                })
                .collect(),
        )
    } else {
        warnings.push("TriggerTime (0018,1060) missing; frames ordered by InstanceNumber, 1 ms apart (rates are not meaningful)".into());
        None
    };
    let rr = first.nominal_interval_ms.filter(|v| *v > 0.0).or_else(|| {
        first
            .heart_rate_bpm
            .filter(|v| *v > 0.0)
            .map(|hr| 60_000.0 / hr)
    });
    let sidecar = GeometrySidecar {
        pixel_spacing_mm: spacing.to_vec(),
        slice_thickness_mm: thickness,
        slice_spacing_mm: slice_spacing,
        frame_interval_ms: if trigger.is_none() { Some(1.0) } else { None },
        trigger_times_ms: trigger,
        rr_interval_ms: rr,
        unknown: Default::default(),
    };
    let geometry = Geometry::from_sidecar(&sidecar, frames, &dir.display().to_string())
        .map_err(|e| IoError::content(dir, e.to_string()))?;
    let (nr, nc) = (first.rows, first.cols);
    let mut stack = Array4::<f32>::zeros((slices.len(), frames, nr, nc));
    let mut files = Vec::with_capacity(images.len());
    // Each file is decoded once (an enhanced file holds many frames).
    let mut decoded: HashMap<&Path, Array4<f32>> = HashMap::new();
    let mut seen: HashSet<&Path> = HashSet::new();
    for (k, (_, list)) in slices.iter().enumerate() {
        for (f, h) in list.iter().enumerate() {
            if !decoded.contains_key(h.path.as_path()) {
                decoded.insert(&h.path, decode(h, nr, nc)?);
            }
            let px = decoded[h.path.as_path()].slice(s![h.frame, .., .., 0]);
            let (slope, intercept) = h.rescale;
            stack
                .slice_mut(s![k, f, .., ..])
                .zip_mut_with(&px, |o, v| *o = (f64::from(*v) * slope + intercept) as f32);
            if seen.insert(h.path.as_path()) {
                files.push(h.path.clone());
            }
        }
    }
    if let Some(v) = stack.iter().find(|v| !v.is_finite()) {
        return Err(IoError::content(
            dir,
            format!("non-finite pixel value {v} after rescaling"),
        ));
    }
    Ok(ImageSeries {
        images: stack,
        geometry,
        path: dir.to_path_buf(),
        unknown_keys: Vec::new(),
        warnings,
        files,
        positions_mm: Some(slices.iter().map(|(d, _)| *d).collect()),
    })
}

/// All frames of one file as `[frame, row, col, sample]`: with the modality LUT applied for
/// classic images, as stored for enhanced ones (their rescale is per frame, applied by the
/// caller from the functional groups).
fn decode(h: &Header, rows: usize, cols: usize) -> Result<Array4<f32>, IoError> {
    use ::dicom::pixeldata::{ConvertOptions, ModalityLutOption};
    let obj = ::dicom::object::open_file(&h.path)
        .map_err(|e| IoError::content(&h.path, format!("not a readable DICOM file: {e}")))?;
    check_pixel_attributes(&obj).map_err(|m| IoError::content(&h.path, m))?;
    let options = if h.enhanced {
        ConvertOptions::new().with_modality_lut(ModalityLutOption::None)
    } else {
        ConvertOptions::new()
    };
    let px = obj
        .decode_pixel_data()
        .and_then(|d| d.to_ndarray_with_options::<f32>(&options))
        .map_err(|e| {
            IoError::content(
                &h.path,
                format!(
                    "pixel data in transfer syntax {} cannot be decoded by this build: {e}",
                    transfer_syntax_name(obj.meta().transfer_syntax())
                ),
            )
        })?;
    let (n, r, c, samples) = px.dim();
    if (r, c, samples) != (rows, cols, 1) || n <= h.frame {
        return Err(IoError::content(
            &h.path,
            format!(
                "pixel data has shape {:?}; expected frames of {rows} × {cols}, one sample",
                px.dim()
            ),
        ));
    }
    Ok(px)
}

/// Checks the image pixel attributes (PS3.3 C.7.6.3) before decoding: the decoder assumes
/// them sane (a BitsStored of 0 stops it, 32 makes it build a 4-G-entry table) and sizes its
/// buffers from them.
fn check_pixel_attributes(obj: &::dicom::object::DefaultDicomObject) -> Result<(), String> {
    use ::dicom::dictionary_std::tags;
    let int = |tag, name: &str| -> Result<Option<u64>, String> {
        match obj.element_opt(tag) {
            Ok(Some(e)) => e
                .to_int::<u64>()
                .map(Some)
                .map_err(|_| format!("{name} {tag} is not a non-negative whole number")),
            _ => Ok(None),
        }
    };
    let samples = int(tags::SAMPLES_PER_PIXEL, "SamplesPerPixel")?.unwrap_or(1);
    if samples != 1 {
        return Err(format!(
            "SamplesPerPixel (0028,0002) is {samples}: only single-sample (grey-scale) MR images can be read"
        ));
    }
    let allocated = int(tags::BITS_ALLOCATED, "BitsAllocated")?
        .ok_or("BitsAllocated (0028,0100) is missing")?;
    if ![8, 16, 32].contains(&allocated) {
        return Err(format!(
            "BitsAllocated (0028,0100) is {allocated}: expected 8, 16 or 32"
        ));
    }
    let stored = int(tags::BITS_STORED, "BitsStored")?.unwrap_or(allocated);
    if !(1..=allocated.min(16)).contains(&stored) {
        return Err(format!(
            "BitsStored (0028,0101) is {stored} with BitsAllocated {allocated}: expected 1 to {}",
            allocated.min(16)
        ));
    }
    let rows = int(tags::ROWS, "Rows")?.unwrap_or(0);
    let cols = int(tags::COLUMNS, "Columns")?.unwrap_or(0);
    let frames = int(tags::NUMBER_OF_FRAMES, "NumberOfFrames")?.unwrap_or(1);
    crate::limits::check_shape(
        "pixel data",
        &[
            ("NumberOfFrames (0028,0008)", frames),
            ("Rows (0028,0010)", rows),
            ("Columns (0028,0011)", cols),
        ],
    )
}

/// `UID (name)` of a transfer syntax, the name from the registry when it is known.
fn transfer_syntax_name(uid: &str) -> String {
    use ::dicom::encoding::TransferSyntaxIndex;
    let uid = uid.trim_end_matches('\0');
    match ::dicom::transfer_syntax::TransferSyntaxRegistry.get(uid) {
        Some(ts) => format!("{uid} ({})", ts.name()),
        None => uid.to_string(),
    }
}

fn describe(found: &[SeriesSummary]) -> String {
    found
        .iter()
        .map(|s| format!("{} (\"{}\", {} images)", s.uid, s.description, s.images))
        .collect::<Vec<_>>()
        .join("; ")
}

mod header;
mod lengths;
mod write;
pub use write::{derived_uid, write_dicom_series, SeriesLabel};
