//! `POST /admin/trips`: completed trips posted in batches, our CSV with a
//! header or JSON lines (`Content-Type: application/x-ndjson`). Reading,
//! answering and recording them is truth's online scoring
//! (`hodos_truth::online::score_batch`); this file checks the media type
//! and size, and converts the scored batch to its answer ([`TripsRecorded`]).

use super::problem::ApiError;
use super::AppState;
use axum::body::Body;
use axum::extract::{Request, State};
use axum::http::header;
use axum::Json;
use hodos_truth::online::{score_batch, ScoreError};
use hodos_truth::trips::{TripFormat, TripRowError};
use serde::Serialize;

/// The answer to a batch of completed trips.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct TripsRecorded {
    /// Data rows read.
    pub rows: u64,
    pub recorded: u64,
    pub refused: u64,
    /// The first refused rows, by line.
    pub errors: Vec<TripRowErrorDto>,
    /// The recorded trips' error, as hodos answers them now (null when
    /// none was recorded).
    pub mape: Option<f64>,
    pub median_ape: Option<f64>,
    pub rmsle: Option<f64>,
    /// Share of the recorded trips inside their answer's interval (null
    /// without a correction model).
    pub coverage: Option<f64>,
}

/// One refused row of a posted batch.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct TripRowErrorDto {
    /// Line in the input (the CSV header is line 1).
    pub line: u64,
    /// Why, from a closed set (`malformed`, `missing_field`, `bad_time`, ...).
    pub kind: &'static str,
    pub message: String,
}

impl From<&TripRowError> for TripRowErrorDto {
    fn from(e: &TripRowError) -> Self {
        TripRowErrorDto {
            line: e.line,
            kind: e.kind.as_str(),
            message: e.message.clone(),
        }
    }
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
    let scored = score_batch(&state.catalog, bytes, format)
        .await
        .map_err(|e| match e {
            ScoreError::Read(e) => ApiError::Malformed(e.to_string()),
            ScoreError::ReadTask => ApiError::Internal,
        })?;
    let s = scored.summary;
    Ok(Json(TripsRecorded {
        rows: scored.report.rows,
        recorded: scored.recorded,
        refused: scored.report.refused,
        errors: scored.report.first_errors.iter().map(Into::into).collect(),
        mape: s.as_ref().map(|s| s.mape),
        median_ape: s.as_ref().map(|s| s.median_ape),
        rmsle: s.as_ref().map(|s| s.rmsle),
        coverage: s.and_then(|s| s.coverage),
    }))
}
