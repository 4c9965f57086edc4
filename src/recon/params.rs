//! Method parameters: each method declares its numeric parameters with defaults and
//! ranges; `--set key=value` pairs are checked against that list once, before any work.

use std::collections::BTreeMap;

use serde::Serialize;

use super::{ReconError, Reconstructor};

/// One parameter a method accepts.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ParamSpec {
    /// Name users type in `--set name=value`.
    pub name: &'static str,
    /// Default value.
    pub default: f64,
    /// Smallest allowed value.
    pub min: f64,
    /// Largest allowed value.
    pub max: f64,
    /// What it does.
    pub help: &'static str,
}

/// `iterations`, common to every iterative method.
pub const fn iterations(default: f64) -> ParamSpec {
    ParamSpec {
        name: "iterations",
        default,
        min: 1.0,
        max: 10_000.0,
        help: "maximum number of iterations",
    }
}

/// `tolerance`, common to every iterative method.
pub const fn tolerance(default: f64) -> ParamSpec {
    ParamSpec {
        name: "tolerance",
        default,
        min: 0.0,
        max: 1.0,
        help: "stop when the relative residual or change falls below this; 0 runs all iterations",
    }
}

/// Resolved parameter values of one method (defaults filled in).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Params {
    values: BTreeMap<&'static str, f64>,
}

impl Params {
    /// Checks `key=value` pairs against the method's parameters and fills in defaults.
    ///
    /// # Errors
    /// [`ReconError::Parameter`] naming the key: unknown, not a number, or out of range.
    pub fn resolve(
        method: &dyn Reconstructor,
        given: &[(String, String)],
    ) -> Result<Self, ReconError> {
        let specs = method.params();
        let mut values: BTreeMap<&'static str, f64> =
            specs.iter().map(|p| (p.name, p.default)).collect();
        for (key, raw) in given {
            let spec =
                specs
                    .iter()
                    .find(|p| p.name == key)
                    .ok_or_else(|| ReconError::Parameter {
                        method: method.id(),
                        key: key.clone(),
                        why: if specs.is_empty() {
                            "this method takes no parameters".into()
                        } else {
                            format!(
                                "unknown; known: {}",
                                specs.iter().map(|p| p.name).collect::<Vec<_>>().join(", ")
                            )
                        },
                    })?;
            let v: f64 = raw.trim().parse().map_err(|_| ReconError::Parameter {
                method: method.id(),
                key: key.clone(),
                why: format!("expected a number, found `{raw}`"),
            })?;
            if !v.is_finite() || v < spec.min || v > spec.max {
                return Err(ReconError::Parameter {
                    method: method.id(),
                    key: key.clone(),
                    why: format!("expected {} to {}, found {v}", spec.min, spec.max),
                });
            }
            values.insert(spec.name, v);
        }
        Ok(Params { values })
    }

    /// Defaults of a method.
    pub fn defaults(method: &dyn Reconstructor) -> Self {
        Self::resolve(method, &[]).expect("defaults are valid")
    }

    /// Value of a declared parameter.
    ///
    /// # Panics
    /// If the method did not declare `name` (a bug in the method).
    pub fn get(&self, name: &str) -> f64 {
        *self
            .values
            .get(name)
            .unwrap_or_else(|| panic!("parameter `{name}` is not declared by this method"))
    }

    /// A declared whole-number parameter.
    pub fn count(&self, name: &str) -> usize {
        self.get(name).round() as usize
    }

    /// `(name, value)` pairs in name order.
    pub fn iter(&self) -> impl Iterator<Item = (&'static str, f64)> + '_ {
        self.values.iter().map(|(k, v)| (*k, *v))
    }
}

/// Splits `key=value` text.
///
/// # Errors
/// [`ReconError::Parameter`] when there is no `=`.
pub fn split_assignment(text: &str) -> Result<(String, String), ReconError> {
    let (k, v) = text.split_once('=').ok_or_else(|| ReconError::Parameter {
        method: "any",
        key: text.to_string(),
        why: "expected key=value".into(),
    })?;
    Ok((k.trim().to_string(), v.trim().to_string()))
}
