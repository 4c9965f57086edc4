//! `reference`: the fully sampled reconstruction (inverse FFT, root-sum-of-squares).

use super::coils::{coil_images, rss};
use super::{ParamSpec, Params, ReconError, ReconInput, ReconOutput, Reconstructor};

/// Fully sampled reference: per-coil inverse FFT and root-sum-of-squares combination.
pub struct Reference;

impl Reconstructor for Reference {
    fn id(&self) -> &'static str {
        "reference"
    }

    fn description(&self) -> &'static str {
        "fully sampled: inverse FFT of each coil, root-sum-of-squares combination (Roemer 1990)"
    }

    fn params(&self) -> &'static [ParamSpec] {
        &[]
    }

    fn reconstruct(&self, input: &ReconInput, _: &Params) -> Result<ReconOutput, ReconError> {
        if !input.mask.is_full() {
            return Err(ReconError::Sampling {
                method: self.id(),
                why: format!(
                    "needs every line acquired; this mask has effective R = {:.2}",
                    input.mask.accel_effective()
                ),
            });
        }
        let img = coil_images(input.kspace, input.fft);
        Ok(ReconOutput {
            images: rss(img.view()),
            iterations: 0,
            residuals: vec![],
        })
    }
}
