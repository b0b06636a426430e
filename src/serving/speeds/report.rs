//! The validation report shared by both tables, and the collector that fills
//! it while rows are read.
//!
//! The report is `serde::Serialize` so the HTTP layer can return it as JSON
//! as is. Error kinds are a closed enum with stable snake_case names.

use super::config::ValidationConfig;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// Why a row was refused. One kind per row: the first failing check.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ErrorKind {
    /// No segment of the graph has this id, or these end nodes (on this
    /// way, when the row gives one).
    UnknownEdge,
    /// The row gives `segment` and also `way`, `tail` or `head`, and one of
    /// them is not that segment's.
    SegmentMismatch,
    /// Speed ≤ 0.
    NonpositiveSpeed,
    /// Speed is NaN or ±infinity.
    NotANumber,
    /// Speed above [`ValidationConfig::max_speed_kmh`].
    OverMaxSpeed,
    /// Hour of week is not an integer in `0..=167`.
    BadHour,
    /// `observed_at` is not an RFC 3339 timestamp.
    BadTimestamp,
    /// `observed_at` lies further in the future than the allowed skew.
    FutureTimestamp,
    /// `samples` is not an integer ≥ 1.
    BadSamples,
    /// Wrong field count, unparsable id or speed, a row naming neither
    /// `segment` nor both `tail` and `head`, or (JSON) an element that is
    /// not an observation object.
    MalformedRow,
}

impl ErrorKind {
    /// Every kind, in declaration order.
    pub const ALL: [ErrorKind; 10] = [
        ErrorKind::UnknownEdge,
        ErrorKind::SegmentMismatch,
        ErrorKind::NonpositiveSpeed,
        ErrorKind::NotANumber,
        ErrorKind::OverMaxSpeed,
        ErrorKind::BadHour,
        ErrorKind::BadTimestamp,
        ErrorKind::FutureTimestamp,
        ErrorKind::BadSamples,
        ErrorKind::MalformedRow,
    ];

    /// The stable snake_case name (same as the serde name).
    pub fn name(self) -> &'static str {
        match self {
            ErrorKind::UnknownEdge => "unknown_edge",
            ErrorKind::SegmentMismatch => "segment_mismatch",
            ErrorKind::NonpositiveSpeed => "nonpositive_speed",
            ErrorKind::NotANumber => "not_a_number",
            ErrorKind::OverMaxSpeed => "over_max_speed",
            ErrorKind::BadHour => "bad_hour",
            ErrorKind::BadTimestamp => "bad_timestamp",
            ErrorKind::FutureTimestamp => "future_timestamp",
            ErrorKind::BadSamples => "bad_samples",
            ErrorKind::MalformedRow => "malformed_row",
        }
    }
}

/// One reported bad row.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RowError {
    /// CSV input: 1-based line of the file where the row starts (the header
    /// is line 1), so the uploader can open the file at that line.
    #[serde(skip_serializing_if = "Option::is_none", default)]
    pub line: Option<u64>,
    /// JSON batch: 0-based index of the element in the array.
    #[serde(skip_serializing_if = "Option::is_none", default)]
    pub index: Option<u64>,
    pub kind: ErrorKind,
    pub message: String,
}

/// What validating one uploaded table found.
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
pub struct TableReport {
    /// Data rows read (CSV lines after the header that hold a record, or
    /// elements of a JSON batch).
    pub rows: u64,
    /// Rows that passed validation.
    pub accepted: u64,
    /// Rows refused; `rows = accepted + bad`.
    pub bad: u64,
    /// Valid rows that did not take effect. Historical: (edge, hour) values
    /// replaced by a later row for the same edge and hour. Live: observations
    /// ignored because the edge already held a newer one.
    pub superseded: u64,
    /// Bad rows per [`ErrorKind`] name; kinds that did not occur are absent.
    pub bad_by_kind: BTreeMap<String, u64>,
    /// The first bad rows in input order, at most
    /// [`ValidationConfig::max_reported_errors`].
    pub first_errors: Vec<RowError>,
    /// True when nothing of the table was applied.
    pub rejected: bool,
    /// Why the table was rejected, in words.
    #[serde(skip_serializing_if = "Option::is_none", default)]
    pub reject_reason: Option<String>,
}

/// Where a row sits in its input.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Loc {
    Line(u64),
    Index(u64),
}

/// Fills a [`TableReport`] row by row. Messages are built only for the rows
/// that will be reported, so a file full of bad rows costs no formatting.
#[derive(Debug)]
pub(crate) struct ReportBuilder {
    rows: u64,
    accepted: u64,
    by_kind: [u64; ErrorKind::ALL.len()],
    first: Vec<RowError>,
    max_errors: usize,
}

impl ReportBuilder {
    pub(crate) fn new(cfg: &ValidationConfig) -> Self {
        ReportBuilder {
            rows: 0,
            accepted: 0,
            by_kind: [0; ErrorKind::ALL.len()],
            first: Vec::new(),
            max_errors: cfg.max_reported_errors,
        }
    }

    pub(crate) fn good(&mut self) {
        self.rows += 1;
        self.accepted += 1;
    }

    pub(crate) fn bad(&mut self, loc: Loc, kind: ErrorKind, message: impl FnOnce() -> String) {
        self.rows += 1;
        self.by_kind[kind as usize] += 1;
        if self.first.len() < self.max_errors {
            let (line, index) = match loc {
                Loc::Line(l) => (Some(l), None),
                Loc::Index(i) => (None, Some(i)),
            };
            self.first.push(RowError {
                line,
                index,
                kind,
                message: message(),
            });
        }
    }

    /// The report; rejected when the bad share exceeds the threshold, or
    /// when `reject_empty` and there are no data rows.
    pub(crate) fn finish(self, cfg: &ValidationConfig, reject_empty: bool) -> TableReport {
        let bad: u64 = self.by_kind.iter().sum();
        let bad_by_kind = ErrorKind::ALL
            .iter()
            .zip(self.by_kind)
            .filter(|&(_, n)| n > 0)
            .map(|(k, n)| (k.name().to_string(), n))
            .collect();
        let reject_reason = if self.rows == 0 {
            reject_empty.then(|| "no data rows".to_string())
        } else {
            reject_reason(bad, self.rows, cfg)
        };
        TableReport {
            rows: self.rows,
            accepted: self.accepted,
            bad,
            superseded: 0,
            bad_by_kind,
            first_errors: self.first,
            rejected: reject_reason.is_some(),
            reject_reason,
        }
    }
}

/// Why `bad` of `rows` (> 0) rows reject a table, if they do: their share
/// exceeds [`ValidationConfig::max_bad_share`].
pub(crate) fn reject_reason(bad: u64, rows: u64, cfg: &ValidationConfig) -> Option<String> {
    if bad as f64 > cfg.max_bad_share * rows as f64 || cfg.max_bad_share.is_nan() {
        Some(format!(
            "{bad} of {rows} rows bad ({:.2}%), more than the allowed {:.2}%",
            100.0 * bad as f64 / rows.max(1) as f64,
            100.0 * cfg.max_bad_share
        ))
    } else {
        None
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_match_serde() {
        for k in ErrorKind::ALL {
            let s = serde_json::to_string(&k).unwrap();
            assert_eq!(s, format!("\"{}\"", k.name()));
        }
    }

    #[test]
    fn share_at_threshold_is_accepted_above_is_rejected() {
        let cfg = ValidationConfig::default(); // 0.05
        let run = |good: u64, bad: u64| {
            let mut b = ReportBuilder::new(&cfg);
            for _ in 0..good {
                b.good();
            }
            for i in 0..bad {
                b.bad(Loc::Line(i + 2), ErrorKind::BadHour, || "x".into());
            }
            b.finish(&cfg, true)
        };
        // 1/20 = 5 %: not above 5 %.
        assert!(!run(19, 1).rejected);
        // 2/20 = 10 %.
        let r = run(18, 2);
        assert!(r.rejected);
        assert_eq!(r.bad_by_kind.get("bad_hour"), Some(&2));
        assert!(run(0, 0).rejected);
    }

    #[test]
    fn only_first_errors_get_messages() {
        let cfg = ValidationConfig {
            max_reported_errors: 3,
            max_bad_share: 1.0,
            ..Default::default()
        };
        let mut b = ReportBuilder::new(&cfg);
        let mut built = 0;
        for i in 0..100 {
            b.bad(Loc::Index(i), ErrorKind::MalformedRow, || {
                built += 1;
                String::new()
            });
        }
        let r = b.finish(&cfg, true);
        assert_eq!(built, 3);
        assert_eq!(r.first_errors.len(), 3);
        assert_eq!(r.first_errors[2].index, Some(2));
        assert_eq!(r.bad, 100);
        assert!(!r.rejected);
    }
}
