//! Every tolerance the checks use, in one place, each with its reason.

/// FFT against a naive DFT: relative L2 error. f32 arithmetic with O(log N) rounding
/// steps stays near 1e-6; 1e-5 leaves headroom without hiding a wrong twiddle or shift.
pub const FFT_REL_ERROR: f64 = 1e-5;

/// Fully sampled phantom, SNR ≥ 20: largest |EF − truth| in percentage points (issue 2).
pub const EF_PP_FULLY_SAMPLED: f64 = 1.5;

/// Fully sampled phantom: largest |EDV − truth| / truth (issue 2).
pub const EDV_REL_FULLY_SAMPLED: f64 = 0.03;

/// Fully sampled phantom: smallest Dice between grown and analytic masks (issue 2).
pub const DICE_MIN_FULLY_SAMPLED: f64 = 0.92;

/// Method of discs on an ellipsoid with 0.5 mm discs: relative error to 4/3·π·a·b·c.
/// The midpoint rule's error falls as h², giving about 1e-4 here; 1e-3 is the bound checked.
pub const DISC_SUM_REL_FINE: f64 = 1e-3;
