//! Quantiles and tail probabilities of the t, F and normal distributions (statrs), so that
//! every interval and test uses one well-kept implementation. Degrees of freedom that are not
//! positive (Satterthwaite's, for instance, on odd data), and NaN arguments, give NaN, never a
//! panic (statrs asserts on them); callers report such a value as not defined.

use statrs::distribution::{ContinuousCDF, FisherSnedecor, Normal, StudentsT};

/// Quantile `p` of Student's t with `df` degrees of freedom.
pub fn t_quantile(p: f64, df: f64) -> f64 {
    if !(0.0..=1.0).contains(&p) {
        return f64::NAN;
    }
    StudentsT::new(0.0, 1.0, df).map_or(f64::NAN, |d| d.inverse_cdf(p))
}

/// Two-sided p-value of a t statistic.
pub fn t_two_sided_p(t: f64, df: f64) -> f64 {
    if t.is_nan() {
        return f64::NAN;
    }
    StudentsT::new(0.0, 1.0, df).map_or(f64::NAN, |d| (2.0 * d.sf(t.abs())).min(1.0))
}

/// Upper-tail probability `P(T > t)`.
pub fn t_sf(t: f64, df: f64) -> f64 {
    if t.is_nan() {
        return f64::NAN;
    }
    StudentsT::new(0.0, 1.0, df).map_or(f64::NAN, |d| d.sf(t))
}

/// Quantile `p` of the F distribution with `(d1, d2)` degrees of freedom.
pub fn f_quantile(p: f64, d1: f64, d2: f64) -> f64 {
    if !(0.0..=1.0).contains(&p) {
        return f64::NAN;
    }
    FisherSnedecor::new(d1, d2).map_or(f64::NAN, |d| d.inverse_cdf(p))
}

/// Upper-tail probability `P(F > f)`.
pub fn f_sf(f: f64, d1: f64, d2: f64) -> f64 {
    // statrs panics outside the support: F ≤ 0 has all the mass above it, F = ∞ none.
    if f.is_nan() {
        return f64::NAN;
    }
    if f <= 0.0 {
        return 1.0;
    }
    if f == f64::INFINITY {
        return 0.0;
    }
    FisherSnedecor::new(d1, d2).map_or(f64::NAN, |d| d.sf(f))
}

/// Quantile `p` of the standard normal.
pub fn z_quantile(p: f64) -> f64 {
    Normal::standard().inverse_cdf(p)
}

/// Upper-tail probability of the standard normal.
pub fn z_sf(z: f64) -> f64 {
    Normal::standard().sf(z)
}
