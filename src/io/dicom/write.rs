//! Writing derived MR image series (reconstructions for readers and for other tools).

use std::path::{Path, PathBuf};

use ::dicom::core::{DataElement, PrimitiveValue, Tag, VR};
use ::dicom::dictionary_std::{tags, uids};
use ::dicom::object::{FileMetaTableBuilder, InMemDicomObject};
use ndarray::s;

use crate::geometry::Geometry;
use crate::io::IoError;

/// Attributes with the same value in every file: constants and the type 2 attributes of the
/// MR image IOD that a derived series leaves empty (no dates, no names but the subject code).
const CONSTANT: [(Tag, VR, &str); 14] = [
    (tags::SOP_CLASS_UID, VR::UI, uids::MR_IMAGE_STORAGE),
    (tags::MODALITY, VR::CS, "MR"),
    (tags::PATIENT_BIRTH_DATE, VR::DA, ""),
    (tags::PATIENT_SEX, VR::CS, ""),
    (tags::STUDY_DATE, VR::DA, ""),
    (tags::STUDY_TIME, VR::TM, ""),
    (tags::REFERRING_PHYSICIAN_NAME, VR::PN, ""),
    (tags::STUDY_ID, VR::SH, ""),
    (tags::ACCESSION_NUMBER, VR::SH, ""),
    (tags::SCANNING_SEQUENCE, VR::CS, "RM"),
    (tags::SEQUENCE_VARIANT, VR::CS, "NONE"),
    (tags::SCAN_OPTIONS, VR::CS, ""),
    (tags::MR_ACQUISITION_TYPE, VR::CS, "2D"),
    (tags::PHOTOMETRIC_INTERPRETATION, VR::CS, "MONOCHROME2"),
];

/// Type 2 numeric attributes left empty.
const EMPTY_NUMBERS: [(Tag, VR); 3] = [
    (tags::ECHO_TIME, VR::DS),
    (tags::REPETITION_TIME, VR::DS),
    (tags::ECHO_TRAIN_LENGTH, VR::IS),
];

/// A decimal string (VR DS, at most 16 characters).
fn ds(v: f64) -> String {
    let mut s = format!("{v:.6}");
    while s.contains('.') && (s.ends_with('0') || s.ends_with('.')) {
        s.pop();
    }
    s.truncate(16);
    s
}

/// A UID under the `2.25` root (PS3.5 §B.2: a UUID as one decimal number), derived from
/// `parts` so that the same inputs give the same UID.
pub fn derived_uid(parts: &[&str]) -> String {
    use sha2::{Digest, Sha256};
    let mut h = Sha256::new();
    for p in parts {
        h.update(p.as_bytes());
        h.update([0u8]);
    }
    let d = h.finalize();
    let mut bytes = [0u8; 16];
    bytes.copy_from_slice(&d[..16]);
    // RFC 9562 version 8 (custom) and variant bits, so the number is a well-formed UUID.
    bytes[6] = (bytes[6] & 0x0f) | 0x80;
    bytes[8] = (bytes[8] & 0x3f) | 0x80;
    format!("2.25.{}", u128::from_be_bytes(bytes))
}

/// What to write into a derived series besides the pixels.
#[derive(Debug, Clone)]
pub struct SeriesLabel<'a> {
    /// Subject code (written as patient name and ID: a code, never a real name).
    pub subject: &'a str,
    /// SeriesDescription, e.g. `cg-sense R=8`.
    pub description: &'a str,
    /// SeriesNumber.
    pub number: i32,
}

/// Writes a `[slice, frame, row, col]` stack as a derived MR image series (one file per
/// slice and frame, `IM_ssss_ffff.dcm`, explicit VR little endian, 16-bit with
/// RescaleSlope), atomically, into `dir`. Geometry is written as an axial stack at the
/// origin (orientation is not carried by the stack); spacing, thickness and trigger times
/// are exact. UIDs are derived from the subject, description and pixel content.
///
/// # Errors
/// [`IoError`] naming the file that could not be written, or non-finite or negative pixels.
pub fn write_dicom_series(
    dir: &Path,
    stack: ndarray::ArrayView4<f32>,
    geometry: &Geometry,
    label: &SeriesLabel,
) -> Result<Vec<PathBuf>, IoError> {
    let (ns, nf, nr, nc) = stack.dim();
    if let Some(v) = stack.iter().find(|v| !v.is_finite() || **v < 0.0) {
        return Err(IoError::content(
            dir,
            format!("cannot write pixel value {v}: magnitude images must be finite and ≥ 0"),
        ));
    }
    let max = stack
        .iter()
        .cloned()
        .fold(0.0f32, f32::max)
        .max(f32::MIN_POSITIVE);
    let slope = f64::from(max) / 65535.0;
    let content = {
        use sha2::{Digest, Sha256};
        let mut h = Sha256::new();
        stack.iter().for_each(|v| h.update(v.to_le_bytes()));
        format!("{:x}", h.finalize())
    };
    let study = derived_uid(&[label.subject, "study"]);
    let series = derived_uid(&[label.subject, label.description, &content]);
    let frame_of_ref = derived_uid(&[label.subject, "frame of reference"]);
    let text = |tag, vr, v: &str| DataElement::new(tag, vr, PrimitiveValue::from(v));
    let us = |tag, v: usize| DataElement::new(tag, VR::US, PrimitiveValue::from(v as u16));
    let multi = |tag, vals: &[f64]| {
        DataElement::new(
            tag,
            VR::DS,
            PrimitiveValue::Strs(vals.iter().map(|v| ds(*v)).collect()),
        )
    };
    let mut files = Vec::with_capacity(ns * nf);
    for k in 0..ns {
        for f in 0..nf {
            let instance = k * nf + f + 1;
            let sop = derived_uid(&[&series, &instance.to_string()]);
            let pixels: Vec<u16> = stack
                .slice(s![k, f, .., ..])
                .iter()
                .map(|v| (f64::from(*v) / slope).round().clamp(0.0, 65535.0) as u16)
                .collect();
            let mut elems = vec![
                text(tags::SOP_INSTANCE_UID, VR::UI, &sop),
                text(tags::STUDY_INSTANCE_UID, VR::UI, &study),
                text(tags::SERIES_INSTANCE_UID, VR::UI, &series),
                text(tags::FRAME_OF_REFERENCE_UID, VR::UI, &frame_of_ref),
                DataElement::new(
                    tags::IMAGE_TYPE,
                    VR::CS,
                    PrimitiveValue::Strs(
                        ["DERIVED", "SECONDARY"]
                            .map(String::from)
                            .into_iter()
                            .collect(),
                    ),
                ),
                text(tags::PATIENT_NAME, VR::PN, label.subject),
                text(tags::PATIENT_ID, VR::LO, label.subject),
                text(tags::SERIES_DESCRIPTION, VR::LO, label.description),
                text(tags::SERIES_NUMBER, VR::IS, &label.number.to_string()),
                text(tags::INSTANCE_NUMBER, VR::IS, &instance.to_string()),
                multi(
                    tags::IMAGE_ORIENTATION_PATIENT,
                    &[1.0, 0.0, 0.0, 0.0, 1.0, 0.0],
                ),
                multi(
                    tags::IMAGE_POSITION_PATIENT,
                    &[0.0, 0.0, k as f64 * geometry.slice_spacing_mm],
                ),
                multi(
                    tags::PIXEL_SPACING,
                    &[geometry.row_spacing_mm, geometry.col_spacing_mm],
                ),
                multi(tags::SLICE_THICKNESS, &[geometry.slice_thickness_mm]),
                multi(tags::TRIGGER_TIME, &[geometry.trigger_times_ms[f]]),
                us(tags::SAMPLES_PER_PIXEL, 1),
                us(tags::ROWS, nr),
                us(tags::COLUMNS, nc),
                us(tags::BITS_ALLOCATED, 16),
                us(tags::BITS_STORED, 16),
                us(tags::HIGH_BIT, 15),
                us(tags::PIXEL_REPRESENTATION, 0),
                multi(tags::RESCALE_INTERCEPT, &[0.0]),
                DataElement::new(
                    tags::RESCALE_SLOPE,
                    VR::DS,
                    PrimitiveValue::from(format!("{slope:.9e}")),
                ),
                DataElement::new(tags::PIXEL_DATA, VR::OW, PrimitiveValue::U16(pixels.into())),
            ];
            elems.extend(CONSTANT.iter().map(|(tag, vr, v)| text(*tag, *vr, v)));
            elems.extend(EMPTY_NUMBERS.iter().map(|(tag, vr)| text(*tag, *vr, "")));
            if let Some(rr) = geometry.rr_interval_ms {
                // NominalInterval is an integer string (IS) in ms.
                elems.push(text(
                    tags::NOMINAL_INTERVAL,
                    VR::IS,
                    &format!("{}", rr.round() as i64),
                ));
            }
            let obj = InMemDicomObject::from_element_iter(elems)
                .with_meta(
                    FileMetaTableBuilder::new()
                        .transfer_syntax(uids::EXPLICIT_VR_LITTLE_ENDIAN)
                        .implementation_class_uid(derived_uid(&["cinegauge", "implementation"])),
                )
                .map_err(|e| {
                    IoError::content(dir, format!("cannot build the DICOM file meta: {e}"))
                })?;
            let path = dir.join(format!("IM_{k:04}_{f:04}.dcm"));
            crate::io::write_atomic_with(&path, |file| {
                obj.write_all(file).map_err(std::io::Error::other)
            })?;
            files.push(path);
        }
    }
    Ok(files)
}
