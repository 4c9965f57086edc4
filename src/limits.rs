//! Resource limits on what a file may claim: checked against headers before anything is
//! allocated, so a corrupt or hostile header (a 10⁹ × 10⁹ matrix, 2³¹ frames) is refused with
//! a message instead of exhausting memory.
//!
//! The limits are process-wide, set once from the command line (`--max-extent`,
//! `--max-values`, or the environment variables `CINEGAUGE_MAX_EXTENT` and
//! `CINEGAUGE_MAX_VALUES`, which cluster jobs inherit) before any file is read.

use std::sync::OnceLock;

/// Default largest length of any one axis (rows, columns, frames, slices, coils, samples).
pub const DEFAULT_MAX_EXTENT: usize = 16_384;
/// Default largest number of values in one array read from a file (2³⁰: 4 GiB as `f32`,
/// 8 GiB as complex k-space).
pub const DEFAULT_MAX_VALUES: u64 = 1 << 30;

/// What a file may claim.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Limits {
    /// Largest length of any one axis.
    pub max_extent: usize,
    /// Largest number of values in one array.
    pub max_values: u64,
}

impl Default for Limits {
    fn default() -> Self {
        Limits {
            max_extent: DEFAULT_MAX_EXTENT,
            max_values: DEFAULT_MAX_VALUES,
        }
    }
}

static LIMITS: OnceLock<Limits> = OnceLock::new();

/// Sets the process-wide limits; the first call wins (later calls return `false`).
pub fn set(limits: Limits) -> bool {
    LIMITS.set(limits).is_ok()
}

/// The process-wide limits (the defaults unless [`set`] was called).
pub fn get() -> Limits {
    LIMITS.get().copied().unwrap_or_default()
}

/// Checks a shape a file claims, naming each axis: every axis at most the extent limit and
/// their product at most the value limit. `what` names the array ("voxel data", "k-space").
///
/// # Errors
/// A message naming the axis or the product at fault and the option that raises the limit.
pub fn check_shape(what: &str, axes: &[(&str, u64)]) -> Result<(), String> {
    let l = get();
    for (name, n) in axes {
        if *n > l.max_extent as u64 {
            return Err(format!(
                "{what}: {name} = {n} is more than the limit of {} per axis (raise it with --max-extent or CINEGAUGE_MAX_EXTENT if the file is right)",
                l.max_extent
            ));
        }
    }
    let total = axes
        .iter()
        .try_fold(1u64, |acc, (_, n)| acc.checked_mul(*n))
        .unwrap_or(u64::MAX);
    if total > l.max_values {
        let shape: Vec<String> = axes.iter().map(|(a, n)| format!("{a} {n}")).collect();
        return Err(format!(
            "{what}: {} holds {total} values, more than the limit of {} (raise it with --max-values or CINEGAUGE_MAX_VALUES if the file is right)",
            shape.join(" × "),
            l.max_values
        ));
    }
    Ok(())
}

/// Checks that `needed` bytes of data fit in what the file holds after its header.
///
/// # Errors
/// A message saying how many bytes the header promises and how many there are.
pub fn check_bytes(what: &str, needed: u64, available: u64) -> Result<(), String> {
    if needed > available {
        return Err(format!(
            "{what}: the header promises {needed} bytes of data but the file holds only {available} after the header (truncated, or a wrong shape or offset)"
        ));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shapes_within_limits_pass_and_others_name_the_axis() {
        assert!(check_shape("x", &[("rows", 192), ("cols", 160), ("frames", 25)]).is_ok());
        let e = check_shape("voxel data", &[("rows", 1_000_000_000), ("cols", 2)]).unwrap_err();
        assert!(
            e.contains("rows = 1000000000") && e.contains("--max-extent"),
            "{e}"
        );
        // 16384 × 16384 × 16 = 2³² values: each axis allowed, the product not.
        let e = check_shape("k", &[("a", 16_384), ("b", 16_384), ("c", 16)]).unwrap_err();
        assert!(
            e.contains("4294967296 values") && e.contains("--max-values"),
            "{e}"
        );
        // The product of many large axes overflows u64 and is still refused, not wrapped.
        let axes = [("a", 16_000); 6];
        assert!(check_shape("k", &axes).is_err());
    }
}
