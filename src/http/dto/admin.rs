//! Response shapes of the admin API (`/admin/status` and the update
//! routes), and their conversions from the serving layer's status and
//! validation reports.
//!
//! The serving types ([`RegionStatus`], [`ReloadOutcome`], [`TableReport`])
//! stay free to change; these are the wire contract. Fields are declared in
//! alphabetical order: the answers were first built as `serde_json::Value`s,
//! whose keys serialize sorted, and keeping that order keeps the bytes.

use chrono::{DateTime, Utc};
use hodos_serving::snapshot::{ProfilesStatus, RegionStatus, ReloadOutcome};
use hodos_serving::speeds::{RowError, TableReport};
use serde::Serialize;
use std::collections::BTreeMap;

/// One refused row of an uploaded table.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct RowErrorDto {
    /// JSON batch: 0-based index of the element in the array.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub index: Option<u64>,
    /// Stable snake_case name of the first failing check.
    pub kind: &'static str,
    /// CSV input: 1-based line of the file (the header is line 1).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub line: Option<u64>,
    pub message: String,
}

impl From<&RowError> for RowErrorDto {
    fn from(e: &RowError) -> Self {
        RowErrorDto {
            index: e.index,
            kind: e.kind.name(),
            line: e.line,
            message: e.message.clone(),
        }
    }
}

/// What validating one uploaded table found.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct TableReportDto {
    pub accepted: u64,
    pub bad: u64,
    /// Bad rows per error kind; kinds that did not occur are absent.
    pub bad_by_kind: BTreeMap<String, u64>,
    pub first_errors: Vec<RowErrorDto>,
    /// Why the table was rejected, in words (absent when it was not).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub reject_reason: Option<String>,
    /// True when nothing of the table was applied.
    pub rejected: bool,
    pub rows: u64,
    /// Valid rows that did not take effect (replaced or older).
    pub superseded: u64,
}

impl From<&TableReport> for TableReportDto {
    fn from(r: &TableReport) -> Self {
        TableReportDto {
            accepted: r.accepted,
            bad: r.bad,
            bad_by_kind: r.bad_by_kind.clone(),
            first_errors: r.first_errors.iter().map(RowErrorDto::from).collect(),
            reject_reason: r.reject_reason.clone(),
            rejected: r.rejected,
            rows: r.rows,
            superseded: r.superseded,
        }
    }
}

/// One update's outcome.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct ReloadOutcomeDto {
    pub at: DateTime<Utc>,
    /// Error text for rejected/failed updates.
    pub error: Option<String>,
    /// `accepted`, `rejected` or `failed`.
    pub outcome: &'static str,
    pub report: Option<TableReportDto>,
    /// `historical`, `live` or `artifact`.
    pub table: &'static str,
}

impl From<&ReloadOutcome> for ReloadOutcomeDto {
    fn from(o: &ReloadOutcome) -> Self {
        ReloadOutcomeDto {
            at: o.at,
            error: o.error.clone(),
            outcome: o.outcome,
            report: o.report.as_ref().map(TableReportDto::from),
            table: o.table,
        }
    }
}

/// One region in `/admin/status`.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct RegionStatusDto {
    /// Why the region serves no graph, when it does not.
    pub degraded_reason: Option<String>,
    pub generation: u64,
    /// Seconds since the serving table was written (the configured file's
    /// modification or the upload); a reload that changes nothing keeps it.
    pub historical_age_s: Option<f64>,
    /// The configured file, or where the upload is saved.
    pub historical_path: Option<String>,
    /// Why a candidate table was passed over at the last load (a damaged
    /// saved table, an unreadable configured file); empty when none was.
    pub historical_problems: Vec<String>,
    pub historical_rows: Option<u64>,
    /// `configured` or `upload`: which table serves (the newer of the two).
    pub historical_source: Option<&'static str>,
    pub historical_version: Option<String>,
    pub last_live_batch: Option<ReloadOutcomeDto>,
    pub last_reload: Option<ReloadOutcomeDto>,
    pub live_edges: u64,
    pub live_newest_age_s: Option<f64>,
    /// Why the saved live layer or its write-ahead log was refused at the
    /// last load; empty when nothing was.
    pub live_problems: Vec<String>,
    /// Why the last model offered to the region was refused (the model
    /// before it, if any, keeps serving).
    pub model_refused: Option<String>,
    /// The correction model serving, if any.
    pub model_version: Option<u64>,
    pub profiles: Option<ProfilesDto>,
    pub ready: bool,
    pub region: String,
}

/// The serving hour-of-week profiles of a region.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct ProfilesDto {
    /// Seconds the grouping and all customizations took at load.
    pub build_s: f64,
    /// Number of profiles (customized metrics held).
    pub count: usize,
    /// Largest relative edge travel-time difference between an hour and
    /// its profile's representative (sampled edges).
    pub deviation_max: f64,
    /// Median over hours of each hour's median difference.
    pub deviation_median: f64,
    /// Every hour answered with exactly its own speeds.
    pub exact: bool,
    /// Per hour of week: the largest relative edge travel-time difference
    /// from its profile's representative (sampled edges).
    pub hour_deviation_max: Vec<f64>,
    /// Per hour of week: the median such difference.
    pub hour_deviation_median: Vec<f64>,
    /// Per hour of week: the heuristic tier's travel-time factor.
    pub hour_factor: Vec<f64>,
    /// Per hour of week: its profile index.
    pub hour_profile: Vec<u8>,
    /// Heap bytes of all profile metrics.
    pub metric_bytes: u64,
    /// Per profile: its representative hour of week.
    pub representatives: Vec<u8>,
}

impl From<&ProfilesStatus> for ProfilesDto {
    fn from(p: &ProfilesStatus) -> Self {
        ProfilesDto {
            build_s: p.build_s,
            count: p.count,
            deviation_max: p.deviation_max,
            deviation_median: p.deviation_median,
            exact: p.exact,
            hour_deviation_max: p.hour_deviation_max.clone(),
            hour_deviation_median: p.hour_deviation_median.clone(),
            hour_factor: p.hour_factor.clone(),
            hour_profile: p.hour_profile.clone(),
            metric_bytes: p.metric_bytes,
            representatives: p.representatives.clone(),
        }
    }
}

impl RegionStatusDto {
    /// The status of the region named `region`.
    pub fn new(region: &str, s: &RegionStatus) -> Self {
        RegionStatusDto {
            degraded_reason: s.degraded_reason.clone(),
            generation: s.generation,
            historical_age_s: s.historical_age_s,
            historical_path: s.historical_path.clone(),
            historical_problems: s.historical_problems.clone(),
            historical_rows: s.historical_rows,
            historical_source: s.historical_source,
            historical_version: s.historical_version.clone(),
            last_live_batch: s.last_live_batch.as_ref().map(ReloadOutcomeDto::from),
            last_reload: s.last_reload.as_ref().map(ReloadOutcomeDto::from),
            live_edges: s.live_edges,
            live_newest_age_s: s.live_newest_age_s,
            live_problems: s.live_problems.clone(),
            model_refused: None,
            model_version: None,
            profiles: s.profiles.as_ref().map(ProfilesDto::from),
            ready: s.ready,
            region: region.to_string(),
        }
    }
}

/// `GET /admin/status`.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct StatusResponse {
    pub regions: Vec<RegionStatusDto>,
}

/// `PUT /admin/regions/{region}/historical`, accepted.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct HistoricalAccepted {
    /// Snapshot generation serving after the upload.
    pub generation: u64,
    /// Always `accepted` (a refused table is a problem response).
    pub outcome: &'static str,
    pub report: TableReportDto,
    /// Version of the historical table now serving.
    pub version: Option<String>,
}

/// `PUT /admin/regions/{region}/model`, serving.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct ModelAccepted {
    /// Always `accepted` (a refused model is a problem response).
    pub outcome: &'static str,
    pub model_version: u64,
    pub trained_at: String,
    pub trees: usize,
    pub features: Vec<String>,
    /// Nominal quantile levels of the interval.
    pub interval_levels: [f64; 2],
    pub train_window: [String; 2],
    pub test_window: Option<[String; 2]>,
    /// What `hodos train` measured (MAPE, RMSLE, coverage per set).
    pub figures: Vec<hodos_serving::correction::model::Figure>,
}

impl From<&hodos_serving::correction::CorrectionModel> for ModelAccepted {
    fn from(m: &hodos_serving::correction::CorrectionModel) -> Self {
        ModelAccepted {
            outcome: "accepted",
            model_version: m.meta.model_version,
            trained_at: m.meta.trained_at.clone(),
            trees: m.forest.roots.len(),
            features: m.meta.features.clone(),
            interval_levels: m.interval.levels,
            train_window: m.meta.train_window.clone(),
            test_window: m.meta.test_window.clone(),
            figures: m.meta.figures.clone(),
        }
    }
}

/// `POST /admin/regions/{region}/live`, accepted.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct LiveAccepted {
    /// Always `accepted` (a refused batch is a problem response).
    pub outcome: &'static str,
    pub report: TableReportDto,
}

/// `POST /admin/regions/{region}/reload`.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct ReloadResponse {
    /// Why the reload failed (`null` when accepted).
    pub error: Option<String>,
    /// `accepted`, `unchanged` (the artifact and the chosen historical
    /// table are the ones serving: nothing published, age kept) or
    /// `failed`; a failed reload leaves serving data as it was.
    pub outcome: &'static str,
    pub ready: bool,
    pub serving_generation: u64,
}

#[cfg(test)]
mod tests {
    use super::*;
    use hodos_serving::speeds::ErrorKind;

    /// The wire form is byte for byte the one the service sent before the
    /// DTOs existed (then the serving types' own serde form put through a
    /// `serde_json::Value`, keys sorted; captured from `/admin/status` and a
    /// rejected upload), with the timestamp in chrono's RFC 3339 form; the
    /// status gained `historical_path`, `historical_problems`,
    /// `historical_source` and `live_problems` (issue "Honest answers").
    #[test]
    fn dtos_keep_the_wire_form() {
        let report = TableReport {
            rows: 3,
            accepted: 1,
            bad: 2,
            superseded: 0,
            bad_by_kind: [("malformed_row".to_string(), 2)].into_iter().collect(),
            first_errors: vec![
                RowError {
                    line: Some(2),
                    index: None,
                    kind: ErrorKind::MalformedRow,
                    message: "short row".into(),
                },
                RowError {
                    line: None,
                    index: Some(0),
                    kind: ErrorKind::BadSamples,
                    message: "samples".into(),
                },
            ],
            rejected: true,
            reject_reason: Some("too many bad rows".into()),
        };
        let report_json = r#"{"accepted":1,"bad":2,"bad_by_kind":{"malformed_row":2},"first_errors":[{"kind":"malformed_row","line":2,"message":"short row"},{"index":0,"kind":"bad_samples","message":"samples"}],"reject_reason":"too many bad rows","rejected":true,"rows":3,"superseded":0}"#;
        assert_eq!(
            serde_json::to_string(&TableReportDto::from(&report)).unwrap(),
            report_json
        );
        let status = RegionStatus {
            ready: true,
            loading: false,
            degraded_reason: None,
            generation: 4,
            historical_version: Some("v1".into()),
            historical_rows: Some(10),
            historical_age_s: Some(1.5),
            live_edges: 2,
            live_newest_age_s: None,
            historical_source: Some("upload"),
            historical_path: Some("/state/historical.table".into()),
            historical_problems: vec![],
            live_problems: vec!["x".into()],
            last_reload: Some(ReloadOutcome {
                table: "historical",
                outcome: "rejected",
                at: DateTime::parse_from_rfc3339("2026-12-02T08:30:00.123Z")
                    .unwrap()
                    .with_timezone(&Utc),
                error: Some("bad".into()),
                report: Some(report),
            }),
            last_live_batch: None,
            profiles: None,
        };
        let want = format!(
            r#"{{"degraded_reason":null,"generation":4,"historical_age_s":1.5,"historical_path":"/state/historical.table","historical_problems":[],"historical_rows":10,"historical_source":"upload","historical_version":"v1","last_live_batch":null,"last_reload":{{"at":"2026-12-02T08:30:00.123Z","error":"bad","outcome":"rejected","report":{report_json},"table":"historical"}},"live_edges":2,"live_newest_age_s":null,"live_problems":["x"],"model_refused":null,"model_version":null,"profiles":null,"ready":true,"region":"quellhaven"}}"#
        );
        assert_eq!(
            serde_json::to_string(&RegionStatusDto::new("quellhaven", &status)).unwrap(),
            want
        );
    }
}
