//! Public API handlers: parse and validate into DTOs, answer through
//! [`hodos_serving::answer`], convert back ([`super::dto`]), count.

use super::dto::{
    parse_eta_query, parse_json, EtaRequest, EtaResponse, HealthResponse, MatrixRequest,
    MatrixResponse, ReadyResponse, RegionReadiness, RouteResponse, Trip,
};
use super::problem::ApiError;
use super::table as routes;
use super::{AnswerLabels, AppState};
use axum::body::Bytes;
use axum::extract::{Request, State};
use axum::http::request::Parts;
use axum::http::{header, StatusCode};
use axum::response::{IntoResponse, Response};
use axum::Json;
use hodos_serving::admission::{Admit, Ticket};
use hodos_serving::answer::{self, CellAnswer, MatrixQuery, TripQuery};
use hodos_serving::tier::{FallbackReason, Tier};
use metrics::SharedString;

/// Admission of an answer request, its one point: the body is read
/// first (bounded by `server.max_body_bytes`; a GET has none), so a caller
/// that stalls mid-body holds no place; then the request is counted in
/// flight ([`Ticket`], until its response is built) and the ticket goes
/// with it to the gate, which decides its graph permit (the hard cap, then
/// the deadline rule of [`hodos_serving::admission`]).
async fn enter(state: &AppState, req: Request) -> Result<(Parts, Bytes, Ticket), ApiError> {
    let limit = state.settings.server.max_body_bytes;
    let (parts, body) = req.into_parts();
    let bytes = axum::body::to_bytes(body, limit)
        .await
        .map_err(|_| ApiError::TooLarge {
            limit,
            setting: "server.max_body_bytes",
        })?;
    Ok((parts, bytes, state.catalog.admission.enter()))
}

/// Refuses a body that is not JSON (an absent content type is taken as
/// JSON).
fn json_only(parts: &Parts) -> Result<(), ApiError> {
    let ct = parts
        .headers
        .get(header::CONTENT_TYPE)
        .and_then(|v| v.to_str().ok())
        .unwrap_or("")
        .to_ascii_lowercase();
    if !ct.is_empty() && !ct.starts_with("application/json") {
        return Err(ApiError::UnsupportedMediaType(format!(
            "send the body as application/json, not {ct}"
        )));
    }
    Ok(())
}

fn with_labels(mut resp: Response, tier: &'static str, region: SharedString) -> Response {
    resp.extensions_mut().insert(AnswerLabels { tier, region });
    resp
}

async fn answer_trip(
    state: &AppState,
    trip: Trip,
    route: &'static str,
    geometry: bool,
    ticket: &Ticket,
) -> Response {
    let q = TripQuery {
        from: trip.from,
        to: trip.to,
        depart: trip.depart_at,
        budget_ms: trip.budget_ms,
        geometry,
    };
    let a = answer::trip(&state.catalog, &q, Admit::Counted(ticket)).await;
    let region = state
        .catalog
        .region_label_of(a.snapshot.as_ref().map(|(r, _)| r.as_str()));
    hodos_serving::metrics::answer(route, region.clone(), a.tier, a.reason, 1);
    let resp = if geometry {
        Json(RouteResponse::new(&a, trip.from, trip.to)).into_response()
    } else {
        Json(EtaResponse::from(&a)).into_response()
    };
    with_labels(resp, a.tier.as_str(), region)
}

pub async fn eta_get(State(state): State<AppState>, req: Request) -> Result<Response, ApiError> {
    let (parts, _, ticket) = enter(&state, req).await?;
    let trip = parse_eta_query(parts.uri.query())?;
    Ok(answer_trip(&state, trip, routes::ETA, false, &ticket).await)
}

pub async fn eta_post(State(state): State<AppState>, req: Request) -> Result<Response, ApiError> {
    let (parts, body, ticket) = enter(&state, req).await?;
    json_only(&parts)?;
    let trip = parse_json::<EtaRequest>(&body)?.validate()?;
    Ok(answer_trip(&state, trip, routes::ETA, false, &ticket).await)
}

pub async fn route(State(state): State<AppState>, req: Request) -> Result<Response, ApiError> {
    let (parts, body, ticket) = enter(&state, req).await?;
    json_only(&parts)?;
    let trip = parse_json::<EtaRequest>(&body)?.validate()?;
    Ok(answer_trip(&state, trip, routes::ROUTE, true, &ticket).await)
}

/// Counts a matrix's cells per (region, tier, reason), recording each count
/// once (a 20×20 matrix would otherwise do 400 labelled-counter lookups),
/// and returns the latency tier label: the cells' worst tier (best first:
/// live, historical, free_flow, heuristic; cells of one matrix carry their
/// own tiers), `none` for no cells.
fn count_cells(state: &AppState, cells: &[CellAnswer]) -> &'static str {
    let mut best: Option<Tier> = None;
    let mut counts: Vec<(Option<u16>, Tier, Option<FallbackReason>, u64)> = Vec::new();
    for c in cells {
        match counts
            .iter_mut()
            .find(|(g, t, r, _)| *g == c.region && *t == c.tier && *r == c.reason)
        {
            Some(k) => k.3 += 1,
            None => counts.push((c.region, c.tier, c.reason, 1)),
        }
        best = Some(best.map_or(c.tier, |b| b.max(c.tier)));
    }
    for (g, t, r, n) in counts {
        let region = state.catalog.region_label(g);
        hodos_serving::metrics::answer(routes::MATRIX, region, t, r, n);
    }
    best.map(|t| t.as_str()).unwrap_or("none")
}

pub async fn matrix(State(state): State<AppState>, req: Request) -> Result<Response, ApiError> {
    let (parts, body, ticket) = enter(&state, req).await?;
    json_only(&parts)?;
    let m =
        parse_json::<MatrixRequest>(&body)?.validate(state.catalog.cfg.query.max_matrix_cells)?;
    let q = MatrixQuery {
        from: m.from,
        to: m.to,
        depart: m.depart_at,
        budget_ms: m.budget_ms,
    };
    let a = answer::matrix_trip(&state.catalog, q, Admit::Counted(&ticket)).await;
    let tier = count_cells(&state, &a.cells[..a.rows * a.cols]);
    // Latency is labelled with the region that answered the most cells.
    let region = state
        .catalog
        .region_label_of(a.snapshot.as_ref().map(|(r, _)| r.as_str()));
    Ok(with_labels(
        Json(MatrixResponse::from(&a)).into_response(),
        tier,
        region,
    ))
}

pub async fn healthz() -> impl IntoResponse {
    Json(HealthResponse::ALIVE)
}

/// Each region's state; 200 when the regions `server.ready_when` asks for
/// are serving, else 503 (what a readiness probe acts on).
pub async fn readyz(State(state): State<AppState>) -> impl IntoResponse {
    let regions: Vec<RegionReadiness> = state
        .catalog
        .regions
        .iter()
        .map(|r| RegionReadiness::new(&r.name, &r.status()))
        .collect();
    let r = ReadyResponse::new(regions, state.settings.server.ready_when);
    let code = if r.is_ready() {
        StatusCode::OK
    } else {
        StatusCode::SERVICE_UNAVAILABLE
    };
    (code, Json(r))
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

/// `GET /openapi.json`: the document made when the state was.
pub async fn openapi(State(state): State<AppState>) -> Response {
    state.docs.public()
}

pub async fn not_found() -> Response {
    ApiError::NotFound("no such endpoint; see /openapi.json".into()).into_response()
}
