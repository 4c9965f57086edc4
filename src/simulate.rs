//! Writes a synthetic study to disk: raw k-space folder, reference images, truth and seeds.
//!
//! Layout of `DIR`:
//! * `kspace/slice_NN.npy` (`[coil, frame, ky, kx]` complex64) and `kspace/geometry.json`
//! * `reference/images.npy` (`[slice, frame, row, col]` float32) and `reference/geometry.json`,
//!   the fully sampled root-sum-of-squares reconstruction, ready for `measure`
//! * `truth.json`: analytic truth with the result-row keys
//! * `seeds.toml`: one mid-ventricular seed

use std::path::Path;

use ndarray::{s, Array4};
use serde::Serialize;

use crate::caution::CAUTION;
use crate::fft::CenteredFft2;
use crate::io::{self, npy, write_atomic, IoError};
use crate::phantom::{Phantom, PhantomSpec};
use crate::pipeline;
use crate::recon::{self, Params, ReconInput};
use crate::results::Truth;
use crate::sampling::SamplingSpec;
use crate::segment::seeds::seeds_to_toml;

#[derive(Serialize)]
struct TruthFile<'a> {
    tool: &'static str,
    version: &'static str,
    caution: &'static str,
    subject: &'a str,
    phantom: &'a PhantomSpec,
    truth: &'a Truth,
}

/// Writes the study of one synthetic subject into `dir`; `progress` hears each slice.
///
/// # Errors
/// [`IoError`] naming the file that could not be written.
pub fn write_study(
    ph: &Phantom,
    subject: &str,
    dir: &Path,
    progress: &dyn Fn(usize, usize),
) -> Result<(), IoError> {
    let spec = ph.spec();
    let kdir = dir.join("kspace");
    let rdir = dir.join("reference");
    io::ensure_dir(&kdir)?;
    io::ensure_dir(&rdir)?;
    let geom = ph.geometry();
    let fft = CenteredFft2::new(spec.rows, spec.cols);
    let mask = SamplingSpec::full()
        .mask(spec.frames, spec.rows)
        .expect("full mask always fits");
    let reference = recon::by_id("reference").expect("registered");
    let mut stack = Array4::<f32>::zeros((spec.slices, spec.frames, spec.rows, spec.cols));
    for k in 0..spec.slices {
        progress(k, spec.slices);
        let (image, _) = ph.render_slice(k);
        let kspace = ph.slice_kspace(k, &image);
        npy::write_kspace_slice(&kdir, k, kspace.view())?;
        let input = ReconInput {
            kspace: kspace.view(),
            mask: &mask,
            fft: &fft,
            sens: None,
        };
        let out = recon::run(reference, &input, &Params::defaults(reference))
            .expect("reference accepts a full mask of finite data");
        stack.slice_mut(s![k, .., .., ..]).assign(&out.images);
    }
    progress(spec.slices, spec.slices);
    npy::write_sidecar(&kdir, &geom)?;
    npy::write_image_series(&rdir, stack.view(), &geom)?;
    let truth = pipeline::phantom_truth(ph);
    let file = TruthFile {
        tool: "cinegauge",
        version: env!("CARGO_PKG_VERSION"),
        caution: CAUTION,
        subject,
        phantom: spec,
        truth: &truth,
    };
    let json = serde_json::to_string_pretty(&file).expect("truth serialises");
    write_atomic(&dir.join("truth.json"), format!("{json}\n").as_bytes())?;
    let seed = pipeline::phantom_seed(ph);
    write_atomic(&dir.join("seeds.toml"), seeds_to_toml(&[seed]).as_bytes())
}
