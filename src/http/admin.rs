//! Admin API on its own listener: upload a historical table, post live
//! observations, trigger a reload, read per-region status. Every route
//! requires `Authorization: Bearer <token>`, compared in constant time; with
//! no token configured every request is refused.

use super::problem::ApiError;
use super::AppState;
use crate::serving::snapshot::{RegionHandle, UpdateError};
use axum::extract::{Path, Request, State};
use axum::http::{header, HeaderMap};
use axum::middleware::Next;
use axum::response::{IntoResponse, Response};
use axum::routing::{get, post, put};
use axum::{Json, Router};
use std::sync::Arc;
use subtle::ConstantTimeEq;

pub fn router(state: AppState) -> Router {
    Router::new()
        .route("/admin/status", get(status))
        .route("/admin/regions/{region}/historical", put(put_historical))
        .route("/admin/regions/{region}/live", post(post_live))
        .route("/admin/regions/{region}/reload", post(reload))
        .fallback(|| async { ApiError::NotFound("no such admin endpoint".into()) })
        .layer(axum::extract::DefaultBodyLimit::disable())
        .layer(axum::middleware::from_fn_with_state(
            state.clone(),
            require_token,
        ))
        .with_state(state)
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
    let Some(given) = v.strip_prefix("Bearer ") else {
        return false;
    };
    given.as_bytes().ct_eq(expected.as_bytes()).into()
}

async fn require_token(State(state): State<AppState>, req: Request, next: Next) -> Response {
    if !token_ok(req.headers(), &state.settings.admin.token) {
        return ApiError::Unauthorized.into_response();
    }
    next.run(req).await
}

fn region(state: &AppState, name: &str) -> Result<Arc<RegionHandle>, ApiError> {
    state
        .catalog
        .regions
        .iter()
        .find(|r| r.name == name)
        .cloned()
        .ok_or_else(|| ApiError::NotFound(format!("no region named {name:?}")))
}

async fn read_body(state: &AppState, req: Request) -> Result<(String, Vec<u8>), ApiError> {
    let limit = state.settings.admin.max_upload_bytes;
    let ct = req
        .headers()
        .get(header::CONTENT_TYPE)
        .and_then(|v| v.to_str().ok())
        .unwrap_or("")
        .to_ascii_lowercase();
    let bytes = axum::body::to_bytes(req.into_body(), limit)
        .await
        .map_err(|_| ApiError::TooLarge { limit })?;
    Ok((ct, bytes.to_vec()))
}

fn update_error(e: UpdateError) -> ApiError {
    match e {
        UpdateError::Rejected(err) => ApiError::Rejected {
            detail: err.to_string(),
            report: err
                .report()
                .map(|r| serde_json::to_value(r).unwrap_or_default())
                .unwrap_or(serde_json::Value::Null),
        },
        UpdateError::Unavailable(msg) => {
            ApiError::NotFound(format!("region has no loaded graph: {msg}"))
        }
        UpdateError::Failed(msg) => {
            tracing::error!(error = %msg, "admin update failed");
            ApiError::Internal
        }
    }
}

async fn status(State(state): State<AppState>) -> impl IntoResponse {
    let regions: Vec<serde_json::Value> = state
        .catalog
        .regions
        .iter()
        .map(|r| {
            let mut v = serde_json::to_value(r.status()).unwrap_or_default();
            v["region"] = serde_json::Value::String(r.name.clone());
            v
        })
        .collect();
    Json(serde_json::json!({ "regions": regions }))
}

async fn put_historical(
    State(state): State<AppState>,
    Path(name): Path<String>,
    req: Request,
) -> Result<Response, ApiError> {
    let r = region(&state, &name)?;
    let (_, body) = read_body(&state, req).await?;
    let report = r.put_historical(body).await.map_err(update_error)?;
    let st = r.status();
    Ok(Json(serde_json::json!({
        "outcome": "accepted",
        "generation": st.generation,
        "version": st.historical_version,
        "report": report,
    }))
    .into_response())
}

async fn post_live(
    State(state): State<AppState>,
    Path(name): Path<String>,
    req: Request,
) -> Result<Response, ApiError> {
    let r = region(&state, &name)?;
    let (ct, body) = read_body(&state, req).await?;
    let csv = ct.starts_with("text/csv");
    let report = r.put_live(&body, csv).await.map_err(update_error)?;
    Ok(Json(serde_json::json!({ "outcome": "accepted", "report": report })).into_response())
}

async fn reload(
    State(state): State<AppState>,
    Path(name): Path<String>,
) -> Result<Response, ApiError> {
    let r = region(&state, &name)?;
    let result = r.reload().await;
    let st = r.status();
    let (outcome, error) = match result {
        Ok(()) => ("accepted", None),
        Err(e) => ("failed", Some(e.to_string())),
    };
    Ok(Json(serde_json::json!({
        "outcome": outcome,
        "error": error,
        "serving_generation": st.generation,
        "ready": st.ready,
    }))
    .into_response())
}
