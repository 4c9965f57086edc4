//! The HDF5 side of ISMRMRD: the `/dataset/xml` header and the `/dataset/data` acquisitions.
//!
//! Only the header fields this reader uses are read (HDF5 converts compound types by member
//! name), and sample data is read per run of acquisitions, so a slice's k-space is the only
//! bulk data in memory.

use std::ops::Range;
use std::path::Path;
use std::sync::{Mutex, MutexGuard};

use hdf5::types::{VarLenArray, VarLenAscii, VarLenUnicode};

use super::assemble::{AcqHead, Acquisitions, Counters};

#[derive(hdf5::H5Type, Clone)]
#[repr(C)]
struct H5Counters {
    kspace_encode_step_1: u16,
    kspace_encode_step_2: u16,
    average: u16,
    slice: u16,
    contrast: u16,
    phase: u16,
    repetition: u16,
    set: u16,
}

#[derive(hdf5::H5Type, Clone)]
#[repr(C)]
struct H5Head {
    flags: u64,
    physiology_time_stamp: [u32; 3],
    number_of_samples: u16,
    active_channels: u16,
    discard_pre: u16,
    discard_post: u16,
    trajectory_dimensions: u16,
    position: [f32; 3],
    slice_dir: [f32; 3],
    idx: H5Counters,
}

#[derive(hdf5::H5Type, Clone)]
#[repr(C)]
struct HeadOnly {
    head: H5Head,
}

#[derive(hdf5::H5Type, Clone)]
#[repr(C)]
struct DataOnly {
    data: VarLenArray<f32>,
}

/// Held by every HDF5 call of this module, handle drops included: the system HDF5 library
/// (Debian's build) is not thread-safe, and concurrent reads of one file were seen to fail
/// with "bad global heap collection signature".
static HDF5: Mutex<()> = Mutex::new(());

fn hdf5_lock() -> MutexGuard<'static, ()> {
    HDF5.lock().unwrap_or_else(|poisoned| poisoned.into_inner())
}

/// An open ISMRMRD file: every acquisition header in memory, samples read on demand.
pub struct Hdf5Acquisitions {
    /// Always `Some` until dropped (taken under the lock in `drop`).
    data: Option<hdf5::Dataset>,
    heads: Vec<AcqHead>,
}

impl Drop for Hdf5Acquisitions {
    fn drop(&mut self) {
        let _guard = hdf5_lock();
        self.data.take();
    }
}

/// Opens `path`, reads the XML header text and the acquisition headers of `group`
/// (`dataset` by convention).
pub fn open(path: &Path, group: &str) -> Result<(String, Hdf5Acquisitions), String> {
    let _guard = hdf5_lock();
    let file = hdf5::File::open(path).map_err(|e| format!("not a readable HDF5 file: {e}"))?;
    let xml_ds = file
        .dataset(&format!("{group}/xml"))
        .map_err(|_| format!("no `/{group}/xml` header dataset (not an ISMRMRD file?)"))?;
    let xml = match xml_ds.read_raw::<VarLenAscii>() {
        Ok(v) => v.first().map(|s| s.as_str().to_string()),
        Err(_) => xml_ds
            .read_raw::<VarLenUnicode>()
            .map_err(|e| format!("`/{group}/xml` is not a string: {e}"))?
            .first()
            .map(|s| s.as_str().to_string()),
    }
    .ok_or_else(|| format!("`/{group}/xml` is empty"))?;
    let data = file
        .dataset(&format!("{group}/data"))
        .map_err(|_| format!("no `/{group}/data` acquisition dataset"))?;
    let heads = data
        .read_raw::<HeadOnly>()
        .map_err(|e| format!("`/{group}/data`: acquisition headers unreadable: {e}"))?
        .into_iter()
        .map(|h| convert(h.head))
        .collect();
    Ok((
        xml,
        Hdf5Acquisitions {
            data: Some(data),
            heads,
        },
    ))
}

fn convert(h: H5Head) -> AcqHead {
    let c = h.idx;
    AcqHead {
        flags: h.flags,
        number_of_samples: h.number_of_samples,
        active_channels: h.active_channels,
        discard_pre: h.discard_pre,
        discard_post: h.discard_post,
        trajectory_dimensions: h.trajectory_dimensions,
        physiology_time_stamp: h.physiology_time_stamp,
        position: h.position,
        slice_dir: h.slice_dir,
        idx: Counters {
            kspace_encode_step_1: c.kspace_encode_step_1,
            kspace_encode_step_2: c.kspace_encode_step_2,
            average: c.average,
            slice: c.slice,
            contrast: c.contrast,
            phase: c.phase,
            repetition: c.repetition,
            set: c.set,
        },
    }
}

impl Acquisitions for Hdf5Acquisitions {
    fn heads(&self) -> &[AcqHead] {
        &self.heads
    }

    fn data(&self, range: Range<usize>) -> Result<Vec<Vec<f32>>, String> {
        let _guard = hdf5_lock();
        let (a, b) = (range.start, range.end);
        let data = self.data.as_ref().ok_or("the HDF5 file is closed")?;
        let rows = data
            .read_slice_1d::<DataOnly, _>(ndarray::s![a..b])
            .map_err(|e| format!("acquisitions {a}..{b}: sample data unreadable: {e}"))?;
        Ok(rows.iter().map(|r| r.data.to_vec()).collect())
    }
}
