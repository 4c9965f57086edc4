//! How many subjects a confirmatory agreement study needs, by Bland's approximate confidence
//! interval of the limits of agreement (Bland & Altman 1986 and 1999: a limit's standard error
//! is about `s·√(1/n + z²/(2(n − 1)))`): the smallest n for which the expected limit, widened by
//! its confidence half-width, stays inside the margin.

use super::dist::{t_quantile, z_quantile};

/// Smallest n (3 to 100 000) for which `|bias| + z·sd + t(n − 1)·SE(limit) ≤ margin`, given the
/// expected bias and SD of differences, the limits' coverage (0.95) and the confidence of their
/// interval (0.95). `None` when even infinitely many subjects cannot meet the margin
/// (`|bias| + z·sd ≥ margin`) or the inputs are not finite and positive.
pub fn subjects_for_limits(
    bias: f64,
    sd: f64,
    margin: f64,
    coverage: f64,
    confidence: f64,
) -> Option<usize> {
    if !(bias.is_finite() && sd.is_finite() && sd > 0.0 && margin.is_finite() && margin > 0.0) {
        return None;
    }
    let z = z_quantile(0.5 + coverage / 2.0);
    let limit = bias.abs() + z * sd;
    if limit >= margin {
        return None;
    }
    let fits = |n: usize| {
        let nf = n as f64;
        let t = t_quantile(0.5 + confidence / 2.0, nf - 1.0);
        limit + t * sd * (1.0 / nf + z * z / (2.0 * (nf - 1.0))).sqrt() <= margin
    };
    if !fits(100_000) {
        return None;
    }
    // The half-width falls with n: bisection for the first n that fits.
    let (mut lo, mut hi) = (3usize, 100_000usize);
    if fits(lo) {
        return Some(lo);
    }
    while hi - lo > 1 {
        let mid = (lo + hi) / 2;
        if fits(mid) {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    Some(hi)
}
