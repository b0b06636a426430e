//! What the readers accepted and refused: the kinds of refusal, the
//! line-numbered refused rows, the per-input [`TripReport`], and the
//! failures that stop a whole input ([`TripReadError`]).

use serde::Serialize;
use std::collections::BTreeMap;
use std::path::PathBuf;

/// Why a row was refused.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum TripErrorKind {
    /// Not a record: wrong field count, bad quoting or UTF-8, invalid JSON.
    Malformed,
    /// A required field is empty or absent.
    MissingField,
    /// A field that must be a number is not one (or is not finite).
    BadNumber,
    /// A coordinate outside −90..90 / −180..180.
    BadCoordinate,
    /// A coordinate at exactly 0, 0 (the unknown-position marker).
    UnknownCoordinate,
    /// A departure (or arrival) time that does not parse, has no zone, or
    /// does not exist in its zone.
    BadTime,
    /// A duration that is zero, negative, or over the longest accepted.
    BadDuration,
    /// A negative distance.
    BadDistance,
    /// A served ETA that is negative or names an unknown tier.
    BadServed,
}

impl TripErrorKind {
    pub fn as_str(self) -> &'static str {
        match self {
            TripErrorKind::Malformed => "malformed",
            TripErrorKind::MissingField => "missing_field",
            TripErrorKind::BadNumber => "bad_number",
            TripErrorKind::BadCoordinate => "bad_coordinate",
            TripErrorKind::UnknownCoordinate => "unknown_coordinate",
            TripErrorKind::BadTime => "bad_time",
            TripErrorKind::BadDuration => "bad_duration",
            TripErrorKind::BadDistance => "bad_distance",
            TripErrorKind::BadServed => "bad_served",
        }
    }
}

/// One refused row.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TripRowError {
    /// Line in the input (the CSV header is line 1).
    pub line: u64,
    pub kind: TripErrorKind,
    pub message: String,
}

impl std::fmt::Display for TripRowError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "line {}: {}", self.line, self.message)
    }
}

/// What a reader accepted and refused.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct TripReport {
    /// Data rows read (blank lines and the header excluded).
    pub rows: u64,
    pub accepted: u64,
    /// `rows = accepted + refused`.
    pub refused: u64,
    /// Refused rows per kind name; kinds that did not occur are absent.
    pub refused_by_kind: BTreeMap<String, u64>,
    /// The first refused rows in input order.
    pub first_errors: Vec<TripRowError>,
}

impl TripReport {
    pub(super) fn refuse(&mut self, max: usize, line: u64, e: RowError) {
        self.refused += 1;
        *self
            .refused_by_kind
            .entry(e.0.as_str().to_string())
            .or_default() += 1;
        if self.first_errors.len() < max {
            self.first_errors.push(TripRowError {
                line,
                kind: e.0,
                message: e.1,
            });
        }
    }

    /// Adds another file's report (lines stay as each file counted them).
    pub fn merge(&mut self, other: TripReport, max: usize) {
        self.rows += other.rows;
        self.accepted += other.accepted;
        self.refused += other.refused;
        for (k, v) in other.refused_by_kind {
            *self.refused_by_kind.entry(k).or_default() += v;
        }
        for e in other.first_errors {
            if self.first_errors.len() < max {
                self.first_errors.push(e);
            }
        }
    }
}

/// A reader failure that stops the whole input (rows are reported, not
/// failed).
#[derive(Debug, thiserror::Error)]
pub enum TripReadError {
    #[error("{path}: {source}")]
    Open {
        path: PathBuf,
        source: std::io::Error,
    },
    #[error("reading trips: {0}")]
    Io(std::io::Error),
    #[error("trip CSV header: {0}")]
    Header(String),
}

/// A row error before it has a line: kind and message.
pub(super) struct RowError(pub(super) TripErrorKind, pub(super) String);

pub(super) fn err(kind: TripErrorKind, msg: impl Into<String>) -> RowError {
    RowError(kind, msg.into())
}
