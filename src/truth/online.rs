//! Online scoring: completed trips posted while the service runs (or
//! completed by the demo's simulated fleet), each answered as hodos would
//! answer it now for its departure (the region's current snapshot and
//! correction model, `leaving` = the trip's departure), and the error
//! against its actual duration recorded as Prometheus histograms by
//! region and tier (`hodos_trip_log_error`, `hodos_trip_abs_pct_error`,
//! `hodos_trips_recorded_total`, through the `metrics` facade); an ETA the
//! caller kept (`served_eta_s`) is recorded beside it as
//! `source="served"`.
//!
//! The HTTP layer's `POST /admin/trips` reads the body and calls
//! [`score_batch`]; it converts the [`Scored`] batch into its own answer.

use crate::measure::{summarize, ErrorSummary, Pair};
use crate::replay::replay_trip;
use crate::trips::{read_trips, ReadOptions, TripFormat, TripReadError, TripRecord, TripReport};
use hodos_serving::answer::Catalog;
use hodos_serving::metrics::{NO_REGION, TRIPS_RECORDED, TRIP_ABS_PCT_ERROR, TRIP_LOG_ERROR};

/// A scored batch of completed trips.
#[derive(Debug, Clone)]
pub struct Scored {
    /// What the reader accepted and refused (refused rows by line).
    pub report: TripReport,
    /// Trips answered and recorded.
    pub recorded: u64,
    /// Their error, as hodos answers them now (none when none was
    /// recorded).
    pub summary: Option<ErrorSummary>,
}

fn record_one(region: &str, tier: &'static str, source: &'static str, estimate: f64, actual: f64) {
    if !(estimate > 0.0 && actual > 0.0) {
        return;
    }
    let labels = [
        ("region", region.to_string()),
        ("tier", tier.to_string()),
        ("source", source.to_string()),
    ];
    metrics::histogram!(TRIP_LOG_ERROR, &labels).record((estimate / actual).ln());
    metrics::histogram!(TRIP_ABS_PCT_ERROR, &labels).record((estimate - actual).abs() / actual);
}

/// Answers each trip at its departure through `cat` and records its
/// error (and that of the ETA the caller kept, if any); returns each
/// answer beside its actual duration.
pub async fn record(cat: &Catalog, trips: &[TripRecord]) -> Vec<Pair> {
    let mut pairs = Vec::with_capacity(trips.len());
    for t in trips {
        let o = replay_trip(cat, t).await;
        let region = o.region.as_deref().unwrap_or(NO_REGION);
        metrics::counter!(TRIPS_RECORDED, "region" => region.to_string(), "outcome" => "recorded")
            .increment(1);
        record_one(region, o.tier.as_str(), "replayed", o.eta_s, o.actual_s);
        if let Some(s) = &t.served {
            let tier = s.tier.map_or("unknown", |t| t.as_str());
            record_one(region, tier, "served", s.eta_s, o.actual_s);
        }
        pairs.push(Pair {
            estimate_s: o.eta_s,
            actual_s: o.actual_s,
            interval_s: o.interval_s,
        });
    }
    pairs
}

/// Reads a batch of completed trips (`format`: our CSV or JSON lines) on
/// tokio's blocking pool, then scores and records every trip it accepts;
/// refused rows are counted (`outcome="refused"`). The error: the batch
/// could not be read at all.
pub async fn score_batch(
    cat: &Catalog,
    bytes: impl AsRef<[u8]> + Send + 'static,
    format: TripFormat,
) -> Result<Scored, ScoreError> {
    let (trips, report) = tokio::task::spawn_blocking(move || {
        read_trips(bytes.as_ref(), format, &ReadOptions::default())
    })
    .await
    .map_err(|_| ScoreError::ReadTask)??;
    let pairs = record(cat, &trips).await;
    if report.refused > 0 {
        metrics::counter!(TRIPS_RECORDED, "region" => NO_REGION, "outcome" => "refused")
            .increment(report.refused);
    }
    Ok(Scored {
        report,
        recorded: pairs.len() as u64,
        summary: summarize(&pairs),
    })
}

/// Why a batch of trips could not be scored.
#[derive(Debug, thiserror::Error)]
pub enum ScoreError {
    /// The batch is not readable as trips.
    #[error(transparent)]
    Read(#[from] TripReadError),
    /// The reading task did not finish (a panic).
    #[error("the trip reader stopped")]
    ReadTask,
}
