//! Admin API on its own listener: upload a historical table, post live
//! observations, trigger a reload, read per-region status. Every route
//! requires `Authorization: Bearer <token>` (the scheme in any letter case,
//! RFC 9110 §11.1), compared in constant time; with no token configured
//! every request is refused. 404 names only an unknown region; a region
//! without a graph answers 409, a failed reload 422 or 500, each with the
//! reason in the problem's `detail`. Uploads are streamed to the parser
//! ([`super::upload`]) under their own limits: `admin.max_upload_bytes`
//! for a historical table, `admin.max_live_batch_bytes` for a live batch
//! (413 past either).

use super::dto::{
    HistoricalAccepted, LiveAccepted, ModelAccepted, RegionStatusDto, ReloadResponse,
    StatusResponse, TableReportDto,
};
use super::problem::ApiError;
use super::upload::{self, BodyReader, Pumped};
use super::AppState;
use axum::extract::{Path, Request, State};
use axum::http::{header, HeaderMap};
use axum::middleware::Next;
use axum::response::{IntoResponse, Response};
use axum::Json;
use hodos_serving::snapshot::{RegionUpdater, Reloaded, UpdateError, UpdateFailure};
use std::sync::Arc;
use subtle::ConstantTimeEq;

/// `GET /admin/openapi.json`: the document made when the state was.
pub(super) async fn openapi_document(State(state): State<AppState>) -> Response {
    state.docs.admin()
}

/// Constant-time bearer token check.
pub fn token_ok(headers: &HeaderMap, expected: &str) -> bool {
    if expected.is_empty() {
        return false;
    }
    let Some(v) = headers
        .get(header::AUTHORIZATION)
        .and_then(|v| v.to_str().ok())
    else {
        return false;
    };
    // RFC 9110 §11.1 / RFC 7235 §2.1: the scheme name is case-insensitive
    // and is followed by one or more spaces.
    let Some((scheme, given)) = v.split_once(' ') else {
        return false;
    };
    if !scheme.eq_ignore_ascii_case("bearer") {
        return false;
    }
    let given = given.trim_start_matches(' ');
    given.as_bytes().ct_eq(expected.as_bytes()).into()
}

pub(super) async fn require_token(
    State(state): State<AppState>,
    req: Request,
    next: Next,
) -> Response {
    if !token_ok(req.headers(), &state.settings.admin.token) {
        return ApiError::Unauthorized.into_response();
    }
    next.run(req).await
}

fn region(state: &AppState, name: &str) -> Result<Arc<RegionUpdater>, ApiError> {
    state
        .service
        .region(name)
        .cloned()
        .ok_or_else(|| ApiError::NotFound(format!("no region named {name:?}")))
}

fn content_type(req: &Request) -> String {
    req.headers()
        .get(header::CONTENT_TYPE)
        .and_then(|v| v.to_str().ok())
        .unwrap_or("")
        .to_ascii_lowercase()
}

/// Hands the request body, as a stream of at most `limit` bytes, to
/// `update` (run as a task of its own, so a client that goes away cannot
/// cancel it halfway through applying) and answers 413 naming `setting`
/// when the body is over the limit: at once if its `Content-Length` says
/// so, else as soon as the bytes pass it (nothing is applied then).
async fn streamed<T, F, Fut>(
    req: Request,
    limit: usize,
    setting: &'static str,
    update: F,
) -> Result<T, ApiError>
where
    F: FnOnce(BodyReader) -> Fut,
    Fut: std::future::Future<Output = Result<T, UpdateError>> + Send + 'static,
    T: Send + 'static,
{
    let too_large = ApiError::TooLarge { limit, setting };
    let declared = req
        .headers()
        .get(header::CONTENT_LENGTH)
        .and_then(|v| v.to_str().ok())
        .and_then(|v| v.parse::<u64>().ok());
    if declared.is_some_and(|n| n > limit as u64) {
        return Err(too_large);
    }
    let (body, pump) = upload::stream(req.into_body(), limit);
    let task = tokio::spawn(update(body));
    let pumped = pump.await;
    let out = task.await.map_err(|e| {
        tracing::error!(error = %e, "admin upload task failed");
        ApiError::Internal
    })?;
    match pumped {
        Pumped::OverLimit => Err(too_large),
        // The body deadline, if it fired, answers 408 instead.
        Pumped::Failed => Err(ApiError::Malformed(
            "the request body could not be read to its end".into(),
        )),
        Pumped::Complete | Pumped::Abandoned => out.map_err(update_error),
    }
}

fn update_error(e: UpdateError) -> ApiError {
    match e {
        UpdateError::Rejected(err) => ApiError::Rejected {
            detail: err.to_string(),
            report: err.report().map(|r| Box::new(TableReportDto::from(r))),
        },
        // 404 is for unknown region names only: a known region without a
        // graph is a state conflict the operator can fix (reload).
        UpdateError::Unavailable(why) => ApiError::NoGraph(why.to_string()),
        UpdateError::TablesRejected(why) => ApiError::Rejected {
            detail: format!("no historical table could be used: {why}"),
            report: None,
        },
        UpdateError::GraphReplaced => ApiError::GraphReplaced(e.to_string()),
        UpdateError::Failed(UpdateFailure::Load(e)) => ApiError::ReloadFailed(format!(
            "the artifact did not load: {e}; the serving snapshot, if any, is unchanged"
        )),
        UpdateError::Failed(msg) => {
            tracing::error!(error = %msg, "admin update failed");
            ApiError::Internal
        }
    }
}

pub(super) async fn status(State(state): State<AppState>) -> Json<StatusResponse> {
    Json(StatusResponse {
        regions: state
            .catalog
            .regions
            .iter()
            .map(|r| RegionStatusDto {
                model_refused: r.correction.refused(),
                model_version: r.correction.current().map(|m| m.meta.model_version),
                ..RegionStatusDto::new(&r.name, &r.status())
            })
            .collect(),
    })
}

pub(super) async fn put_historical(
    State(state): State<AppState>,
    Path(name): Path<String>,
    req: Request,
) -> Result<Json<HistoricalAccepted>, ApiError> {
    let r = region(&state, &name)?;
    let handle = r.clone();
    let report = streamed(
        req,
        state.settings.admin.max_upload_bytes,
        "admin.max_upload_bytes",
        move |body| async move { handle.put_historical_from(body).await },
    )
    .await?;
    let st = r.status();
    Ok(Json(HistoricalAccepted {
        generation: st.generation,
        outcome: "accepted",
        report: TableReportDto::from(&report),
        version: st.historical_version,
    }))
}

/// A correction model file: read whole (it is small next to the upload
/// limit), checked, saved, then served; a refused file changes nothing.
pub(super) async fn put_model(
    State(state): State<AppState>,
    Path(name): Path<String>,
    req: Request,
) -> Result<Json<ModelAccepted>, ApiError> {
    use hodos_serving::snapshot::ModelUpdateError;
    use std::io::Read;
    let r = region(&state, &name)?;
    let outcome = streamed(
        req,
        state.settings.admin.max_upload_bytes,
        "admin.max_upload_bytes",
        move |mut body| async move {
            let read = tokio::task::spawn_blocking(move || {
                let mut bytes = Vec::new();
                body.read_to_end(&mut bytes).map(|_| bytes)
            })
            .await;
            match read {
                Ok(Ok(bytes)) => Ok(Some(r.put_model(bytes).await)),
                // The pump's verdict (over the limit, cut off) answers.
                _ => Ok(None),
            }
        },
    )
    .await?;
    match outcome {
        Some(Ok(m)) => Ok(Json(ModelAccepted::from(&*m))),
        Some(Err(ModelUpdateError::Refused(e))) => Err(ApiError::Rejected {
            detail: format!("the model was refused: {e}; the model before it keeps serving"),
            report: None,
        }),
        Some(Err(e @ ModelUpdateError::Save { .. })) => {
            tracing::error!(error = %e, "model upload not saved");
            Err(ApiError::Internal)
        }
        None => Err(ApiError::Malformed(
            "the request body could not be read to its end".into(),
        )),
    }
}

pub(super) async fn post_live(
    State(state): State<AppState>,
    Path(name): Path<String>,
    req: Request,
) -> Result<Json<LiveAccepted>, ApiError> {
    let r = region(&state, &name)?;
    let csv = content_type(&req).starts_with("text/csv");
    let report = streamed(
        req,
        state.settings.admin.max_live_batch_bytes,
        "admin.max_live_batch_bytes",
        move |body| async move { r.put_live_from(body, csv).await },
    )
    .await?;
    Ok(Json(LiveAccepted {
        outcome: "accepted",
        report: TableReportDto::from(&report),
    }))
}

pub(super) async fn reload(
    State(state): State<AppState>,
    Path(name): Path<String>,
) -> Result<Json<ReloadResponse>, ApiError> {
    let r = region(&state, &name)?;
    // A reload that changed nothing because it failed is an error answer
    // (500 for an artifact that did not load, 422 when every historical
    // table was refused), never a 200.
    let outcome = match r.reload().await.map_err(update_error)? {
        Reloaded::Accepted => "accepted",
        Reloaded::Unchanged => "unchanged",
    };
    let st = r.status();
    Ok(Json(ReloadResponse {
        error: None,
        outcome,
        ready: st.ready,
        serving_generation: st.generation,
    }))
}
