//! One live observation, as uploaded (JSON or CSV) and as checked before
//! it is applied: the row shape ([`Observation`], [`COLUMNS`]), the time
//! as given (text, or Unix milliseconds from the write-ahead log), and the
//! checks in their documented order. Shared by the streamed batch reader
//! (`batch`) and the live layer that applies what it read (`live`).

use super::config::ValidationConfig;
use super::csv_input::show;
use super::edge_index::{EdgeIndex, Named, SegmentKey, INCOMPLETE_KEY};
use super::report::{ErrorKind, Loc, ReportBuilder};
use chrono::{DateTime, SecondsFormat};
use serde::{Deserialize, Serialize};

/// The live CSV columns every batch has, in their canonical order; the key
/// columns (`segment`, `way`, `tail`, `head`) come before them.
pub const COLUMNS: [&str; 3] = ["kmh", "observed_at", "samples"];

/// One observed speed as uploaded.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Observation {
    /// Segment (edge) id in the artifact.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub segment: Option<u64>,
    /// Way id of the segment(s).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub way: Option<u64>,
    /// External id of the segment's tail node.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub tail: Option<u64>,
    /// External id of the segment's head node.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub head: Option<u64>,
    /// Observed speed in km/h.
    pub kmh: f64,
    /// RFC 3339 timestamp, e.g. `2026-03-29T08:15:00Z`.
    pub observed_at: String,
    /// Number of measurements averaged into `kmh` (≥ 1).
    pub samples: u32,
}

impl Observation {
    /// How this observation names its segments.
    pub fn key(&self) -> SegmentKey {
        SegmentKey {
            segment: self.segment,
            way: self.way,
            tail: self.tail,
            head: self.head,
        }
    }
}

/// A validated observation, before it is applied.
pub(super) struct Valid<'a> {
    pub(super) edges: Named<'a>,
    pub(super) speed: f32,
    pub(super) observed_ms: i64,
    pub(super) samples: u32,
}

pub(super) fn record<'a>(
    rb: &mut ReportBuilder,
    valid: &mut Vec<Valid<'a>>,
    loc: Loc,
    checked: Result<Valid<'a>, (ErrorKind, String)>,
) {
    match checked {
        Ok(v) => {
            rb.good();
            valid.push(v);
        }
        Err((kind, msg)) => rb.bad(loc, kind, || msg),
    }
}

/// An observation's time as given: the text of a JSON or CSV row, or Unix
/// milliseconds (a batch taken back from the write-ahead log).
#[derive(Debug, Clone, Copy)]
pub(super) enum At<'t> {
    Text(&'t str),
    Ms(i64),
}

/// The checks after parsing, in the documented order.
#[allow(clippy::too_many_arguments)]
pub(super) fn check_obs<'a>(
    index: &'a EdgeIndex,
    key: &SegmentKey,
    speed: Result<f64, (ErrorKind, String)>,
    at: At<'_>,
    samples: Option<u64>,
    now_ms: i64,
    cfg: &ValidationConfig,
) -> Result<Valid<'a>, (ErrorKind, String)> {
    if !key.is_complete() {
        return Err((ErrorKind::MalformedRow, INCOMPLETE_KEY.to_string()));
    }
    let speed = speed?;
    let observed_ms = match at {
        At::Ms(ms) => ms,
        At::Text(observed_at) => DateTime::parse_from_rfc3339(observed_at)
            .map_err(|e| {
                (
                    ErrorKind::BadTimestamp,
                    format!(
                        "observed_at `{}`: not an RFC 3339 timestamp ({e})",
                        show(observed_at.as_bytes())
                    ),
                )
            })?
            .timestamp_millis(),
    };
    let skew_ms = i64::try_from(cfg.max_future_skew_s.saturating_mul(1000)).unwrap_or(i64::MAX);
    if observed_ms > now_ms.saturating_add(skew_ms) {
        return Err((
            ErrorKind::FutureTimestamp,
            format!(
                "observed_at {} is {:.0} s in the future (allowed skew {} s)",
                match at {
                    At::Text(t) => t.to_string(),
                    At::Ms(ms) => DateTime::from_timestamp_millis(ms)
                        .map(|t| t.to_rfc3339_opts(SecondsFormat::Millis, true))
                        .unwrap_or_else(|| ms.to_string()),
                },
                (observed_ms - now_ms) as f64 / 1000.0,
                cfg.max_future_skew_s
            ),
        ));
    }
    let samples = match samples {
        Some(n @ 1..) if n <= u64::from(u32::MAX) => n as u32,
        Some(n) => {
            return Err((
                ErrorKind::BadSamples,
                format!("samples {n}: expected an integer ≥ 1"),
            ))
        }
        None => {
            return Err((
                ErrorKind::BadSamples,
                "samples: expected an integer ≥ 1".into(),
            ))
        }
    };
    let edges = index
        .resolve(key)
        .map_err(|refusal| (refusal.kind(), refusal.message()))?;
    Ok(Valid {
        edges,
        speed: speed as f32,
        observed_ms,
        samples,
    })
}
