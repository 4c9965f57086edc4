//! The caution every output carries: one wording, used by help, reports and JSON.

/// Short form, for JSON, CSV headers and the command-line help.
pub const CAUTION: &str = "Research use for protocol evaluation only; not for diagnostic use. \
Defer to local clinical practice, local regulations and the responsible physician.";
