//! LV seeds: a TOML file of `[[seed]]` tables with zero-based `slice`, `frame`, `row`, `col`.

use std::fmt;
use std::path::Path;

use serde::{Deserialize, Serialize};

/// One user seed inside the LV blood pool (zero-based indices).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Seed {
    /// Slice index (ascending along the slice normal).
    pub slice: usize,
    /// Frame index.
    pub frame: usize,
    /// Row (phase-encode axis).
    pub row: usize,
    /// Column (readout axis).
    pub col: usize,
}

impl fmt::Display for Seed {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "slice {}, frame {}, row {}, col {}",
            self.slice, self.frame, self.row, self.col
        )
    }
}

#[derive(Debug, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
struct SeedFile {
    seed: Vec<Seed>,
}

/// Why a seeds file was refused.
#[derive(Debug, thiserror::Error)]
pub enum SeedFileError {
    /// Could not read the file.
    #[error("{path}: cannot read seeds file: {source}")]
    Read {
        /// File.
        path: String,
        /// Cause.
        source: std::io::Error,
    },
    /// Not valid TOML of the expected shape (the message names line and key).
    #[error("{path}: not a valid seeds file (expected [[seed]] tables with slice, frame, row, col): {message}")]
    Parse {
        /// File.
        path: String,
        /// Parser message.
        message: String,
    },
    /// No seed at all.
    #[error("{path}: no [[seed]] table; at least one mid-ventricular seed is needed")]
    Empty {
        /// File.
        path: String,
    },
}

/// Parses seeds from TOML text; `origin` names the source in errors.
///
/// # Errors
/// [`SeedFileError::Parse`] or [`SeedFileError::Empty`].
pub fn parse_seeds(text: &str, origin: &str) -> Result<Vec<Seed>, SeedFileError> {
    let file: SeedFile = toml::from_str(text).map_err(|e| SeedFileError::Parse {
        path: origin.to_string(),
        message: e.to_string(),
    })?;
    if file.seed.is_empty() {
        return Err(SeedFileError::Empty {
            path: origin.to_string(),
        });
    }
    Ok(file.seed)
}

/// Reads a seeds file.
///
/// # Errors
/// As [`parse_seeds`], or [`SeedFileError::Read`].
pub fn read_seeds(path: &Path) -> Result<Vec<Seed>, SeedFileError> {
    let text = std::fs::read_to_string(path).map_err(|source| SeedFileError::Read {
        path: path.display().to_string(),
        source,
    })?;
    parse_seeds(&text, &path.display().to_string())
}

/// Writes seeds as TOML text (the format [`parse_seeds`] reads).
pub fn seeds_to_toml(seeds: &[Seed]) -> String {
    let mut out = String::from(
        "# LV seeds: zero-based slice, frame, row, col inside the LV blood pool.\n\
         # One mid-ventricular seed is enough; further seeds override propagation there.\n",
    );
    out.push_str(
        &toml::to_string(&SeedFile {
            seed: seeds.to_vec(),
        })
        .expect("seeds serialise"),
    );
    out
}
