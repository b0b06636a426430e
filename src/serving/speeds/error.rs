//! Typed errors of the speed-data layer.
//!
//! [`SpeedsError`] is about an uploaded table (its header, its bad-row share,
//! a speed vector of the wrong length), with [`BatchFormError`] for a live
//! batch that is not one at all; [`PersistError`] about a saved file (I/O,
//! corruption, a saved table that no longer validates).

use super::persist::EnvelopeError;
use super::report::TableReport;
use std::path::PathBuf;

/// Why an uploaded table (or a blend) was refused.
#[derive(Debug, thiserror::Error)]
pub enum SpeedsError {
    /// The CSV header does not name exactly the expected columns.
    #[error("CSV header: {0}")]
    Header(String),
    /// The table was validated and rejected whole; the report says why
    /// (`reject_reason`) and lists the first bad rows.
    #[error("table rejected: {}", .0.reject_reason.as_deref().unwrap_or("bad rows"))]
    Rejected(Box<TableReport>),
    /// The CSV reader itself failed (not a single bad row).
    #[error("CSV: {0}")]
    Csv(String),
    /// A JSON batch that is not an array of objects (or a compact form
    /// that does not decode: a write-ahead log record is applied as the
    /// JSON batch it was).
    #[error("JSON batch: {0}")]
    Json(BatchFormError),
    /// Per-edge vectors of different lengths: they belong to different graphs.
    #[error("{what} has {got} entries, expected {expected} (one per edge)")]
    LengthMismatch {
        what: &'static str,
        got: usize,
        expected: usize,
    },
}

impl SpeedsError {
    /// The validation report, when the error carries one.
    pub fn report(&self) -> Option<&TableReport> {
        match self {
            SpeedsError::Rejected(r) => Some(r),
            _ => None,
        }
    }
}

/// Why a live batch's bytes are not a batch (rows are reported, not
/// failed). A cause is written into the message and is not a `source()`.
#[derive(Debug, thiserror::Error)]
pub enum BatchFormError {
    /// A JSON text that is not an array of values.
    #[error("expected an array of observations: {0}")]
    NotAnArray(serde_json::Error),
    #[error("compact batch: header cut short")]
    CompactHeaderCut,
    #[error("compact batch: record cut short")]
    CompactRecordCut,
    #[error("compact batch: {observations} observations for {rows} rows with {bad} bad")]
    CompactCount {
        observations: u64,
        rows: u64,
        bad: u64,
    },
}

/// Why a saved table could not be written or read back.
///
/// A `cause` is written into the message and is not a `source()`: a
/// chain printer (anyhow's `{:#}`) would otherwise print it twice.
#[derive(Debug, thiserror::Error)]
pub enum PersistError {
    #[error("{}: {cause}", path.display())]
    Io {
        path: PathBuf,
        cause: std::io::Error,
    },
    /// The file exists but is not an intact saved table (truncated, damaged,
    /// another kind of file).
    #[error("{}: corrupt saved file: {reason}", path.display())]
    Corrupt {
        path: PathBuf,
        reason: EnvelopeError,
    },
    /// The file is intact but its table no longer validates against the
    /// current graph (for example after a map rebuild).
    #[error("{}: saved table no longer valid: {cause}", path.display())]
    Invalid { path: PathBuf, cause: SpeedsError },
}
