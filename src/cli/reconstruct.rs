//! `cinegauge reconstruct`: undersample a raw k-space folder and reconstruct it.

use std::path::PathBuf;

use anyhow::Context;
use clap::Args;
use serde::Serialize;

use super::progress::{say, Progress};
use cinegauge::caution::CAUTION;
use cinegauge::io::{self, npy, write_atomic};
use cinegauge::pipeline::{self, CoilPrep, RunRequest, SliceLog};
use cinegauge::recon::{self, params::split_assignment, Params};
use cinegauge::results::AcquisitionRecord;
use cinegauge::sampling::{Pattern, SamplingSpec, DEFAULT_ACS_LINES};

/// Arguments of `reconstruct`.
#[derive(Debug, Args)]
#[command(
    after_help = "Example:\n  cinegauge reconstruct --kspace sim/kspace --pattern variable-density --accel 8 \\\n      --method xf-sparse --set iterations=60 --out sim/xf-r8\n\n\
Writes DIR/images.npy [slice, frame, row, col], DIR/geometry.json and DIR/recon.json; the folder \
feeds `cinegauge measure --images DIR` directly. --nifti adds DIR/images.nii.gz, --dicom adds \
DIR/dicom/ (a derived MR image series for viewers; patient name and ID are the --subject code). `cinegauge methods` and `cinegauge patterns` list \
the choices. Research use only; not for diagnostic use."
)]
pub struct ReconstructArgs {
    /// Raw k-space: a folder of slice_NN.npy [coil, frame, ky, kx] + geometry.json, or an
    /// ISMRMRD file (.h5; needs a build with `--features ismrmrd`).
    #[arg(long, value_name = "PATH")]
    pub kspace: PathBuf,
    /// Sampling pattern (see `cinegauge patterns`).
    #[arg(long, value_name = "P")]
    pub pattern: String,
    /// Nominal acceleration R (1 for `full`).
    #[arg(long, value_name = "R", default_value_t = 1.0)]
    pub accel: f64,
    /// Reconstruction method (see `cinegauge methods`).
    #[arg(long, value_name = "M")]
    pub method: String,
    /// Method parameter, repeatable: --set iterations=50 --set lambda=0.01.
    #[arg(long = "set", value_name = "KEY=VALUE")]
    pub set: Vec<String>,
    /// Fully sampled calibration lines at the k-space centre.
    #[arg(long, value_name = "N", default_value_t = DEFAULT_ACS_LINES)]
    pub acs_lines: usize,
    /// Seed of every random choice (variable-density lines).
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub rng_seed: u64,
    /// Compress to this many virtual coils before reconstruction (0: no compression).
    #[arg(long, value_name = "K", default_value_t = 0)]
    pub virtual_coils: usize,
    /// Output folder (created if needed).
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    /// Also write the images as NIfTI-1 (DIR/images.nii.gz).
    #[arg(long)]
    pub nifti: bool,
    /// Also write the images as a derived MR DICOM series (DIR/dicom/).
    #[arg(long)]
    pub dicom: bool,
    /// Subject code written into DICOM output (a code, never a patient's name).
    #[arg(long, value_name = "CODE", default_value = "subject")]
    pub subject: String,
}

#[derive(Serialize)]
struct ReconLog<'a> {
    tool: &'static str,
    version: &'static str,
    caution: &'static str,
    method: &'a str,
    parameters: std::collections::BTreeMap<&'static str, f64>,
    pattern: &'a str,
    accel_nominal: f64,
    accel_effective: f64,
    #[serde(flatten)]
    acquisition: &'a AcquisitionRecord,
    input_sha256: Vec<(String, String)>,
    slices: &'a [SliceLog],
    runtime_ms: f64,
}

pub fn run(a: ReconstructArgs, quiet: bool) -> anyhow::Result<()> {
    let started = std::time::Instant::now();
    let method = recon::by_id(&a.method)?;
    let given = a
        .set
        .iter()
        .map(|s| split_assignment(s))
        .collect::<Result<Vec<_>, _>>()?;
    let params = Params::resolve(method, &given)?;
    let pattern = Pattern::from_id(&a.pattern)?;
    let sampling = SamplingSpec::new(pattern, a.accel, a.acs_lines)?.with_rng_seed(a.rng_seed);
    let folder = io::kspace::open_kspace(&a.kspace).context("reading the raw k-space")?;
    for w in &folder.warnings {
        say(quiet, &format!("warning: {w}"));
    }
    let whitening = folder
        .noise_cov
        .as_ref()
        .map(recon::coils::whitening_matrix)
        .transpose()
        .context("noise pre-whitening")?;
    let prep = CoilPrep {
        whitening,
        virtual_coils: a.virtual_coils,
    };
    let (ns, _, nf, ny, nx) = folder.dims;
    sampling.mask(nf, ny)?;
    let request = RunRequest {
        method,
        sampling,
        params: params.clone(),
    };
    let prog = Progress::new("reconstruct", ns as u64, quiet);
    let mut rec = pipeline::reconstruct_slices(
        (folder.dims.1, ns, nf, ny, nx),
        &mut |k| folder.read(k).map_err(|e| e.to_string()),
        std::slice::from_ref(&request),
        &prep,
        &|k, n| prog.step(k as u64, n as u64, "slices"),
    )?
    .remove(0);
    prog.finish();
    let stack = rec
        .stack
        .map_err(anyhow::Error::msg)
        .context("reconstructing")?;
    io::ensure_dir(&a.out)?;
    npy::write_image_series(&a.out, stack.view(), &folder.geometry)?;
    if a.nifti {
        io::nifti::write_nifti_series(
            &a.out.join("images.nii.gz"),
            stack.view(),
            &folder.geometry,
        )?;
    }
    if a.dicom {
        let dir = a.out.join("dicom");
        io::ensure_dir(&dir)?;
        let description = format!("{} {} R={}", method.id(), pattern.id(), a.accel);
        let label = io::dicom::SeriesLabel {
            subject: &a.subject,
            description: &description,
            number: 1,
        };
        io::dicom::write_dicom_series(&dir, stack.view(), &folder.geometry, &label)?;
    }
    let mut hashes = Vec::new();
    for p in &folder.files {
        hashes.push((
            p.file_name()
                .map(|n| n.to_string_lossy().into_owned())
                .unwrap_or_default(),
            io::sha256_file(p)?,
        ));
    }
    rec.log.sort_by_key(|l| l.slice);
    let log = ReconLog {
        tool: "cinegauge",
        version: env!("CARGO_PKG_VERSION"),
        caution: CAUTION,
        method: method.id(),
        parameters: params.iter().collect(),
        pattern: pattern.id(),
        accel_nominal: rec.plan.accel_nominal,
        accel_effective: rec.plan.accel_effective,
        acquisition: &rec.acquisition,
        input_sha256: hashes,
        slices: &rec.log,
        runtime_ms: started.elapsed().as_secs_f64() * 1000.0,
    };
    let json = serde_json::to_string_pretty(&log)?;
    write_atomic(&a.out.join("recon.json"), format!("{json}\n").as_bytes())?;
    say(
        quiet,
        &format!(
            "{} with {} at R = {} (effective {:.2}): wrote {} in {:.1} s",
            method.id(),
            pattern.id(),
            a.accel,
            rec.plan.accel_effective,
            a.out.display(),
            started.elapsed().as_secs_f64()
        ),
    );
    Ok(())
}
