//! `cinegauge suggest-seeds`: proposed LV seeds and a seed sheet for the user to check.

use std::path::PathBuf;

use anyhow::Context;
use clap::Args;

use super::progress::say;
use cinegauge::io;
use cinegauge::segment::{seeds, suggest};

/// Arguments of `suggest-seeds`.
#[derive(Debug, Args)]
#[command(
    after_help = "Example:\n  cinegauge suggest-seeds --images study/cine.nii.gz --out seeds/\n\n\
Writes DIR/seed_sheet.png (every slice at the chosen frame, magnified, with a pixel grid, row \
and column numbers and the proposed seed as a red cross) and DIR/seeds.toml (the most confident \
proposal as the active seed, the other slices' proposals commented out, ready to edit). The proposals are suggestions: check each one on the sheet \
before passing the file to `cinegauge measure --seeds`; nothing uses them otherwise. Research use \
only; not for diagnostic use."
)]
pub struct SuggestArgs {
    /// DICOM folder, NIfTI-1 file, or image folder (as for `measure`).
    #[arg(long, value_name = "PATH")]
    pub images: PathBuf,
    /// DICOM folder with several series: which one (SeriesInstanceUID or SeriesDescription).
    #[arg(long, value_name = "UID-OR-DESCRIPTION")]
    pub series: Option<String>,
    /// Frame to show and to place the seeds in (zero-based).
    #[arg(long, value_name = "F", default_value_t = 0)]
    pub frame: usize,
    /// Output folder (created if needed).
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
}

pub fn run(a: SuggestArgs, quiet: bool) -> anyhow::Result<()> {
    let series =
        io::read_images(&a.images, a.series.as_deref()).context("reading the image series")?;
    let (ns, nf, _, _) = series.images.dim();
    anyhow::ensure!(
        a.frame < nf,
        "--frame {}: the series has {nf} frames (zero-based)",
        a.frame
    );
    let found = suggest::suggest(series.images.view(), a.frame, series.geometry.pixel_mm());
    let proposals = &found.proposals;
    let anchor = found.anchor.with_context(|| {
        format!(
            "{}: no round bright region that moves through the cycle in any slice at frame {}; \
             place the seeds by hand",
            series.path.display(),
            a.frame
        )
    })?;
    let mut ordered: Vec<_> = proposals.iter().flatten().map(|p| p.seed).collect();
    ordered.sort_by_key(|s| (s.slice != anchor, s.slice.abs_diff(anchor)));
    io::ensure_dir(&a.out)?;
    let mut values: Vec<f32> = series.images.iter().copied().collect();
    values.sort_by(f32::total_cmp);
    let hi = values[((values.len() - 1) as f64 * 0.995) as usize];
    let tiles: Vec<_> = (0..ns)
        .map(|k| {
            (
                series
                    .images
                    .index_axis(ndarray::Axis(0), k)
                    .index_axis_move(ndarray::Axis(0), a.frame),
                proposals[k].map(|p| (p.seed.row, p.seed.col)),
            )
        })
        .collect();
    io::png::write_seed_sheet(&a.out.join("seed_sheet.png"), &tiles, (0.0, hi))?;
    // The anchor is the one active seed (propagation does the rest); the other slices'
    // proposals follow commented out, to switch on where propagation needs help.
    let mut text = format!(
        "# PROPOSED seeds from `cinegauge suggest-seeds`: check them on seed_sheet.png before\n\
         # use. The active seed is the most confident one (slice {anchor}); the proposals for\n\
         # other slices are commented out: uncomment one to override propagation there.\n{}",
        seeds::seeds_to_toml(&ordered[..1])
    );
    for s in &ordered[1..] {
        text.push_str(&format!(
            "\n# [[seed]]\n# slice = {}\n# frame = {}\n# row = {}\n# col = {}\n",
            s.slice, s.frame, s.row, s.col
        ));
    }
    for (k, cover) in &found.past_base {
        text.push_str(&format!(
            "\n# slice {k}: no seed proposed: its bright region is only {:.0} % surrounded by\n\
             # myocardium (atrium or outflow tract, past the basal rule).\n",
            100.0 * cover
        ));
    }
    io::write_atomic(&a.out.join("seeds.toml"), text.as_bytes())?;
    say(
        quiet,
        &format!(
            "proposed {} seeds in {} slices (frame {}); check {} before use. Research use only; \
             not for diagnostic use.",
            ordered.len(),
            ns,
            a.frame,
            a.out.join("seed_sheet.png").display()
        ),
    );
    Ok(())
}
