//! Public API handlers: parse and validate into DTOs, answer through
//! [`crate::serving::answer`], convert back, count.

use super::dto::{
    parse_eta_query, parse_json, EtaRequest, EtaResponse, MatrixRequest, MatrixResponse,
    RouteResponse, SnapshotRef, Trip,
};
use super::problem::ApiError;
use super::{AppState, TierLabel};
use crate::serving::answer::{self, Answer};
use crate::serving::tier::Tier;
use axum::body::Bytes;
use axum::extract::{RawQuery, Request, State};
use axum::http::header;
use axum::response::{IntoResponse, Response};
use axum::Json;

/// Route templates that answer trips (metric labels).
pub const ANSWER_ROUTES: [&str; 3] = ["/v1/eta", "/v1/eta/matrix", "/v1/route"];

/// Reads a JSON request body up to the configured limit.
async fn body_bytes(state: &AppState, req: Request) -> Result<Bytes, ApiError> {
    let limit = state.settings.server.max_body_bytes;
    let ct = req
        .headers()
        .get(header::CONTENT_TYPE)
        .and_then(|v| v.to_str().ok())
        .unwrap_or("")
        .to_ascii_lowercase();
    if !ct.is_empty() && !ct.starts_with("application/json") {
        return Err(ApiError::UnsupportedMediaType(format!(
            "send the body as application/json, not {ct}"
        )));
    }
    axum::body::to_bytes(req.into_body(), limit)
        .await
        .map_err(|_| ApiError::TooLarge { limit })
}

fn snapshot_ref(s: &Option<(String, u64)>) -> Option<SnapshotRef> {
    s.as_ref().map(|(region, generation)| SnapshotRef {
        region: region.clone(),
        generation: *generation,
    })
}

fn eta_dto(a: &Answer) -> EtaResponse {
    EtaResponse {
        eta_s: round3(a.eta_s),
        meters: round3(a.meters),
        tier: a.tier.as_str(),
        fallback_reason: a.reason.map(|r| r.as_str()),
        speeds_age_s: a.speeds_age_s.map(round3),
        snapshot: snapshot_ref(&a.snapshot),
        from_snap_m: a.from_snap_m.map(round3),
        to_snap_m: a.to_snap_m.map(round3),
    }
}

fn round3(x: f64) -> f64 {
    (x * 1000.0).round() / 1000.0
}

fn with_tier(mut resp: Response, tier: &'static str) -> Response {
    resp.extensions_mut().insert(TierLabel(tier));
    resp
}

/// Whether admission control let this request do graph work (set by the
/// `admit` middleware on the answer routes; absent means admitted).
#[derive(Debug, Clone, Copy)]
pub struct Admitted(pub bool);

fn admitted(ext: &axum::http::Extensions) -> bool {
    ext.get::<Admitted>().map(|a| a.0).unwrap_or(true)
}

async fn answer_trip(
    state: &AppState,
    trip: Trip,
    route: &'static str,
    geometry: bool,
    admitted: bool,
) -> Response {
    let a = answer::trip(
        &state.catalog,
        trip.from,
        trip.to,
        trip.depart_at,
        trip.budget_ms,
        geometry,
        admitted,
    )
    .await;
    crate::serving::metrics::answer(route, a.tier, a.reason, 1);
    let tier = a.tier.as_str();
    let resp = if geometry {
        let coords: Vec<[f64; 2]> = match &a.geometry {
            Some(g) => g.iter().map(|p| [p.lon, p.lat]).collect(),
            // Heuristic answers have no road path: a straight line.
            None => vec![[trip.from.lon, trip.from.lat], [trip.to.lon, trip.to.lat]],
        };
        Json(RouteResponse {
            eta: eta_dto(&a),
            geometry: serde_json::json!({"type": "LineString", "coordinates": coords}),
        })
        .into_response()
    } else {
        Json(eta_dto(&a)).into_response()
    };
    with_tier(resp, tier)
}

pub async fn eta_get(
    State(state): State<AppState>,
    RawQuery(q): RawQuery,
    admission: Option<axum::Extension<Admitted>>,
) -> Result<Response, ApiError> {
    let trip = parse_eta_query(q.as_deref())?;
    let ok = admission.map(|a| a.0 .0).unwrap_or(true);
    Ok(answer_trip(&state, trip, "/v1/eta", false, ok).await)
}

pub async fn eta_post(State(state): State<AppState>, req: Request) -> Result<Response, ApiError> {
    let ok = admitted(req.extensions());
    let body = body_bytes(&state, req).await?;
    let trip = parse_json::<EtaRequest>(&body)?.validate()?;
    Ok(answer_trip(&state, trip, "/v1/eta", false, ok).await)
}

pub async fn route(State(state): State<AppState>, req: Request) -> Result<Response, ApiError> {
    let ok = admitted(req.extensions());
    let body = body_bytes(&state, req).await?;
    let trip = parse_json::<EtaRequest>(&body)?.validate()?;
    Ok(answer_trip(&state, trip, "/v1/route", true, ok).await)
}

pub async fn matrix(State(state): State<AppState>, req: Request) -> Result<Response, ApiError> {
    let ok = admitted(req.extensions());
    let body = body_bytes(&state, req).await?;
    let m =
        parse_json::<MatrixRequest>(&body)?.validate(state.catalog.cfg.query.max_matrix_cells)?;
    let a = answer::matrix_trip(&state.catalog, m.from, m.to, m.depart_at, m.budget_ms, ok).await;
    let mut eta_s = Vec::with_capacity(a.rows);
    let mut meters = Vec::with_capacity(a.rows);
    let mut tier = Vec::with_capacity(a.rows);
    let mut reason = Vec::with_capacity(a.rows);
    let mut best: Option<Tier> = None;
    // Count cells per (tier, reason) and record each count once: a 20×20
    // matrix would otherwise do 400 labelled-counter lookups.
    let mut counts: Vec<(Tier, Option<crate::serving::tier::FallbackReason>, u64)> = Vec::new();
    for i in 0..a.rows {
        let row = &a.cells[i * a.cols..(i + 1) * a.cols];
        eta_s.push(row.iter().map(|c| round3(c.eta_s)).collect());
        meters.push(row.iter().map(|c| round3(c.meters)).collect());
        tier.push(row.iter().map(|c| c.tier.as_str()).collect());
        reason.push(row.iter().map(|c| c.reason.map(|r| r.as_str())).collect());
        for c in row {
            match counts
                .iter_mut()
                .find(|(t, r, _)| *t == c.tier && *r == c.reason)
            {
                Some(k) => k.2 += 1,
                None => counts.push((c.tier, c.reason, 1)),
            }
            best = Some(match best {
                None => c.tier,
                Some(b) if b == c.tier => b,
                Some(_) => Tier::Heuristic,
            });
        }
    }
    for (t, r, n) in counts {
        crate::serving::metrics::answer("/v1/eta/matrix", t, r, n);
    }
    let label = match best {
        Some(t) => t.as_str(),
        None => "none",
    };
    let resp = Json(MatrixResponse {
        eta_s,
        meters,
        tier,
        fallback_reason: reason,
        snapshot: snapshot_ref(&a.snapshot),
    })
    .into_response();
    Ok(with_tier(resp, label))
}

pub async fn healthz() -> impl IntoResponse {
    Json(serde_json::json!({"status": "alive"}))
}

/// Ready once every region has a snapshot or is marked degraded (which is
/// every region after start-up: `open` waits for each), saying which.
pub async fn readyz(State(state): State<AppState>) -> impl IntoResponse {
    let regions: Vec<serde_json::Value> = state
        .catalog
        .regions
        .iter()
        .map(|r| {
            let st = r.status();
            serde_json::json!({
                "region": r.name,
                "state": if st.ready { "serving" } else { "degraded" },
                "generation": st.generation,
                "reason": st.degraded_reason,
            })
        })
        .collect();
    let degraded = regions.iter().filter(|r| r["state"] == "degraded").count();
    Json(serde_json::json!({
        "status": "ready",
        "degraded_regions": degraded,
        "regions": regions,
    }))
}

pub async fn metrics_text(State(state): State<AppState>) -> impl IntoResponse {
    (
        [(
            header::CONTENT_TYPE,
            "text/plain; version=0.0.4; charset=utf-8",
        )],
        state.prometheus.render(),
    )
}

pub async fn openapi() -> impl IntoResponse {
    Json(super::openapi::document())
}

pub async fn not_found() -> Response {
    ApiError::NotFound("no such endpoint; see /openapi.json".into()).into_response()
}
