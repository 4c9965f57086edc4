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

/// The slices that count in a range of frames, fixed by the user: outside
/// `first_slice..=last_slice` nothing is counted in those frames (for example a basal slice
/// the user judges to be atrium).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SliceRange {
    /// First and last frame (inclusive) the range applies to; every frame when absent.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub frames: Option<[usize; 2]>,
    /// First slice counted.
    pub first_slice: usize,
    /// Last slice counted.
    pub last_slice: usize,
}

impl SliceRange {
    /// Whether the range covers `frame`.
    pub fn covers(&self, frame: usize) -> bool {
        self.frames.is_none_or(|[a, b]| (a..=b).contains(&frame))
    }
}

/// Everything a seeds file holds.
#[derive(Debug, Clone, Default, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SeedFile {
    /// The seeds, the primary one first.
    pub seed: Vec<Seed>,
    /// Slice limits per frame range (`[[slices]]` tables), if any.
    #[serde(default, rename = "slices", skip_serializing_if = "Vec::is_empty")]
    pub slice_ranges: Vec<SliceRange>,
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
    /// A `[[slices]]` table that makes no sense.
    #[error("{path}: [[slices]] table #{index}: {message}")]
    Range {
        /// File.
        path: String,
        /// One-based position among the `[[slices]]` tables.
        index: usize,
        /// What is wrong.
        message: String,
    },
    /// No seed at all.
    #[error("{path}: no [[seed]] table; at least one mid-ventricular seed is needed")]
    Empty {
        /// File.
        path: String,
    },
}

/// Parses a seeds file from TOML text; `origin` names the source in errors.
///
/// # Errors
/// [`SeedFileError::Parse`], [`SeedFileError::Empty`], or [`SeedFileError::Range`] for a
/// `[[slices]]` table with its first after its last, or frames shared with an earlier table.
pub fn parse_seed_file(text: &str, origin: &str) -> Result<SeedFile, SeedFileError> {
    let file: SeedFile = toml::from_str(text).map_err(|e| SeedFileError::Parse {
        path: origin.to_string(),
        message: e.to_string(),
    })?;
    if file.seed.is_empty() {
        return Err(SeedFileError::Empty {
            path: origin.to_string(),
        });
    }
    let bad = |index: usize, message: String| SeedFileError::Range {
        path: origin.to_string(),
        index: index + 1,
        message,
    };
    for (i, r) in file.slice_ranges.iter().enumerate() {
        if r.first_slice > r.last_slice {
            return Err(bad(
                i,
                format!(
                    "first_slice {} is after last_slice {}",
                    r.first_slice, r.last_slice
                ),
            ));
        }
        if let Some([a, b]) = r.frames.filter(|[a, b]| a > b) {
            return Err(bad(
                i,
                format!("frames [{a}, {b}]: the first is after the last"),
            ));
        }
        let span = |r: &SliceRange| r.frames.map_or((0, usize::MAX), |[a, b]| (a, b));
        let (a, b) = span(r);
        if let Some(j) = file.slice_ranges[..i].iter().position(|q| {
            let (c, d) = span(q);
            a <= d && c <= b
        }) {
            return Err(bad(
                i,
                format!("its frames overlap those of table #{}", j + 1),
            ));
        }
    }
    Ok(file)
}

/// Parses the seeds of a seeds file (see [`parse_seed_file`]).
///
/// # Errors
/// As [`parse_seed_file`].
pub fn parse_seeds(text: &str, origin: &str) -> Result<Vec<Seed>, SeedFileError> {
    parse_seed_file(text, origin).map(|f| f.seed)
}

/// Reads a seeds file.
///
/// # Errors
/// As [`parse_seed_file`], or [`SeedFileError::Read`].
pub fn read_seed_file(path: &Path) -> Result<SeedFile, SeedFileError> {
    let text = std::fs::read_to_string(path).map_err(|source| SeedFileError::Read {
        path: path.display().to_string(),
        source,
    })?;
    parse_seed_file(&text, &path.display().to_string())
}

/// Reads the seeds of a seeds file.
///
/// # Errors
/// As [`read_seed_file`].
pub fn read_seeds(path: &Path) -> Result<Vec<Seed>, SeedFileError> {
    read_seed_file(path).map(|f| f.seed)
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
            slice_ranges: Vec::new(),
        })
        .expect("seeds serialise"),
    );
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    const SEED: &str = "[[seed]]\nslice = 5\nframe = 0\nrow = 40\ncol = 41\n";

    #[test]
    fn slice_tables_are_read_and_bad_ones_named() {
        let ok = format!(
            "{SEED}[[slices]]\nframes = [0, 3]\nfirst_slice = 1\nlast_slice = 9\n\
             [[slices]]\nframes = [4, 19]\nfirst_slice = 1\nlast_slice = 8\n"
        );
        let f = parse_seed_file(&ok, "s.toml").expect("valid");
        assert_eq!(f.slice_ranges.len(), 2);
        assert!(f.slice_ranges[0].covers(3) && !f.slice_ranges[0].covers(4));
        for (text, want) in [
            (
                format!("{SEED}[[slices]]\nfirst_slice = 4\nlast_slice = 2\n"),
                "table #1: first_slice 4 is after last_slice 2",
            ),
            (
                format!("{SEED}[[slices]]\nframes = [5, 1]\nfirst_slice = 1\nlast_slice = 2\n"),
                "frames [5, 1]",
            ),
            (
                format!(
                    "{SEED}[[slices]]\nframes = [0, 5]\nfirst_slice = 1\nlast_slice = 9\n\
                     [[slices]]\nframes = [5, 9]\nfirst_slice = 1\nlast_slice = 9\n"
                ),
                "table #2: its frames overlap those of table #1",
            ),
            (
                format!("{SEED}[[slices]]\nfirst_slice = 1\nlast = 9\n"),
                "unknown field `last`",
            ),
        ] {
            let e = parse_seed_file(&text, "s.toml").unwrap_err().to_string();
            assert!(e.contains("s.toml") && e.contains(want), "{e}");
        }
    }
}
