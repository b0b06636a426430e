//! `POST /admin/trips`: completed trips posted in batches. Each trip is
//! answered as hodos would answer it now for its departure (the region's
//! current snapshot and correction model, `leaving` = the trip's
//! departure), and the error against its actual duration is recorded as
//! Prometheus histograms by region and tier; an ETA the caller kept
//! (`served_eta_s`) is recorded beside it as `source="served"`. The answer
//! summarizes the batch and lists refused rows by line.
//!
//! Trips are read by [`hodos_truth::trips`] (our CSV with a header, or
//! JSON lines with `Content-Type: application/x-ndjson`) and answered by
//! [`hodos_truth::replay::replay_trip`]; this file only records.

use super::problem::ApiError;
use super::AppState;
use axum::body::Body;
use axum::extract::{Request, State};
use axum::http::header;
use axum::Json;
use hodos_serving::answer::Catalog;
use hodos_serving::metrics::{NO_REGION, TRIPS_RECORDED, TRIP_ABS_PCT_ERROR, TRIP_LOG_ERROR};
use hodos_truth::measure::{summarize, Pair};
use hodos_truth::replay::replay_trip;
use hodos_truth::trips::{
    read_trips, ReadOptions, TripFormat, TripRecord, TripReport, TripRowError,
};
use serde::Serialize;

/// The answer to a batch of completed trips.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct TripsRecorded {
    /// Data rows read.
    pub rows: u64,
    pub recorded: u64,
    pub refused: u64,
    /// The first refused rows, by line.
    pub errors: Vec<TripRowError>,
    /// The recorded trips' error, as hodos answers them now (null when
    /// none was recorded).
    pub mape: Option<f64>,
    pub median_ape: Option<f64>,
    pub rmsle: Option<f64>,
    /// Share of the recorded trips inside their answer's interval (null
    /// without a correction model).
    pub coverage: Option<f64>,
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

pub(super) async fn post_trips(
    State(state): State<AppState>,
    req: Request,
) -> Result<Json<TripsRecorded>, ApiError> {
    let ct = req
        .headers()
        .get(header::CONTENT_TYPE)
        .and_then(|v| v.to_str().ok())
        .unwrap_or("")
        .to_ascii_lowercase();
    let format = if ct.starts_with("text/csv") {
        TripFormat::Csv
    } else if ct.starts_with("application/x-ndjson") || ct.starts_with("application/jsonl") {
        TripFormat::JsonLines
    } else {
        return Err(ApiError::UnsupportedMediaType(
            "completed trips are text/csv (our header) or application/x-ndjson (JSON lines)".into(),
        ));
    };
    let limit = state.settings.admin.max_upload_bytes;
    let bytes = axum::body::to_bytes(Body::new(req.into_body()), limit)
        .await
        .map_err(|_| ApiError::TooLarge {
            limit,
            setting: "admin.max_upload_bytes",
        })?;
    let (trips, report): (_, TripReport) = tokio::task::spawn_blocking(move || {
        read_trips(&bytes[..], format, &ReadOptions::default())
    })
    .await
    .map_err(|_| ApiError::Internal)?
    .map_err(|e| ApiError::Malformed(e.to_string()))?;
    let pairs = record(&state.catalog, &trips).await;
    if report.refused > 0 {
        metrics::counter!(TRIPS_RECORDED, "region" => NO_REGION, "outcome" => "refused")
            .increment(report.refused);
    }
    let s = summarize(&pairs);
    Ok(Json(TripsRecorded {
        rows: report.rows,
        recorded: pairs.len() as u64,
        refused: report.refused,
        errors: report.first_errors,
        mape: s.as_ref().map(|s| s.mape),
        median_ape: s.as_ref().map(|s| s.median_ape),
        rmsle: s.as_ref().map(|s| s.rmsle),
        coverage: s.and_then(|s| s.coverage),
    }))
}
