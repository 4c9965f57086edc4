//! `zero-filled`: density-compensated zero-filled inverse FFT, sensitivity-weighted.

use ndarray::Axis;

use super::coils::{coil_images, estimate_from_calibration, sensitivity_weighted};
use super::{ParamSpec, Params, ReconError, ReconInput, ReconOutput, Reconstructor};

/// Zero-filled reconstruction: each acquired line is divided by its local sampling density
/// (so image intensity is preserved), then inverse FFT and sensitivity-weighted coil
/// combination with sensitivities from the calibration block. Aliasing is left in place:
/// this is the baseline every other method must beat.
pub struct ZeroFilled;

impl Reconstructor for ZeroFilled {
    fn id(&self) -> &'static str {
        "zero-filled"
    }

    fn description(&self) -> &'static str {
        "density-compensated zero-filled inverse FFT, sensitivity-weighted coil combination"
    }

    fn params(&self) -> &'static [ParamSpec] {
        &[]
    }

    fn reconstruct(&self, input: &ReconInput, _: &Params) -> Result<ReconOutput, ReconError> {
        let block = input
            .mask
            .calibration_block()
            .ok_or_else(|| ReconError::Sampling {
                method: self.id(),
                why: "no fully sampled calibration block around the k-space centre".into(),
            })?;
        let sens = estimate_from_calibration(input.kspace, block, input.fft);
        let density = input.mask.density();
        let mut k = input.kspace.to_owned();
        for mut ky_lane in k.lanes_mut(Axis(2)) {
            // Each lane runs along ky: divide every line by its density.
            ky_lane
                .iter_mut()
                .zip(density.iter())
                .for_each(|(z, d)| *z /= *d);
        }
        let img = coil_images(k.view(), input.fft);
        let combined = sensitivity_weighted(img.view(), sens.view());
        Ok(ReconOutput {
            images: combined.mapv(|z| z.norm()),
            iterations: 0,
            residuals: vec![],
        })
    }
}
