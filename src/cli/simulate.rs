//! `cinegauge simulate`: write a synthetic study to disk.

use std::path::PathBuf;

use anyhow::Context;
use clap::Args;

use super::progress::{say, Progress};
use cinegauge::phantom::{Phantom, PhantomSpec};
use cinegauge::simulate;

/// Arguments of `simulate`.
#[derive(Debug, Args)]
#[command(
    after_help = "Example:\n  cinegauge simulate --out sim --edv-ml 180 --ef-pct 45 --rng-seed 7\n\n\
Writes DIR/kspace/ (slice_NN.npy + geometry.json), DIR/reference/ (images.npy + geometry.json), \
DIR/truth.json and DIR/seeds.toml. Synthetic data for research and protocol evaluation; not for diagnostic use."
)]
pub struct SimulateArgs {
    /// Output folder (created if needed).
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    /// Subject code written into the truth file.
    #[arg(long, default_value = "SIM-01")]
    pub subject: String,
    /// Seed of every random choice (noise).
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub rng_seed: u64,
    /// End-diastolic volume, ml.
    #[arg(long, default_value_t = 150.0)]
    pub edv_ml: f64,
    /// Ejection fraction, %.
    #[arg(long, default_value_t = 60.0)]
    pub ef_pct: f64,
    /// Heart rate, beats per minute.
    #[arg(long, default_value_t = 68.0)]
    pub heart_rate_bpm: f64,
    /// Short-axis slices.
    #[arg(long, default_value_t = 13)]
    pub slices: usize,
    /// Slice thickness, mm.
    #[arg(long, default_value_t = 8.0)]
    pub slice_thickness_mm: f64,
    /// Gap between slices, mm.
    #[arg(long, default_value_t = 2.0)]
    pub slice_gap_mm: f64,
    /// In-plane pixel size, mm.
    #[arg(long, default_value_t = 1.8)]
    pub pixel_mm: f64,
    /// Matrix rows (phase encoding).
    #[arg(long, default_value_t = 112)]
    pub rows: usize,
    /// Matrix columns (readout).
    #[arg(long, default_value_t = 128)]
    pub cols: usize,
    /// Frames per cardiac cycle.
    #[arg(long, default_value_t = 20)]
    pub frames: usize,
    /// Receive coils.
    #[arg(long, default_value_t = 8)]
    pub coils: usize,
    /// Blood signal over noise standard deviation of the coil-combined image.
    #[arg(long, default_value_t = 25.0)]
    pub snr: f64,
}

pub fn run(a: SimulateArgs, quiet: bool) -> anyhow::Result<()> {
    let spec = PhantomSpec {
        edv_ml: a.edv_ml,
        ef_pct: a.ef_pct,
        heart_rate_bpm: a.heart_rate_bpm,
        slices: a.slices,
        slice_thickness_mm: a.slice_thickness_mm,
        slice_gap_mm: a.slice_gap_mm,
        pixel_mm: a.pixel_mm,
        rows: a.rows,
        cols: a.cols,
        frames: a.frames,
        coils: a.coils,
        snr: a.snr,
        rng_seed: a.rng_seed,
        thin_septum: None,
    };
    let ph = Phantom::new(spec).context("checking the phantom parameters")?;
    let prog = Progress::new("simulate", a.slices as u64, quiet);
    simulate::write_study(&ph, &a.subject, &a.out, &|k, n| {
        prog.step(k as u64, n as u64, "slices")
    })
    .context("writing the synthetic study")?;
    prog.finish();
    say(
        quiet,
        &format!("wrote synthetic study {} to {}", a.subject, a.out.display()),
    );
    Ok(())
}
