//! The OpenAPI 3.1 descriptions of the public API (served at
//! `/openapi.json` on the public listener) and of the admin API (served at
//! `/admin/openapi.json` on the admin listener, behind its token like every
//! admin route). Written by hand next to the DTOs they describe: one
//! Operation Object per table operation (the functions below, named in
//! [`super::routes`]), and the component schemas. [`document`] takes its
//! `paths` from the public table and [`admin_document`] from the admin one
//! (given by the caller, so this module never names the table), so each
//! lists exactly what its router serves; `tests/service/routes.rs` checks that
//! from outside, and `tests/service/service_api.rs` runs an external validator on
//! the result.
//!
//! Neither document has `servers`: the listeners are configured
//! (`[server]`/`[admin]`), and without `servers` a document is relative to
//! where it was fetched (OpenAPI 3.1 §4.8.1), which is the right listener.

use super::dto::request::{BUDGET_MAX, QUERY_COORD_PATTERN};
use super::table::Route;
use serde_json::{json, Map, Value};

fn problem_response(desc: &str) -> Value {
    json!({
        "description": desc,
        "content": {"application/problem+json": {"schema": {"$ref": "#/components/schemas/Problem"}}}
    })
}

fn json_response(desc: &str, schema: &str) -> Value {
    json!({
        "description": desc,
        "content": {"application/json": {"schema": {"$ref": format!("#/components/schemas/{schema}")}}}
    })
}

/// 4xx problems of the answer routes, plus `extra` (status, description).
fn errors(extra: &[(&str, &str)]) -> Value {
    let mut m = Map::new();
    m.insert(
        "400".into(),
        problem_response("Malformed JSON or query string"),
    );
    m.insert("413".into(), problem_response("Body over the size limit"));
    m.insert(
        "415".into(),
        problem_response("Body is not application/json"),
    );
    m.insert(
        "422".into(),
        problem_response("A field breaks a rule (the problem names field and rule)"),
    );
    for (k, v) in extra {
        m.insert((*k).into(), problem_response(v));
    }
    Value::Object(m)
}

/// `a` with the keys of `b` added.
fn merge(mut a: Value, b: Value) -> Value {
    if let (Some(a), Some(b)) = (a.as_object_mut(), b.as_object()) {
        for (k, v) in b {
            a.insert(k.clone(), v.clone());
        }
    }
    a
}

fn admin_auth() -> Value {
    json!([{"adminToken": []}])
}

fn region_param() -> Value {
    json!([{"name": "region", "in": "path", "required": true, "schema": {"type": "string"}}])
}

pub fn eta_get() -> Value {
    json!({
        "operationId": "etaGet",
        "summary": "Travel time between two coordinates (query string form)",
        "parameters": [
            {"name": "from", "in": "query", "required": true, "schema": {"type": "string", "pattern": QUERY_COORD_PATTERN}, "description": "Origin as LAT,LON (WGS84 decimal degrees)"},
            {"name": "to", "in": "query", "required": true, "schema": {"type": "string", "pattern": QUERY_COORD_PATTERN}, "description": "Destination as LAT,LON (WGS84 decimal degrees)"},
            {"name": "leaving", "in": "query", "required": false, "schema": {"type": "string", "format": "date-time"}, "description": "When the vehicle sets off (RFC 3339 with offset); absent: now"},
            {"name": "budget_ms", "in": "query", "required": false, "schema": {"type": "integer", "minimum": 1, "maximum": BUDGET_MAX}}
        ],
        "responses": merge(json!({"200": json_response("An ETA", "EtaResponse")}), errors(&[]))
    })
}

pub fn eta_post() -> Value {
    json!({
        "operationId": "etaPost",
        "summary": "Travel time between two coordinates",
        "requestBody": {"required": true, "content": {"application/json": {"schema": {"$ref": "#/components/schemas/EtaRequest"}}}},
        "responses": merge(json!({"200": json_response("An ETA", "EtaResponse")}), errors(&[]))
    })
}

pub fn matrix() -> Value {
    json!({
        "operationId": "etaMatrix",
        "summary": "Travel-time matrix (bucket many-to-many); cells not done within the budget come from the heuristic tier and are marked",
        "requestBody": {"required": true, "content": {"application/json": {"schema": {"$ref": "#/components/schemas/MatrixRequest"}}}},
        "responses": merge(json!({"200": json_response("A matrix", "MatrixResponse")}), errors(&[]))
    })
}

pub fn route() -> Value {
    json!({
        "operationId": "route",
        "summary": "ETA plus the path as a GeoJSON LineString (RFC 7946)",
        "requestBody": {"required": true, "content": {"application/json": {"schema": {"$ref": "#/components/schemas/EtaRequest"}}}},
        "responses": merge(json!({"200": json_response("An ETA with geometry", "RouteResponse")}), errors(&[]))
    })
}

pub fn healthz() -> Value {
    json!({"operationId": "healthz", "summary": "Liveness",
        "responses": {"200": json_response("The process is alive", "HealthResponse")}})
}

pub fn readyz() -> Value {
    json!({"operationId": "readyz", "summary": "Readiness: each region's state; 200 when the regions server.ready_when asks for are serving, else 503",
        "responses": {"200": json_response("Ready: per-region state", "ReadyResponse"),
                      "503": json_response("Not ready: per-region state, with reasons", "ReadyResponse")}})
}

pub fn metrics() -> Value {
    json!({"operationId": "metrics", "summary": "Prometheus text exposition",
        "responses": {"200": {"description": "Metrics", "content": {"text/plain": {"schema": {"type": "string"}}}}}})
}

pub fn dashboard() -> Value {
    json!({"operationId": "dashboard", "summary": "The live dashboard (an HTML page that polls /dashboard/data)",
        "responses": {"200": {"description": "The page", "content": {"text/html": {"schema": {"type": "string"}}}}}})
}

pub fn dashboard_data() -> Value {
    json!({"operationId": "dashboardData", "summary": "The counters the dashboard polls: running totals since start, read from the registry /metrics renders",
        "responses": {"200": json_response("A snapshot", "DashboardSnapshot")}})
}

pub fn dashboard_uplot_js() -> Value {
    json!({"operationId": "dashboardUplotJs", "summary": "The dashboard's chart library (uPlot 1.6.32, MIT), vendored",
        "responses": {"200": {"description": "Script", "content": {"text/javascript": {"schema": {"type": "string"}}}}}})
}

pub fn dashboard_uplot_css() -> Value {
    json!({"operationId": "dashboardUplotCss", "summary": "The chart library's style sheet",
        "responses": {"200": {"description": "Style sheet", "content": {"text/css": {"schema": {"type": "string"}}}}}})
}

pub fn openapi() -> Value {
    json!({"operationId": "openapi", "summary": "This document",
        "responses": {"200": {"description": "OpenAPI 3.1", "content": {"application/json": {"schema": {"type": "object"}}}}}})
}

pub fn admin_openapi() -> Value {
    json!({"operationId": "adminOpenapi", "summary": "This document (the admin API)", "security": admin_auth(),
        "responses": {"200": {"description": "OpenAPI 3.1", "content": {"application/json": {"schema": {"type": "object"}}}},
                      "401": problem_response("Missing or wrong token")}})
}

pub fn admin_status() -> Value {
    json!({"operationId": "adminStatus", "summary": "Per-region snapshot generation, data ages, last reload outcome", "security": admin_auth(),
        "responses": {"200": json_response("Status", "StatusResponse"), "401": problem_response("Missing or wrong token")}})
}

pub fn admin_put_historical() -> Value {
    json!({"operationId": "adminPutHistorical", "summary": "Upload a historical profile (CSV: hour_of_week,kmh and segment and/or tail,head, optional way)", "security": admin_auth(),
        "parameters": region_param(),
        "requestBody": {"required": true, "content": {"text/csv": {"schema": {"type": "string"}}}},
        "responses": {"200": json_response("Accepted, with the validation report", "HistoricalAccepted"),
                      "401": problem_response("Missing or wrong token"), "404": problem_response("Unknown region"), "409": problem_response("The region has no graph loaded (its artifact failed to load), or its graph was replaced while the table arrived (nothing saved: send it again); the detail names why"), "413": problem_response("Table over `admin.max_upload_bytes`; nothing saved"),
                      "422": problem_response("Rejected whole; the problem carries the validation report")}})
}

pub fn admin_post_live() -> Value {
    json!({"operationId": "adminPostLive", "summary": "Post live observations (JSON array, or CSV with Content-Type text/csv)", "security": admin_auth(),
        "parameters": region_param(),
        "requestBody": {"required": true, "content": {
            "application/json": {"schema": {"type": "array", "items": {"$ref": "#/components/schemas/Observation"}}},
            "text/csv": {"schema": {"type": "string"}}}},
        "responses": {"200": json_response("Applied, with the validation report", "LiveAccepted"),
                      "401": problem_response("Missing or wrong token"), "404": problem_response("Unknown region"),
                      "409": problem_response("The region has no graph loaded (its artifact failed to load), or its graph was replaced while the batch arrived (nothing applied: send it again); the detail names why"),
                      "413": problem_response("Batch over `admin.max_live_batch_bytes`; nothing applied"),
                      "422": problem_response("Rejected whole; the problem carries the validation report")}})
}

pub fn admin_post_trips() -> Value {
    json!({"operationId": "adminPostTrips", "summary": "Post completed trips (our CSV with a header, or JSON lines); each is answered as hodos answers its departure now and its error recorded in hodos_trip_log_error and hodos_trip_abs_pct_error", "security": admin_auth(),
        "requestBody": {"required": true, "content": {"text/csv": {"schema": {"type": "string"}}, "application/x-ndjson": {"schema": {"type": "string"}}}},
        "responses": {"200": json_response("Recorded, with refused rows by line and the batch's error", "TripsRecorded"),
                      "400": problem_response("The body could not be read as trips at all"),
                      "401": problem_response("Missing or wrong token"),
                      "413": problem_response("Body over `admin.max_upload_bytes`; nothing recorded"),
                      "415": problem_response("Content type is neither text/csv nor application/x-ndjson")}})
}

pub fn admin_put_model() -> Value {
    json!({"operationId": "adminPutModel", "summary": "Upload a correction model written by `hodos train` (binary file); it serves at once and is saved in the region's state_dir", "security": admin_auth(),
        "parameters": region_param(),
        "requestBody": {"required": true, "content": {"application/octet-stream": {"schema": {"type": "string", "format": "binary"}}}},
        "responses": {"200": json_response("Serving, with what the model says about itself", "ModelAccepted"),
                      "401": problem_response("Missing or wrong token"), "404": problem_response("Unknown region"),
                      "413": problem_response("File over `admin.max_upload_bytes`; nothing changed"),
                      "422": problem_response("Refused (magic, version, checksum, features or tree structure); the model before it keeps serving and the detail names why")}})
}

pub fn admin_reload() -> Value {
    json!({"operationId": "adminReload", "summary": "Reload the region's artifact and historical table", "security": admin_auth(),
        "parameters": region_param(),
        "responses": {"200": json_response("Outcome: accepted, or unchanged when the artifact and the chosen historical table are the ones serving", "ReloadResponse"),
                      "401": problem_response("Missing or wrong token"), "404": problem_response("Unknown region"),
                      "422": problem_response("Every historical table was refused; the detail names why and the serving table keeps serving"),
                      "500": problem_response("The artifact did not load; the detail names why and the serving snapshot, if any, is unchanged")}})
}

/// The Paths Object: each table route with its operations.
fn paths(tables: &[&[Route]]) -> Value {
    let mut paths = Map::new();
    for r in tables.iter().flat_map(|t| t.iter()) {
        let item: Map<String, Value> = r
            .ops
            .iter()
            .map(|op| (op.verb.openapi_key().to_string(), (op.doc)()))
            .collect();
        paths.insert(r.path.to_string(), Value::Object(item));
    }
    Value::Object(paths)
}

const LICENSE: &str = "MIT OR Apache-2.0";

/// The public API's document, its paths from `public` (the table
/// [`super::routes::PUBLIC`]).
pub fn document(public: &[Route]) -> Value {
    json!({
        "openapi": "3.1.0",
        "info": {
            "title": "hodos travel-time API",
            "version": env!("CARGO_PKG_VERSION"),
            "description": "Travel times (ETAs), matrices and routes over road graphs, with live, historical, free-flow and heuristic tiers and the share of each answer's time on each speed source. Every valid request gets an answer that says which tier produced it and why. Estimates only: see the README's cautions.",
            "license": {"name": LICENSE, "identifier": LICENSE}
        },
        "paths": paths(&[public]),
        "components": {"schemas": schemas()}
    })
}

/// The admin API's document (its own listener; every operation needs the
/// bearer token), its paths from `admin` ([`super::routes::ADMIN`]).
pub fn admin_document(admin: &[Route]) -> Value {
    json!({
        "openapi": "3.1.0",
        "info": {
            "title": "hodos admin API",
            "version": env!("CARGO_PKG_VERSION"),
            "description": "Operator API on the admin listener: upload historical tables and correction models, post live observations and completed trips, reload a region, read per-region status. Every operation needs `Authorization: Bearer <token>`.",
            "license": {"name": LICENSE, "identifier": LICENSE}
        },
        "security": admin_auth(),
        "paths": paths(&[admin]),
        "components": {
            "securitySchemes": {"adminToken": {"type": "http", "scheme": "bearer"}},
            "schemas": schemas()
        }
    })
}

/// The component schemas, one per DTO of [`super::dto`]. Tiers and
/// reasons are the serving layer's closed sets.
fn schemas() -> Value {
    use hodos_serving::tier::{FallbackReason, Tier};
    let tiers: Vec<Value> = Tier::ALL.iter().map(|t| json!(t.as_str())).collect();
    let mut reasons: Vec<Value> = FallbackReason::ALL
        .iter()
        .map(|r| json!(r.as_str()))
        .collect();
    reasons.push(Value::Null);
    json!({
        "Coord": {"type": "object", "required": ["lat", "lon"], "additionalProperties": false,
            "properties": {"lat": {"type": "number", "minimum": -90, "maximum": 90}, "lon": {"type": "number", "minimum": -180, "maximum": 180}}},
        "EtaRequest": {"type": "object", "required": ["from", "to"], "additionalProperties": false,
            "properties": {"from": {"$ref": "#/components/schemas/Coord"}, "to": {"$ref": "#/components/schemas/Coord"},
                           "leaving": {"type": "string", "format": "date-time", "description": "When the vehicle sets off (RFC 3339 with offset); absent: now"}, "budget_ms": {"type": "integer", "minimum": 1, "maximum": BUDGET_MAX}}},
        "MatrixRequest": {"type": "object", "required": ["from", "to"], "additionalProperties": false,
            "properties": {"from": {"type": "array", "minItems": 1, "items": {"$ref": "#/components/schemas/Coord"}},
                           "to": {"type": "array", "minItems": 1, "items": {"$ref": "#/components/schemas/Coord"}},
                           "leaving": {"type": "string", "format": "date-time", "description": "When the vehicle sets off (RFC 3339 with offset); absent: now"}, "budget_ms": {"type": "integer", "minimum": 1, "maximum": BUDGET_MAX}}},
        "Tier": {"type": "string", "enum": tiers,
            "description": "The speed source with the largest share of the travel time (ties to the better: live, historical, free_flow); heuristic when the graph gave no answer"},
        "FallbackReason": {"type": ["string", "null"], "enum": reasons},
        "Sources": {"type": ["object", "null"], "required": ["live", "historical", "free_flow"], "additionalProperties": false,
            "description": "Shares of the travel time on live, historical and free-flow speeds (adding up to 1); null for heuristic answers",
            "properties": {"live": {"type": "number", "minimum": 0, "maximum": 1}, "historical": {"type": "number", "minimum": 0, "maximum": 1},
                           "free_flow": {"type": "number", "minimum": 0, "maximum": 1}}},
        "SnapshotRef": {"type": ["object", "null"], "properties": {"region": {"type": "string"}, "generation": {"type": "integer"}}},
        "EtaResponse": {"type": "object", "required": ["eta_s", "meters", "tier", "fallback_reason", "speeds_age_s", "sources", "snapshot"],
            "properties": {"eta_s": {"type": "number"}, "meters": {"type": "number"}, "tier": {"$ref": "#/components/schemas/Tier"},
                           "fallback_reason": {"$ref": "#/components/schemas/FallbackReason"}, "speeds_age_s": {"type": ["number", "null"]},
                           "sources": {"$ref": "#/components/schemas/Sources"},
                           "snapshot": {"$ref": "#/components/schemas/SnapshotRef"},
                           "from_snap_m": {"type": ["number", "null"]}, "to_snap_m": {"type": ["number", "null"]},
                           "hour_of_week": {"type": ["integer", "null"], "minimum": 0, "maximum": 167, "description": "departure hour of week in the region's time zone, 0 = Monday 00:00"},
                           "profile": {"$ref": "#/components/schemas/ProfileRef"},
                           "graph_eta_s": {"type": "number", "description": "the tier's uncorrected time; equal to eta_s when no correction model applied"},
                           "eta_low_s": {"type": ["number", "null"], "description": "lower bound of the interval around eta_s (the model's lower quantile, p10 by default); null without a correction model"},
                           "eta_high_s": {"type": ["number", "null"], "description": "upper bound (p90 by default); null without a correction model"},
                           "model_version": {"type": ["integer", "null"], "minimum": 0, "description": "the correction model that gave eta_s; null when none applied"}}},
        "ProfileRef": {"type": ["object", "null"], "required": ["index", "representative_hour"], "description": "the hour-of-week profile whose metric answered (historical tier)",
            "properties": {"index": {"type": "integer", "minimum": 0}, "representative_hour": {"type": "integer", "minimum": 0, "maximum": 167}}},
        "RouteResponse": {"allOf": [{"$ref": "#/components/schemas/EtaResponse"},
            {"type": "object", "required": ["geometry"], "properties": {"geometry": {"type": "object", "description": "GeoJSON LineString, [lon, lat] positions",
                "properties": {"type": {"const": "LineString"}, "coordinates": {"type": "array", "items": {"type": "array", "items": {"type": "number"}, "minItems": 2, "maxItems": 2}}}}}}]},
        "MatrixResponse": {"type": "object", "required": ["eta_s", "meters", "tier", "fallback_reason", "sources"],
            "properties": {"eta_s": {"type": "array", "items": {"type": "array", "items": {"type": "number"}}},
                           "meters": {"type": "array", "items": {"type": "array", "items": {"type": "number"}}},
                           "tier": {"type": "array", "items": {"type": "array", "items": {"$ref": "#/components/schemas/Tier"}}},
                           "fallback_reason": {"type": "array", "items": {"type": "array", "items": {"$ref": "#/components/schemas/FallbackReason"}}},
                           "sources": {"type": "array", "items": {"type": "array", "items": {"$ref": "#/components/schemas/Sources"}}},
                           "snapshot": {"$ref": "#/components/schemas/SnapshotRef"},
                           "graph_eta_s": {"type": "array", "items": {"type": "array", "items": {"type": "number"}}, "description": "per cell, as in EtaResponse"},
                           "eta_low_s": {"type": "array", "items": {"type": "array", "items": {"type": ["number", "null"]}}},
                           "eta_high_s": {"type": "array", "items": {"type": "array", "items": {"type": ["number", "null"]}}},
                           "model_version": {"type": "array", "items": {"type": "array", "items": {"type": ["integer", "null"], "minimum": 0}}}}},
        "Observation": {"type": "object", "required": ["kmh", "observed_at", "samples"], "additionalProperties": false,
            "description": "Names its segments by `segment`, or by `tail` and `head` (every segment with those ends, only those on `way` when given); `segment` given with `way`, `tail` or `head` must agree with them",
            "anyOf": [{"required": ["segment"]}, {"required": ["tail", "head"]}],
            "properties": {"segment": {"type": ["integer", "null"], "minimum": 0}, "way": {"type": ["integer", "null"], "minimum": 0},
                           "tail": {"type": ["integer", "null"], "minimum": 0}, "head": {"type": ["integer", "null"], "minimum": 0},
                           "kmh": {"type": "number", "exclusiveMinimum": 0},
                           "observed_at": {"type": "string", "format": "date-time"}, "samples": {"type": "integer", "minimum": 1}}},
        "HealthResponse": {"type": "object", "required": ["status"], "properties": {"status": {"const": "alive"}}},
        "RegionReadiness": {"type": "object", "required": ["generation", "reason", "region", "state"],
            "properties": {"generation": {"type": "integer"}, "reason": {"type": ["string", "null"]}, "region": {"type": "string"},
                           "state": {"type": "string", "enum": ["serving", "degraded", "estimates_only", "loading"]}}},
        "ReadyResponse": {"type": "object", "required": ["degraded_regions", "ready_when", "regions", "status"],
            "properties": {"degraded_regions": {"type": "integer", "minimum": 0},
                           "ready_when": {"type": "string", "enum": ["all_regions", "any_region"]},
                           "regions": {"type": "array", "items": {"$ref": "#/components/schemas/RegionReadiness"}},
                           "status": {"type": "string", "enum": ["ready", "not_ready"]}}},
        "RowError": {"type": "object", "required": ["kind", "message"],
            "properties": {"index": {"type": "integer", "description": "JSON batch: 0-based element index"},
                           "kind": {"type": "string", "enum": ["unknown_edge", "segment_mismatch", "nonpositive_speed", "not_a_number", "over_max_speed", "bad_hour", "bad_timestamp", "future_timestamp", "bad_samples", "malformed_row"]},
                           "line": {"type": "integer", "description": "CSV: 1-based line of the file"}, "message": {"type": "string"}}},
        "TableReport": {"type": "object", "required": ["accepted", "bad", "bad_by_kind", "first_errors", "rejected", "rows", "superseded"],
            "properties": {"accepted": {"type": "integer"}, "bad": {"type": "integer"},
                           "bad_by_kind": {"type": "object", "additionalProperties": {"type": "integer"}},
                           "first_errors": {"type": "array", "items": {"$ref": "#/components/schemas/RowError"}},
                           "reject_reason": {"type": "string"}, "rejected": {"type": "boolean"},
                           "rows": {"type": "integer"}, "superseded": {"type": "integer"}}},
        "ReloadOutcome": {"type": ["object", "null"], "required": ["at", "error", "outcome", "report", "table"],
            "properties": {"at": {"type": "string", "format": "date-time"}, "error": {"type": ["string", "null"]},
                           "outcome": {"type": "string", "enum": ["accepted", "unchanged", "rejected", "failed"]},
                           "report": {"anyOf": [{"$ref": "#/components/schemas/TableReport"}, {"type": "null"}]},
                           "table": {"type": "string", "enum": ["historical", "live", "artifact"]}}},
        "RegionStatus": {"type": "object",
            "required": ["degraded_reason", "generation", "historical_age_s", "historical_path", "historical_problems", "historical_rows", "historical_source", "historical_version", "last_live_batch", "last_reload", "live_edges", "live_newest_age_s", "live_problems", "model_refused", "model_version", "profiles", "ready", "region"],
            "properties": {"degraded_reason": {"type": ["string", "null"]}, "generation": {"type": "integer"},
                           "historical_age_s": {"type": ["number", "null"]}, "historical_rows": {"type": ["integer", "null"]},
                           "historical_version": {"type": ["string", "null"]},
                           "historical_source": {"type": ["string", "null"], "enum": ["configured", "upload", null]},
                           "historical_path": {"type": ["string", "null"]},
                           "historical_problems": {"type": "array", "items": {"type": "string"}},
                           "live_problems": {"type": "array", "items": {"type": "string"}},
                           "last_live_batch": {"$ref": "#/components/schemas/ReloadOutcome"}, "last_reload": {"$ref": "#/components/schemas/ReloadOutcome"},
                           "live_edges": {"type": "integer"}, "live_newest_age_s": {"type": ["number", "null"]},
                           "model_refused": {"type": ["string", "null"], "description": "why the last correction model offered was refused; the one before keeps serving"},
                           "model_version": {"type": ["integer", "null"], "minimum": 0, "description": "the correction model serving, if any"},
                           "profiles": {"$ref": "#/components/schemas/Profiles"},
                           "ready": {"type": "boolean"}, "region": {"type": "string"}}},
        "Profiles": {"type": ["object", "null"], "description": "hour-of-week profiles of the serving historical table (one free-flow profile without one)",
            "required": ["build_s", "count", "deviation_max", "deviation_median", "exact", "hour_deviation_max", "hour_deviation_median", "hour_factor", "hour_profile", "metric_bytes", "representatives"],
            "properties": {"build_s": {"type": "number"}, "count": {"type": "integer", "minimum": 1},
                           "deviation_max": {"type": "number", "description": "largest relative edge travel-time difference of an hour from its profile (sampled edges)"},
                           "deviation_median": {"type": "number", "description": "median over hours of each hour's median difference"},
                           "exact": {"type": "boolean"},
                           "hour_deviation_max": {"type": "array", "minItems": 168, "maxItems": 168, "items": {"type": "number"}, "description": "per hour of week: largest relative edge travel-time difference from its profile"},
                           "hour_deviation_median": {"type": "array", "minItems": 168, "maxItems": 168, "items": {"type": "number"}, "description": "per hour of week: median relative edge travel-time difference from its profile"},
                           "hour_factor": {"type": "array", "minItems": 168, "maxItems": 168, "items": {"type": "number"}, "description": "heuristic travel-time factor per hour of week"},
                           "hour_profile": {"type": "array", "minItems": 168, "maxItems": 168, "items": {"type": "integer"}},
                           "metric_bytes": {"type": "integer"},
                           "representatives": {"type": "array", "items": {"type": "integer", "minimum": 0, "maximum": 167}}}},
        "StatusResponse": {"type": "object", "required": ["regions"],
            "properties": {"regions": {"type": "array", "items": {"$ref": "#/components/schemas/RegionStatus"}}}},
        "HistoricalAccepted": {"type": "object", "required": ["generation", "outcome", "report", "version"],
            "properties": {"generation": {"type": "integer"}, "outcome": {"const": "accepted"},
                           "report": {"$ref": "#/components/schemas/TableReport"}, "version": {"type": ["string", "null"]}}},
        "DashboardSnapshot": {"type": "object", "required": ["at_ms", "answers", "fallbacks", "latency", "live_age_s", "historical_age_s", "region_ready", "reloads", "trips"],
            "properties": {"at_ms": {"type": "integer"},
                           "answers": {"type": "object", "additionalProperties": {"type": "object", "additionalProperties": {"type": "number"}}, "description": "by region, then tier"},
                           "fallbacks": {"type": "object", "additionalProperties": {"type": "object", "additionalProperties": {"type": "number"}}, "description": "by region, then reason"},
                           "latency": {"type": "object", "required": ["count", "sum_s", "buckets"],
                               "properties": {"count": {"type": "number"}, "sum_s": {"type": "number"},
                                              "buckets": {"type": "array", "description": "[upper bound (null: +Inf), cumulative count] pairs, ascending",
                                              "items": {"type": "array", "minItems": 2, "maxItems": 2, "items": {"type": ["number", "null"]}}}}},
                           "live_age_s": {"type": "object", "additionalProperties": {"type": "number"}},
                           "historical_age_s": {"type": "object", "additionalProperties": {"type": "number"}},
                           "region_ready": {"type": "object", "additionalProperties": {"type": "number"}},
                           "reloads": {"type": "object", "additionalProperties": {"type": "number"}},
                           "trips": {"type": "object", "additionalProperties": {"type": "object", "required": ["count", "ape_sum"],
                               "properties": {"count": {"type": "number"}, "ape_sum": {"type": "number"}}}}}},
        "TripsRecorded": {"type": "object", "required": ["rows", "recorded", "refused", "errors", "mape", "median_ape", "rmsle", "coverage"],
            "properties": {"rows": {"type": "integer", "minimum": 0}, "recorded": {"type": "integer", "minimum": 0}, "refused": {"type": "integer", "minimum": 0},
                           "errors": {"type": "array", "items": {"type": "object", "required": ["line", "kind", "message"],
                               "properties": {"line": {"type": "integer"}, "kind": {"type": "string"}, "message": {"type": "string"}}}},
                           "mape": {"type": ["number", "null"], "description": "percent"}, "median_ape": {"type": ["number", "null"], "description": "percent"},
                           "rmsle": {"type": ["number", "null"]}, "coverage": {"type": ["number", "null"], "description": "share inside the answer's interval; null without a correction model"}}},
        "ModelAccepted": {"type": "object", "required": ["outcome", "model_version", "trained_at", "trees", "features", "interval_levels", "train_window", "test_window", "figures"],
            "properties": {"outcome": {"const": "accepted"}, "model_version": {"type": "integer", "minimum": 0}, "trained_at": {"type": "string"},
                           "trees": {"type": "integer", "minimum": 0}, "features": {"type": "array", "items": {"type": "string"}},
                           "interval_levels": {"type": "array", "minItems": 2, "maxItems": 2, "items": {"type": "number"}},
                           "train_window": {"type": "array", "minItems": 2, "maxItems": 2, "items": {"type": "string"}},
                           "test_window": {"type": ["array", "null"], "minItems": 2, "maxItems": 2, "items": {"type": "string"}},
                           "figures": {"type": "array", "items": {"type": "object", "required": ["set", "estimate", "n", "mape", "rmsle", "coverage"],
                               "properties": {"set": {"type": "string"}, "estimate": {"type": "string"}, "n": {"type": "integer"}, "mape": {"type": "number"},
                                              "rmsle": {"type": "number"}, "coverage": {"type": ["number", "null"]}}}}}},
        "LiveAccepted": {"type": "object", "required": ["outcome", "report"],
            "properties": {"outcome": {"const": "accepted"}, "report": {"$ref": "#/components/schemas/TableReport"}}},
        "ReloadResponse": {"type": "object", "required": ["error", "outcome", "ready", "serving_generation"],
            "properties": {"error": {"type": ["string", "null"]}, "outcome": {"type": "string", "enum": ["accepted", "unchanged", "failed"]},
                           "ready": {"type": "boolean"}, "serving_generation": {"type": "integer"}}},
        "Problem": {"type": "object", "description": "RFC 9457 problem details", "required": ["type", "title", "status", "detail"],
            "properties": {"type": {"type": "string"}, "title": {"type": "string"}, "status": {"type": "integer"}, "detail": {"type": "string"},
                           "field": {"type": "string"}, "rule": {"type": "string"},
                           "report": {"$ref": "#/components/schemas/TableReport", "description": "a rejected table's validation report; absent when it was refused before rows were read"}}}
    })
}

/// Both documents, serialized once when the state is made: the handlers of
/// `/openapi.json` and `/admin/openapi.json` answer these bytes.
#[derive(Debug)]
pub struct Documents {
    public: axum::body::Bytes,
    admin: axum::body::Bytes,
}

impl Documents {
    /// The documents of the tables `public` and `admin`.
    pub fn new(public: &[Route], admin: &[Route]) -> Self {
        let bytes =
            |v: Value| axum::body::Bytes::from(serde_json::to_vec(&v).expect("a JSON value"));
        Documents {
            public: bytes(document(public)),
            admin: bytes(admin_document(admin)),
        }
    }

    /// The public document as a response (`application/json`).
    pub fn public(&self) -> axum::response::Response {
        json_bytes(self.public.clone())
    }

    /// The admin document as a response (`application/json`).
    pub fn admin(&self) -> axum::response::Response {
        json_bytes(self.admin.clone())
    }
}

fn json_bytes(b: axum::body::Bytes) -> axum::response::Response {
    use axum::response::IntoResponse;
    ([(axum::http::header::CONTENT_TYPE, "application/json")], b).into_response()
}
